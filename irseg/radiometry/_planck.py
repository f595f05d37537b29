"""Band-limited blackbody radiance: Planck integrals, a log-radiance table and its inverse.

Private machinery behind :mod:`irseg.radiometry` (which holds the public functions).
``L_b(T)`` is Planck's spectral radiance integrated over the camera band by Gauss–Legendre
quadrature, with CODATA constants from ``scipy.constants``. For speed it is tabulated per
band on 150–700 K in 0.05 K steps and interpolated in log radiance; temperatures (or
radiances) outside the table are integrated directly (inverted by bisection). The
broadband method replaces ``L_b`` with σT⁴/π.
"""

from __future__ import annotations

import functools
import math

import numpy as np
from scipy import constants as _const

from .._shared import KELVIN_AT_0C
from ..errors import ConfigError

__all__: list[str] = []

#: Radiance models accepted by the ``method`` arguments.
METHODS = ("planck", "broadband")

_C1L = 2.0 * _const.h * _const.c**2  # first radiation constant for spectral radiance, W m² sr⁻¹
_C2 = _const.h * _const.c / _const.k  # second radiation constant, m K
_SIGMA = _const.Stefan_Boltzmann
_K0 = KELVIN_AT_0C  # K at 0 °C

_TABLE_LO_K, _TABLE_HI_K, _TABLE_STEP_K = 150.0, 700.0, 0.05
_GL_NODES = 96


def _rad_check_band(band_um: tuple[float, float]) -> tuple[float, float]:
    try:
        lo, hi = (float(b) for b in band_um)
    except (TypeError, ValueError):
        raise ConfigError(f"band_um = {band_um!r} must be two wavelengths in micrometres, e.g. (7.5, 14.0)") from None
    if not (0.0 < lo < hi) or not math.isfinite(hi):
        raise ConfigError(f"band_um = {band_um!r} must be increasing positive wavelengths in micrometres")
    return lo, hi


def _rad_check_method(method: str) -> str:
    if method not in METHODS:
        raise ConfigError(f"method = {method!r} is not a radiance model; use one of {', '.join(METHODS)}")
    return method


def _rad_quadrature(temperature_k: np.ndarray, band: tuple[float, float]) -> np.ndarray:
    """Band radiance by Gauss–Legendre quadrature of Planck's law, W m⁻² sr⁻¹."""
    x, w = np.polynomial.legendre.leggauss(_GL_NODES)
    lo, hi = band[0] * 1e-6, band[1] * 1e-6
    lam = 0.5 * (hi - lo) * x + 0.5 * (hi + lo)
    wl = 0.5 * (hi - lo) * w
    t = np.asarray(temperature_k, dtype=np.float64)
    flat = t.reshape(-1, 1)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        spectral = _C1L / (lam**5 * np.expm1(_C2 / (lam * flat)))
    out = spectral @ wl
    out = np.where(flat[:, 0] > 0, out, 0.0)
    return out.reshape(t.shape)


@functools.lru_cache(maxsize=16)
def _rad_table(band: tuple[float, float]) -> tuple[np.ndarray, np.ndarray]:
    """(temperature K, log radiance) table for one band; read-only arrays."""
    t = np.arange(_TABLE_LO_K, _TABLE_HI_K + 0.5 * _TABLE_STEP_K, _TABLE_STEP_K)
    log_l = np.log(_rad_quadrature(t, band))
    t.setflags(write=False)
    log_l.setflags(write=False)
    return t, log_l


def _rad_forward_k(temperature_k: np.ndarray, band: tuple[float, float], method: str) -> np.ndarray:
    t = np.asarray(temperature_k, dtype=np.float64)
    if method == "broadband":
        return np.where(t > 0, _SIGMA * t**4 / math.pi, np.nan)
    tab_t, tab_l = _rad_table(band)
    out = np.exp(np.interp(t, tab_t, tab_l))
    outside = ~((t >= _TABLE_LO_K) & (t <= _TABLE_HI_K))
    if np.any(outside):
        sel = outside & np.isfinite(t) & (t > 0)
        out = np.where(outside, np.nan, out)
        if np.any(sel):
            out[sel] = _rad_quadrature(t[sel], band)
    return out


def _rad_inverse_k(radiance: np.ndarray, band: tuple[float, float], method: str) -> np.ndarray:
    r = np.asarray(radiance, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        if method == "broadband":
            return np.where(r > 0, (math.pi * r / _SIGMA) ** 0.25, np.nan)
        tab_t, tab_l = _rad_table(band)
        log_r = np.log(np.where(r > 0, r, np.nan))
    inside = (log_r >= tab_l[0]) & (log_r <= tab_l[-1])
    out = np.where(inside, np.interp(log_r, tab_l, tab_t), np.nan)
    if not np.all(inside | ~np.isfinite(log_r)):
        out = _rad_inverse_outside(r, out, inside, band)
    return out


def _rad_inverse_outside(r: np.ndarray, out: np.ndarray, inside: np.ndarray, band: tuple[float, float]) -> np.ndarray:
    """Bisection in log radiance for the few values outside the table (1 K … 5000 K)."""
    sel = ~inside & np.isfinite(r) & (r > 0)
    if not np.any(sel):
        return out
    target = np.log(r[sel])
    lo = np.full(target.shape, 1.0)
    hi = np.full(target.shape, 5000.0)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        with np.errstate(divide="ignore"):
            val = np.log(_rad_quadrature(mid, band))
        above = val > target
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    res = 0.5 * (lo + hi)
    res[(res <= 1.0 + 1e-6) | (res >= 5000.0 - 1e-6)] = np.nan
    out = out.copy()
    out[sel] = res
    return out
