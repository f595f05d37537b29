"""Isolated dead and hot pixels: detection against a 3×3 median, and filling of masked pixels.

Both work on float32 or float64 frames in the frame's own dtype, and form the 3×3 median one
block of rows at a time (:data:`BLOCK_ROWS`, one halo row each side): no frame-sized float64
temporary (issue 15, memory).
"""

from __future__ import annotations

from collections.abc import Iterator

import cv2
import numpy as np
from scipy import ndimage

from .._shared import MAD_TO_SIGMA

__all__ = ["mask_dead_pixels", "fill_masked"]


#: A dead/hot pixel differs from its 3×3 median by more than max(_DEAD_K_SIGMA·σ, _DEAD_FLOOR_K).
_DEAD_K_SIGMA = 10.0
_DEAD_FLOOR_K = 1.0

#: Rows per block of the per-pixel work of the radiometry (3×3 medians, radiance conversions): the
#: float64 temporaries of one block only. Any value gives the same result; 256 rows of a 4000-column
#: frame are 8 MB per float64 temporary.
BLOCK_ROWS = 256


def _rad_blocks(n_rows: int) -> Iterator[slice]:
    """Row slices of at most :data:`BLOCK_ROWS` rows covering ``n_rows``."""
    step = max(1, int(BLOCK_ROWS))
    for r0 in range(0, n_rows, step):
        yield slice(r0, min(n_rows, r0 + step))


def _rad_float(image) -> np.ndarray:
    """``image`` as a float32 or float64 array (no copy when it is one already)."""
    x = np.asarray(image)
    if x.dtype == np.float32 or x.dtype == np.float64:
        return x
    return x.astype(np.float64)


def _rad_nearest_fill(values: np.ndarray, invalid: np.ndarray) -> np.ndarray:
    """Copy of ``values`` with invalid pixels replaced by the nearest valid pixel's value."""
    out = values.copy()
    if not invalid.any():
        return out
    idx = ndimage.distance_transform_edt(invalid, return_distances=False, return_indices=True)
    out[invalid] = values[idx[0][invalid], idx[1][invalid]]
    return out


def _rad_median_offset(values: np.ndarray) -> float:
    """A representative value (median of a sparse grid) to centre the float32 median on."""
    return float(np.median(values[:: max(1, values.shape[0] // 32), :: max(1, values.shape[1] // 32)]))


def _rad_median3(values: np.ndarray, rows: slice | None = None, offset: float | None = None) -> np.ndarray:
    """3×3 median with mirrored borders (``scipy.ndimage.median_filter(size=3, mode="mirror")``).

    Of the rows ``rows`` (default all), read with one halo row each side, so a frame done block by
    block gives the same values as done whole. OpenCV's float32 median kernel is about 9× faster
    than scipy's generic rank filter (480 × 640 frame, 3.8 ms against 33 ms on the project's 2-core
    machine); the values are centred on ``offset`` (default :func:`_rad_median_offset`) first so
    float32 keeps micro-kelvin resolution. The result has the input's float dtype (float64 for others).
    """
    m = values.shape[0]
    if offset is None:
        offset = _rad_median_offset(values)
    r0, r1 = (0, m) if rows is None else (rows.start, rows.stop)
    h0, h1 = max(0, r0 - 1), min(m, r1 + 1)
    centred = np.ascontiguousarray(values[h0:h1] - offset, dtype=np.float32)
    top, bottom = int(h0 == r0), int(h1 == r1)  # mirrored rows at the frame's own top and bottom only
    padded = cv2.copyMakeBorder(centred, top, bottom, 1, 1, cv2.BORDER_REFLECT_101)
    first = r0 - h0 + top
    med = cv2.medianBlur(padded, 3)[first : first + (r1 - r0), 1:-1]
    return med.astype(np.float32 if values.dtype == np.float32 else np.float64) + offset


def _rad_reflect(i: np.ndarray, n: int) -> np.ndarray:
    """Indices mirrored at the borders without repeating the edge (``np.pad(mode="reflect")``)."""
    i = np.abs(i)
    return np.where(i >= n, 2 * (n - 1) - i, i)


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
        Temperatures (any consistent unit, K or °C differences); float32 is worked on as
        float32.
    invalid : (M, N) bool ndarray, optional
        Pixels already known to be invalid (NaN); they are never flagged and never vote.
    floor_k : float, default 1.0
        Smallest deviation, in kelvin, that can make a dead pixel.

    Returns
    -------
    (M, N) bool ndarray
        True at isolated outliers.
    """
    x = _rad_float(image)
    bad = ~np.isfinite(x) if invalid is None else (np.asarray(invalid, dtype=bool) | ~np.isfinite(x))
    if x.ndim != 2 or x.shape[0] < 3 or x.shape[1] < 3 or bad.all():
        return np.zeros(x.shape, dtype=bool)
    m, n = x.shape
    filled = _rad_nearest_fill(x, bad)
    offset = _rad_median_offset(filled)
    resid = np.empty_like(filled)
    for blk in _rad_blocks(m):
        np.subtract(filled[blk], _rad_median3(filled, blk, offset), out=resid[blk])
    r_valid = np.abs(resid[~bad])
    sigma = MAD_TO_SIGMA * float(np.median(r_valid, overwrite_input=True)) if r_valid.size else 0.0  # a copy
    del r_valid
    thr = max(_DEAD_K_SIGMA * sigma, float(floor_k))
    cand = np.zeros(x.shape, dtype=bool)
    for blk in _rad_blocks(m):
        cand[blk] = (np.abs(resid[blk]) > thr) & ~bad[blk]
    if not cand.any():
        return cand
    rows, cols = np.nonzero(cand)  # few pixels: test the neighbours of candidates only
    sign = np.sign(resid[rows, cols])
    half = 0.5 * np.abs(resid[rows, cols])
    centre = filled[rows, cols] - resid[rows, cols]  # the 3×3 median there
    similar = np.zeros(rows.size, dtype=bool)
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr == 0 and dc == 0:
                continue
            r, c = _rad_reflect(rows + dr, m), _rad_reflect(cols + dc, n)
            similar |= ((filled[r, c] - centre) * sign >= half) & ~bad[r, c]
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
    (M, N) ndarray
        float32 for a float32 image, float64 otherwise; finite everywhere when at least one
        pixel is valid.
    """
    x = _rad_float(image)
    mask = np.asarray(mask, dtype=bool) | ~np.isfinite(x)
    if not mask.any():
        return x.copy()
    filled = _rad_nearest_fill(x, mask)
    offset = _rad_median_offset(filled)
    out = x.copy()
    for blk in _rad_blocks(x.shape[0]):
        here = mask[blk]
        if here.any():
            out[blk][here] = _rad_median3(filled, blk, offset)[here]
    return out
