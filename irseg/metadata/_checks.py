"""Value checks of the metadata schema: one function per kind of value.

Each check takes ``(source, section, key, value)`` and returns the converted value, or
raises :class:`~irseg.errors.MetadataError` naming the file, the key, the value and the fix.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable
from typing import Any

from ..errors import MetadataError

__all__: list[str] = []

_Check = Callable[[str, str, str, Any], Any]


def _md_fail(src: str, sec: str, key: str, value: Any, why: str, fix: str) -> MetadataError:
    return MetadataError(f"{src}: [{sec}] {key} = {_md_show(value)} {why}; {fix}")


def _md_show(value: Any) -> str:
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _md_number(src: str, sec: str, key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _md_fail(src, sec, key, value, f"is a {_md_kind(value)}, not a number", "write a plain number")
    out = float(value)
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


def _md_range(
    lo: float | None, hi: float | None, *, lo_open: bool, hi_open: bool, fix: str, optional: bool = False
) -> _Check:
    """A float check for an interval; ``None`` bounds are unbounded."""

    def check(src: str, sec: str, key: str, value: Any) -> float | None:
        if value is None and optional:
            return None
        x = _md_number(src, sec, key, value)
        bad_lo = lo is not None and (x <= lo if lo_open else x < lo)
        bad_hi = hi is not None and (x >= hi if hi_open else x > hi)
        if bad_lo or bad_hi:
            left = "(" if lo_open else "["
            right = ")" if hi_open else "]"
            lo_s = "-inf" if lo is None else f"{lo:g}"
            hi_s = "inf" if hi is None else f"{hi:g}"
            raise _md_fail(src, sec, key, value, f"is outside {left}{lo_s}, {hi_s}{right}", fix)
        return x

    return check


def _md_temperature(*, optional: bool = True) -> _Check:
    def check(src: str, sec: str, key: str, value: Any) -> float | None:
        if value is None and optional:
            return None
        x = _md_number(src, sec, key, value)
        if not -100.0 <= x <= 200.0:
            hint = (
                f"temperatures are in °C; {x:g} looks like kelvin, use {x - 273.15:.2f}"
                if 173.15 <= x <= 473.15
                else "temperatures are in °C, between -100 and 200"
            )
            raise _md_fail(src, sec, key, value, "is outside [-100, 200] °C", hint)
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
    fix = "write two increasing wavelengths in micrometres, e.g. band_um = [7.5, 14.0]"
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise _md_fail(src, sec, key, value, "is not a list of two numbers", fix)
    lo, hi = (_md_number(src, sec, key, v) for v in value)
    if not (0.0 < lo < hi) or hi > 1000.0:
        raise _md_fail(src, sec, key, value, "is not an increasing pair of positive wavelengths", fix)
    return (lo, hi)


def _md_seed(src: str, sec: str, key: str, value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise _md_fail(src, sec, key, value, f"is a {_md_kind(value)}, not an integer", "write a whole number >= 0")
    if value < 0 or value >= 2**63:
        raise _md_fail(src, sec, key, value, "is outside [0, 2**63)", "write a whole number >= 0")
    return int(value)


def _md_nonzero(src: str, sec: str, key: str, value: Any) -> float:
    x = _md_number(src, sec, key, value)
    if x == 0.0:
        raise _md_fail(src, sec, key, value, "is zero", "integer images need value = raw * scale + offset, scale != 0")
    return x


def _md_finite(src: str, sec: str, key: str, value: Any) -> float:
    return _md_number(src, sec, key, value)
