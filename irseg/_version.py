"""The single place the package version is kept."""

__version__ = "0.1.0"
