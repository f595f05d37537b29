"""The ``irseg`` command line: a thin click layer over :mod:`irseg.batch` and :mod:`irseg.scenes`.

The entry point is :data:`irseg.cli.main.cli`; each command lives in its own module.
"""

from __future__ import annotations

__all__ = ["cli"]


def __getattr__(name: str):  # lazy, so ``import irseg.cli.segment`` does not build the group
    if name == "cli":
        from .main import cli

        return cli
    raise AttributeError(f"module 'irseg.cli' has no attribute {name!r}")
