"""Exit codes, the ``ctx.meta`` keys commands set for the error map, and :func:`describe` (a CLI leaf)."""

from __future__ import annotations

import re

from .options import SETTING_FLAGS

__all__ = ["EXIT_OK", "EXIT_ERROR", "EXIT_USAGE", "EXIT_PARTIAL", "EXIT_INTERRUPTED", "INTERRUPT_HINT",
           "VERBOSE", "describe"]

EXIT_OK, EXIT_ERROR, EXIT_USAGE, EXIT_PARTIAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130

#: ``ctx.meta`` keys a command sets for the error map: the hint printed on an interrupt, and -v.
INTERRUPT_HINT = "irseg.interrupt_hint"
VERBOSE = "irseg.verbose"

_SETTING = re.compile(r"\bthe (\w+) setting\b")


def describe(message: str) -> str:
    """A library message in command-line words: "the max_pixels setting" -> "the option --max-pixels"."""

    def flag(match: re.Match[str]) -> str:
        name = match.group(1)
        return f"the option {SETTING_FLAGS[name]}" if name in SETTING_FLAGS else match.group(0)

    return _SETTING.sub(flag, message)
