"""Synthetic test images for the segmentation tests (small: at most 128 x 128)."""

from __future__ import annotations

import numpy as np


def disk_mask(n: int, r: float, centre: tuple[float, float] | None = None) -> np.ndarray:
    """Boolean disk of radius ``r`` pixels in an ``n`` x ``n`` grid."""
    yy, xx = np.mgrid[:n, :n]
    cy, cx = centre if centre is not None else ((n - 1) / 2.0, (n - 1) / 2.0)
    return (yy - cy) ** 2 + (xx - cx) ** 2 < r * r


def iou(a: np.ndarray, b: np.ndarray) -> float:
    """Intersection over union of two boolean masks."""
    return float((a & b).sum()) / float((a | b).sum())


def region_of(labels: np.ndarray, truth: np.ndarray) -> np.ndarray:
    """The segmented region holding most of ``truth``."""
    k = np.bincount(labels[truth].ravel()).argmax()
    return labels == k
