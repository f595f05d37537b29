"""Colour maps (the open libraries' own names) and the displayed temperature range."""

from __future__ import annotations

import difflib
from types import MappingProxyType

import cv2
import numpy as np

from ..errors import ConfigError

__all__ = ["COLORMAPS", "colormap_lut", "display_range"]

#: Colour-map names accepted by ``cmap`` (the open libraries' own names) -> OpenCV id.
COLORMAPS = MappingProxyType(
    {
        "inferno": cv2.COLORMAP_INFERNO,
        "magma": cv2.COLORMAP_MAGMA,
        "plasma": cv2.COLORMAP_PLASMA,
        "viridis": cv2.COLORMAP_VIRIDIS,
        "cividis": cv2.COLORMAP_CIVIDIS,
        "turbo": cv2.COLORMAP_TURBO,
        "gray": None,
    }
)


def colormap_lut(name: str) -> np.ndarray:
    """Return the 256-entry RGB lookup table of an open colour map.

    Parameters
    ----------
    name : str
        One of :data:`COLORMAPS` (``"inferno"``, ``"magma"``, ``"gray"`` ...); ``"grey"`` is
        accepted for ``"gray"``.

    Returns
    -------
    (256, 3) uint8 ndarray
        Entry ``i`` is the colour of normalised value ``i / 255`` (0 = cold end), RGB order.

    Raises
    ------
    ConfigError
        Unknown name (the message lists the valid ones and suggests the nearest).
    """
    key = str(name).strip().lower()
    if key == "grey":
        key = "gray"
    if key not in COLORMAPS:
        near = difflib.get_close_matches(key, list(COLORMAPS), n=1)
        hint = f" (did you mean {near[0]!r}?)" if near else ""
        raise ConfigError(
            f"colour map {name!r} is not available{hint}; use one of: {', '.join(COLORMAPS)}"
        )
    ramp = np.arange(256, dtype=np.uint8).reshape(256, 1)
    code = COLORMAPS[key]
    if code is None:
        return np.repeat(ramp, 3, axis=1)
    bgr = cv2.applyColorMap(ramp, code)
    return np.ascontiguousarray(bgr[:, 0, ::-1])


def display_range(temperature_c: np.ndarray, *, mask: np.ndarray | None = None) -> tuple[float, float]:
    """Robust display range of a thermogram: the 1st and 99th percentile of the valid pixels.

    Parameters
    ----------
    temperature_c : (M, N) ndarray
        Temperatures, °C.
    mask : (M, N) bool ndarray, optional
        True where a pixel is invalid; those pixels and non-finite values are ignored.

    Returns
    -------
    (lo_c, hi_c) : tuple of float
        ``lo_c < hi_c`` always: a constant image gets ±0.5 K around its value, an image with no
        valid pixel gets (0, 1).
    """
    t = np.asarray(temperature_c)
    valid = np.isfinite(t)
    if mask is not None:
        valid &= ~np.asarray(mask, dtype=bool)
    values = t[valid]
    if values.size == 0:
        return 0.0, 1.0
    if values.size > 200_000:  # deterministic thinning keeps the percentiles and saves time
        values = values[:: values.size // 100_000]
    lo, hi = (float(x) for x in np.percentile(values, [1.0, 99.0]))
    if not hi - lo > 1e-6:
        mid = 0.5 * (lo + hi)
        half = max(0.5, abs(mid) * 1e-6)  # ±0.5 K, or wider where 0.5 K is below float resolution
        lo, hi = mid - half, mid + half
    return lo, hi
