"""Constants and validators shared by several stages (a leaf module: imports only irseg.errors).

Each number here was written in several modules before; it now has one home, with its source.
"""

from __future__ import annotations

import math
from typing import Any

from .errors import ConfigError

__all__ = [
    "KELVIN_AT_0C",
    "MAD_TO_SIGMA",
    "DEFAULT_MAX_PIXELS",
    "check_emissivity",
    "robust_sigma",
    "escape_name",
]

#: Kelvin at 0 °C (SI Brochure, 9th edition, 2019: T/K = t/°C + 273.15).
KELVIN_AT_0C = 273.15

#: 1 / Φ⁻¹(3/4): turns a median absolute deviation into a Gaussian standard deviation
#: (Hampel 1974, "The influence curve and its role in robust estimation"; the same constant as
#: ``scipy.stats.median_abs_deviation(..., scale="normal")``).
MAD_TO_SIGMA = 1.482602218505602

#: Default pixel budget of one image: 40 megapixels, larger than any thermal camera's frame;
#: checked from the file header before decoding.
DEFAULT_MAX_PIXELS = 40_000_000


def check_emissivity(value: Any, *, name: str = "[surface] emissivity") -> float:
    """Return ``value`` as a float in (0, 1], or raise :class:`ConfigError` naming ``name`` and the fix."""
    try:
        e = float(value)
    except (TypeError, ValueError):
        raise ConfigError(f"{name} = {value!r} is not a number; use the material's long-wave emissivity") from None
    if not math.isfinite(e) or not 0.0 < e <= 1.0:
        raise ConfigError(f"{name} = {value!r} is outside (0, 1]; use the material's long-wave emissivity")
    return e


def robust_sigma(values: Any) -> float:
    """``MAD_TO_SIGMA`` × the median absolute deviation of ``values`` (0.0 for fewer than two)."""
    import numpy as np

    v = np.asarray(values, dtype=float).ravel()
    if v.size < 2:
        return 0.0
    return float(MAD_TO_SIGMA * np.median(np.abs(v - np.median(v))))


def escape_name(text: str) -> str:
    """``text`` with every non-printable character written as an escape, for logs and terminals.

    A file name may hold a newline, a carriage return, an ANSI escape sequence or a bidi
    override; printed raw, such a name can start a new log line (and forge an "ok" line),
    move the cursor or recolour the terminal. Each character that :meth:`str.isprintable`
    rejects (C0/C1 controls, format characters, separators other than the space) becomes
    ``\\n``, ``\\r``, ``\\t`` or ``\\xNN`` / ``\\uNNNN`` / ``\\UNNNNNNNN`` as in Python's
    ``repr``; a byte that was not valid UTF-8 in a file name (decoded by ``os.fsdecode`` to a
    lone surrogate U+DC80..U+DCFF) is written as that byte, ``\\xNN``. Printable text,
    backslashes included (Windows paths), is unchanged, so the result is one line.

    Parameters
    ----------
    text : str

    Returns
    -------
    str
    """
    text = str(text)
    if text.isprintable():
        return text
    out = []
    for ch in text:
        if ch.isprintable():
            out.append(ch)
            continue
        code = ord(ch)
        if ch in _SHORT_ESCAPES:
            out.append(_SHORT_ESCAPES[ch])
        elif 0xDC80 <= code <= 0xDCFF:  # os.fsdecode's stand-in for an undecodable byte
            out.append(f"\\x{code - 0xDC00:02x}")
        elif code <= 0xFF:
            out.append(f"\\x{code:02x}")
        elif code <= 0xFFFF:
            out.append(f"\\u{code:04x}")
        else:
            out.append(f"\\U{code:08x}")
    return "".join(out)


_SHORT_ESCAPES = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}
