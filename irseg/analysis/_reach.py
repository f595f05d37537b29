"""Which pixels lie within a reach of others: exact Euclidean distances at low memory.

Used when detections are joined (:mod:`irseg.analysis._soft`): a thermal region kept within the
sound length of its anomaly, the members beside a defect. OpenCV's exact distance transform on a
crop holds 5 bytes a pixel where scipy's holds 16 (issue 15, memory). :func:`distance_to_zeros` gives
scipy's distances themselves, value for value, from OpenCV's transform (about 3× faster).
"""

from __future__ import annotations

import math

import cv2
import numpy as np

__all__ = ["within_reach", "near_sources", "distance_to_zeros"]


def within_reach(idx: np.ndarray, pix: np.ndarray, reach_px: float, shape: tuple[int, int]) -> np.ndarray:
    """Which of the flat pixels ``pix`` lie within ``reach_px`` of the flat pixels ``idx`` (on their bounding box)."""
    if pix.size == 0:
        return np.zeros(0, bool)
    rows, cols = np.divmod(idx, shape[1])
    pr, pc = np.divmod(pix, shape[1])
    r0, c0 = int(min(rows.min(), pr.min())), int(min(cols.min(), pc.min()))
    r1, c1 = int(max(rows.max(), pr.max())) + 1, int(max(cols.max(), pc.max())) + 1
    # only sources within reach of the pixels' box matter: crop to it (exact; less memory, issue 15)
    pad = int(math.ceil(reach_px)) + 1
    r0, c0 = max(r0, int(pr.min()) - pad), max(c0, int(pc.min()) - pad)
    r1, c1 = min(r1, int(pr.max()) + pad + 1), min(c1, int(pc.max()) + pad + 1)
    keep = (rows >= r0) & (rows < r1) & (cols >= c0) & (cols < c1)
    if not keep.any():
        return np.zeros(pix.size, bool)
    box = np.ones((r1 - r0, c1 - c0), np.uint8)
    box[rows[keep] - r0, cols[keep] - c0] = 0
    return near_sources(box, reach_px)[pr - r0, pc - c0]


def near_sources(far: np.ndarray, reach_px: float) -> np.ndarray:
    """Pixels within ``reach_px`` (Euclidean) of the 0-pixels of the uint8 array ``far``.

    OpenCV's exact Euclidean distance transform (``DIST_MASK_PRECISE``) in float32: 5 bytes a pixel
    where scipy's transform holds 16 (float64 distances and the nearest pixels' indices; issue 15).
    A pixel whose distance equals ``reach_px`` to float32 precision may fall either way.
    """
    if not far.any():
        return np.ones(far.shape, bool)
    if far.all():
        return np.zeros(far.shape, bool)
    return cv2.distanceTransform(far, cv2.DIST_L2, cv2.DIST_MASK_PRECISE) <= reach_px


def distance_to_zeros(mask: np.ndarray) -> np.ndarray:
    """Euclidean distance (px, float64) of every pixel to the nearest False pixel of ``mask`` (0 on them).

    The values of :func:`scipy.ndimage.distance_transform_edt` (``√`` of the integer squared distance,
    in float64), from OpenCV's exact transform (``DIST_MASK_PRECISE``): its float32 distances give the
    integer squared distances back exactly (rounded: float32 holds them to better than half a unit below
    2²² px²), whose square roots are taken in float64. A mask without False pixels, or with a diagonal
    of 2¹¹ px or more, is left to scipy.
    """
    mask = np.asarray(mask, bool)
    if mask.size == 0 or mask.shape[0] ** 2 + mask.shape[1] ** 2 >= 1 << 22 or mask.all():
        from scipy import ndimage

        return ndimage.distance_transform_edt(mask)
    d = cv2.distanceTransform(np.ascontiguousarray(mask).view(np.uint8), cv2.DIST_L2, cv2.DIST_MASK_PRECISE)
    return np.sqrt(np.rint(np.square(d, dtype=np.float64)))
