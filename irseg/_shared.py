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
