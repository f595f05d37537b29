"""Exit codes, the ``ctx.meta`` keys commands set for the error map, and :func:`describe` (a CLI leaf)."""

from __future__ import annotations

import re

from .._shared import escape_name
from .options import SETTING_FLAGS

__all__ = ["EXIT_OK", "EXIT_ERROR", "EXIT_USAGE", "EXIT_PARTIAL", "EXIT_INTERRUPTED", "INTERRUPT_HINT",
           "VERBOSE", "describe"]

EXIT_OK, EXIT_ERROR, EXIT_USAGE, EXIT_PARTIAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130

#: ``ctx.meta`` keys a command sets for the error map: the hint printed on an interrupt, and -v.
INTERRUPT_HINT = "irseg.interrupt_hint"
VERBOSE = "irseg.verbose"

_SETTING = re.compile(r"\bthe (\w+) setting\b")
# a setting named bare ("raise max_pixels if ..."): only names with an underscore, which
# never occur as plain words of a message
_BARE = re.compile(r"(?<![\w.\[-])(" + "|".join(re.escape(k) for k in SETTING_FLAGS if "_" in k) + r")(?![\w=\]])")


def describe(message: str) -> str:
    """A library message in command-line words, safe to print on one line.

    "the max_pixels setting" becomes "the option --max-pixels", and a bare setting name
    with an underscore ("raise max_pixels") the flag ("raise --max-pixels"); control
    characters (from file names) are escaped with :func:`irseg._shared.escape_name`.
    Every failure the command line prints goes through here.
    """

    def flag(match: re.Match[str]) -> str:
        name = match.group(1)
        return f"the option {SETTING_FLAGS[name]}" if name in SETTING_FLAGS else match.group(0)

    text = _SETTING.sub(flag, str(message))
    text = _BARE.sub(lambda m: SETTING_FLAGS[m.group(1)], text)
    return escape_name(text)
