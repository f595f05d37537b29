"""Value checks of the metadata schema: one function per kind of value.

Each check takes ``(source, section, key, value)`` and returns the converted value, or
raises :class:`~irseg.errors.MetadataError` naming the file, the key, the value and the fix.
Numeric ranges come from :mod:`._bounds` (one table, with the reason for each range).
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable
from typing import Any

from ..errors import MetadataError
from ._bounds import BAND_LIMITS_UM, Bound

__all__: list[str] = []

_Check = Callable[[str, str, str, Any], Any]

#: Integers at least this large are shown by their number of digits, not their digits.
_HUGE_INT = 10**30


def _md_fail(src: str, sec: str, key: str, value: Any, why: str, fix: str) -> MetadataError:
    return MetadataError(f"{src}: [{sec}] {key} = {_md_show(value)} {why}; {fix}")


def _md_show(value: Any) -> str:
    """A short rendering of a value for messages (never fails, never long)."""
    if isinstance(value, str):
        text = f'"{value}"'
        return text if len(text) <= 60 else text[:56] + '..."'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int) and abs(value) >= _HUGE_INT:
        # its digits say nothing more, and Python refuses to print more than 4300 of them
        try:
            digits = len(str(abs(value)))
        except ValueError:  # over 4300 digits (sys.get_int_max_str_digits): estimate from the bits
            digits = int((abs(value).bit_length() - 1) * math.log10(2)) + 1
        return f"{'-' if value < 0 else ''}<an integer of {digits} digits>"
    try:
        text = repr(value)
    except (RecursionError, ValueError):
        return f"<a deeply nested {_md_kind(value)}>"
    return text if len(text) <= 60 else text[:57] + "..."


def _md_number(src: str, sec: str, key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _md_fail(src, sec, key, value, f"is a {_md_kind(value)}, not a number", "write a plain number")
    try:
        out = float(value)
    except OverflowError:  # an integer beyond the float range (about 1.8e308)
        raise _md_fail(
            src, sec, key, value, "is too large to be a number", "write a plain number within the key's range"
        ) from None
    if not math.isfinite(out):
        raise _md_fail(src, sec, key, value, "is not finite", "write a finite number")
    return out


def _md_kind(value: Any) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, str):
        return "string"
    if isinstance(value, (list, tuple)):
        return "list"
    if isinstance(value, dict):
        return "table"
    if isinstance(value, float):
        return "float"
    if isinstance(value, int):
        return "integer"
    return type(value).__name__


def _md_range(bound: Bound, *, fix: str, optional: bool = False) -> _Check:
    """A float check for the interval of ``bound`` (see :mod:`._bounds`)."""

    def check(src: str, sec: str, key: str, value: Any) -> float | None:
        if value is None and optional:
            return None
        x = _md_number(src, sec, key, value)
        if not bound.contains(x):
            raise _md_fail(src, sec, key, value, f"is outside {bound.text()}", fix)
        return x

    return check


def _md_temperature(bound: Bound, *, optional: bool = True) -> _Check:
    """A °C check for the interval of ``bound`` that tells when a value looks like kelvin."""

    def check(src: str, sec: str, key: str, value: Any) -> float | None:
        if value is None and optional:
            return None
        x = _md_number(src, sec, key, value)
        if not bound.contains(x):
            if bound.contains(x - 273.15):
                hint = f"temperatures are in °C; {x:g} looks like kelvin, use {x - 273.15:.2f}"
            else:
                hint = f"give it in °C: {bound.reason}"
            raise _md_fail(src, sec, key, value, f"is outside {bound.text()}", hint)
        return x

    return check


def _md_choice(options: tuple[str, ...], *, optional: bool = False) -> _Check:
    def check(src: str, sec: str, key: str, value: Any) -> str | None:
        if value is None and optional:
            return None
        if not isinstance(value, str):
            raise _md_fail(
                src, sec, key, value, f"is a {_md_kind(value)}, not a name", f"use one of {_md_quote(options)}"
            )
        v = value.strip().lower()
        if v not in options:
            near = difflib.get_close_matches(v, options, n=1, cutoff=0.5)
            fix = f'did you mean "{near[0]}"? ' if near else ""
            raise _md_fail(src, sec, key, value, "is not a valid choice", f"{fix}use one of {_md_quote(options)}")
        return v

    return check


def _md_quote(options: tuple[str, ...]) -> str:
    return ", ".join(f'"{o}"' for o in options)


def _md_band(src: str, sec: str, key: str, value: Any) -> tuple[float, float]:
    lo_um, hi_um = BAND_LIMITS_UM
    fix = (
        f"write the camera's two band edges in micrometres, increasing, within {lo_um:g}-{hi_um:g} µm "
        "(thermal cameras work at 3-5 or 7.5-14 µm), e.g. band_um = [7.5, 14.0]"
    )
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise _md_fail(src, sec, key, value, "is not a list of two numbers", fix)
    lo, hi = (_md_number(src, sec, key, v) for v in value)
    if not 0.0 < lo < hi:
        raise _md_fail(src, sec, key, value, "is not an increasing pair of positive wavelengths", fix)
    if lo < lo_um or hi > hi_um:
        raise _md_fail(src, sec, key, value, f"is outside the thermal infrared, {lo_um:g}-{hi_um:g} µm", fix)
    return (lo, hi)


def _md_seed(src: str, sec: str, key: str, value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise _md_fail(src, sec, key, value, f"is a {_md_kind(value)}, not an integer", "write a whole number >= 0")
    if value < 0 or value >= 2**63:
        raise _md_fail(src, sec, key, value, "is outside [0, 2**63)", "write a whole number >= 0")
    return int(value)


def _md_scale(bound: Bound) -> _Check:
    """The ``scale`` check: a number within ``bound`` and not zero."""

    def check(src: str, sec: str, key: str, value: Any) -> float:
        x = _md_number(src, sec, key, value)
        if x == 0.0:
            raise _md_fail(
                src, sec, key, value, "is zero", "integer images need value = raw * scale + offset, scale != 0"
            )
        if not bound.contains(x):
            raise _md_fail(
                src, sec, key, value, f"is outside {bound.text()}",
                "give the export's temperature step per count (e.g. 0.01 for hundredths of a kelvin)",
            )
        return x

    return check
