"""The jump set on the overlay: blended pixels at full size, thin lines when enlarged.

Private helpers of :mod:`irseg.render`.
"""

from __future__ import annotations

import cv2
import numpy as np

__all__ = ["EDGE_ALPHA", "blend_edges", "thin_jump_lines"]

#: Weight of the contrasting colour on jump-set pixels.
EDGE_ALPHA = 0.55


def blend_edges(rgb: np.ndarray, edges: np.ndarray) -> None:
    """Blend jump-set pixels towards black on light colours and towards white on dark ones."""
    px = rgb[edges].astype(np.float32)
    luma = px @ np.array([0.299, 0.587, 0.114], dtype=np.float32)
    target = np.where(luma[:, None] > 128.0, 0.0, 255.0).astype(np.float32)
    rgb[edges] = np.round((1.0 - EDGE_ALPHA) * px + EDGE_ALPHA * target).astype(np.uint8)


def thin_jump_lines(edges: np.ndarray, s: int) -> np.ndarray:
    """Display-resolution mask of the jump set drawn as 1-pixel lines through pixel centres.

    An upscaled thermogram would show each jump pixel as an ``s``-by-``s`` block; the jump set is
    thinned to one pixel (:func:`skimage.morphology.thin`) and neighbouring pixels are joined
    by straight 1-pixel lines between their block centres instead.
    """
    from skimage.morphology import thin

    skeleton = thin(edges)
    rows, cols = np.nonzero(skeleton)
    out = np.zeros((edges.shape[0] * s, edges.shape[1] * s), np.uint8)
    centre = s // 2
    pts = np.stack([cols * s + centre, rows * s + centre], axis=1).astype(np.int32)
    segments = [np.stack([pts, pts], axis=1)]  # isolated pixels: a dot
    m, n = edges.shape
    padded = np.zeros((m + 2, n + 2), bool)
    padded[1:-1, 1:-1] = skeleton
    for dr, dc in ((0, 1), (1, 0), (1, 1), (1, -1)):
        has = padded[rows + 1 + dr, cols + 1 + dc]
        if has.any():
            a = pts[has]
            b = a + np.array([dc * s, dr * s], np.int32)
            segments.append(np.stack([a, b], axis=1))
    lines = np.concatenate(segments).reshape(-1, 2, 1, 2)
    cv2.polylines(out, list(lines), False, 1, 1, lineType=cv2.LINE_8)
    return out.astype(bool)
