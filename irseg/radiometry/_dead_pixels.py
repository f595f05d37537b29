"""Isolated dead and hot pixels: detection against a 3×3 median, and filling of masked pixels."""

from __future__ import annotations

import cv2
import numpy as np
from scipy import ndimage

from .._shared import MAD_TO_SIGMA

__all__ = ["mask_dead_pixels", "fill_masked"]


#: A dead/hot pixel differs from its 3×3 median by more than max(_DEAD_K_SIGMA·σ, _DEAD_FLOOR_K).
_DEAD_K_SIGMA = 10.0
_DEAD_FLOOR_K = 1.0


def _rad_nearest_fill(values: np.ndarray, invalid: np.ndarray) -> np.ndarray:
    """Copy of ``values`` with invalid pixels replaced by the nearest valid pixel's value."""
    if not invalid.any():
        return values.copy()
    idx = ndimage.distance_transform_edt(invalid, return_distances=False, return_indices=True)
    return values[tuple(idx)]


def _rad_median3(values: np.ndarray) -> np.ndarray:
    """3×3 median with mirrored borders (``scipy.ndimage.median_filter(size=3, mode="mirror")``).

    OpenCV's float32 median kernel is about 9× faster than scipy's generic rank filter
    (480 × 640 frame, 3.8 ms against 33 ms on the project's 2-core machine); the values are
    centred first so float32 keeps micro-kelvin resolution.
    """
    offset = float(np.median(values[:: max(1, values.shape[0] // 32), :: max(1, values.shape[1] // 32)]))
    centred = np.ascontiguousarray(values - offset, dtype=np.float32)
    padded = cv2.copyMakeBorder(centred, 1, 1, 1, 1, cv2.BORDER_REFLECT_101)
    return cv2.medianBlur(padded, 3)[1:-1, 1:-1].astype(np.float64) + offset


def mask_dead_pixels(image, *, invalid=None, floor_k: float = _DEAD_FLOOR_K) -> np.ndarray:
    """Find isolated dead or hot pixels.

    A pixel is flagged when it lies farther from the median of its 3×3 neighbourhood than
    ``max(10 σ, floor_k)`` — σ being a robust noise estimate (1.4826 × the median absolute
    residual from the 3×3 median over valid pixels) — *and* none of its eight neighbours
    deviates in the same direction by at least half as much. Real features of two pixels
    or more across (a 2×2 hot spot, a thin line, a region's corner or edge) therefore keep
    their pixels.

    Parameters
    ----------
    image : (M, N) ndarray
        Temperatures (any consistent unit, K or °C differences).
    invalid : (M, N) bool ndarray, optional
        Pixels already known to be invalid (NaN); they are never flagged and never vote.
    floor_k : float, default 1.0
        Smallest deviation, in kelvin, that can make a dead pixel.

    Returns
    -------
    (M, N) bool ndarray
        True at isolated outliers.
    """
    x = np.asarray(image, dtype=np.float64)
    bad = ~np.isfinite(x) if invalid is None else (np.asarray(invalid, dtype=bool) | ~np.isfinite(x))
    if x.ndim != 2 or x.shape[0] < 3 or x.shape[1] < 3 or bad.all():
        return np.zeros(x.shape, dtype=bool)
    filled = _rad_nearest_fill(x, bad)
    med = _rad_median3(filled)
    resid = filled - med
    r_valid = np.abs(resid[~bad])
    sigma = MAD_TO_SIGMA * float(np.median(r_valid)) if r_valid.size else 0.0
    thr = max(_DEAD_K_SIGMA * sigma, float(floor_k))
    cand = (np.abs(resid) > thr) & ~bad
    if not cand.any():
        return cand
    padded = np.pad(filled, 1, mode="reflect")
    pad_bad = np.pad(bad, 1, mode="reflect")
    rows, cols = np.nonzero(cand)  # few pixels: test the neighbours of candidates only
    sign = np.sign(resid[rows, cols])
    half = 0.5 * np.abs(resid[rows, cols])
    centre = med[rows, cols]
    similar = np.zeros(rows.size, dtype=bool)
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr == 0 and dc == 0:
                continue
            nb = padded[rows + 1 + dr, cols + 1 + dc]
            nb_bad = pad_bad[rows + 1 + dr, cols + 1 + dc]
            similar |= ((nb - centre) * sign >= half) & ~nb_bad
    out = np.zeros(x.shape, dtype=bool)
    out[rows[~similar], cols[~similar]] = True
    return out


def fill_masked(image, mask) -> np.ndarray:
    """Replace masked pixels by the median of their 3×3 neighbourhood (nearest valid values).

    Parameters
    ----------
    image : (M, N) ndarray
    mask : (M, N) bool ndarray
        True where the pixel is invalid.

    Returns
    -------
    (M, N) float64 ndarray
        Finite everywhere when at least one pixel is valid.
    """
    x = np.asarray(image, dtype=np.float64)
    mask = np.asarray(mask, dtype=bool) | ~np.isfinite(x)
    if not mask.any():
        return x.copy()
    filled = _rad_nearest_fill(x, mask)
    med = _rad_median3(filled)
    out = x.copy()
    out[mask] = med[mask]
    return out
