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


def whole_weighted_laplacian(x, cx, cy, diag):
    """``diag x + Dx^T (cx Dx x) + Dy^T (cy Dy x)`` on the whole frame at once: the plain form that the
    block-wise solver operators must reproduce bit for bit (forward differences, their transposes)."""
    out = x * diag
    dx = (x[:, 1:] - x[:, :-1]) * cx
    out[:, :-1] -= dx
    out[:, 1:] += dx
    dy = (x[1:, :] - x[:-1, :]) * cy
    out[:-1, :] -= dy
    out[1:, :] += dy
    return out
