"""Which pixels lie within a reach of others: exact Euclidean distances at low memory.

Used when detections are joined (:mod:`irseg.analysis._soft`): a thermal region kept within the
sound length of its anomaly, the members beside a defect. OpenCV's exact distance transform on a
crop holds 5 bytes a pixel where scipy's holds 16 (issue 15, memory).
"""

from __future__ import annotations

import math

import cv2
import numpy as np

__all__ = ["within_reach", "near_sources"]


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
