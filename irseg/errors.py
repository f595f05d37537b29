"""Exception and warning hierarchy of irseg.

Every error raised on purpose by irseg derives from :class:`IrsegError`. Where a
builtin type fits, it is a second base, so callers may also catch ``ValueError``
or ``OSError``. Messages say what failed, in which file (or for which key or
value) and what to do about it. The library never imports click; only
``irseg.cli`` maps these to exit codes.
"""

from __future__ import annotations

__all__ = [
    "IrsegError",
    "ConfigError",
    "MetadataError",
    "InputError",
    "UnsupportedFormatError",
    "CalibrationError",
    "SolverError",
    "OutputError",
    "IrsegWarning",
    "ConvergenceWarning",
    "MetadataWarning",
    "ConditionsWarning",
]


class IrsegError(Exception):
    """Root of every error irseg raises on purpose."""


class ConfigError(IrsegError, ValueError):
    """A bad parameter value or a bad combination of options."""


class MetadataError(ConfigError):
    """A survey/sidecar TOML file with an unknown key, a wrong type or an out-of-range value."""


class InputError(IrsegError, OSError):
    """A missing, unreadable, corrupt or unusable input image."""


class UnsupportedFormatError(InputError):
    """No reader accepts the file (or the file is not a radiometric image)."""


class CalibrationError(IrsegError, ValueError):
    """Missing or implausible radiometric parameters or units."""


class SolverError(IrsegError, RuntimeError):
    """The segmentation solver produced NaN or diverged (slow convergence is not an error)."""


class OutputError(IrsegError, OSError):
    """An output could not be written (not writable, disk full, would escape the output folder)."""


class IrsegWarning(UserWarning):
    """Root of irseg's warnings."""


class ConvergenceWarning(IrsegWarning):
    """The solver stopped at its iteration limit before meeting its tolerance."""


class MetadataWarning(IrsegWarning):
    """Metadata is missing or incomplete; some quantities cannot be computed."""


class ConditionsWarning(IrsegWarning):
    """Survey conditions outside the usual limits (small inside-outside difference, wind, ...)."""
