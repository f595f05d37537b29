"""Shape features of one anomaly and the thresholds that name its shape.

The thresholds are module constants, documented in ``docs/analysis.md``; the
cause rules (:mod:`._classify`) and the framing-member grouping (:mod:`._framing`)
read a :class:`Shape` through them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from .._shared import robust_sigma

__all__ = [
    "Shape",
    "shape_features",
    "COMPACT_SOLIDITY",
    "COMPACT_FILL",
    "STREAKY_SOLIDITY",
    "STREAKY_FILL",
    "FAN_TAPER",
    "STREAK_ELONGATION",
    "SHARP_TRANSITION_PX",
    "NONUNIFORM",
]

COMPACT_SOLIDITY = 0.85
COMPACT_FILL = 0.70
STREAKY_SOLIDITY = 0.70
STREAKY_FILL = 0.60
FAN_TAPER = 2.0  # a wedge (fan) has 5× more pixels in its wide third than in its apex third
STREAK_ELONGATION = 3.0  # an elongated pattern is a streak unless it is a uniform band
SHARP_TRANSITION_PX = 6.0  # a step edge measures ~2 px with central differences, optics and linings add 2-3 px
NONUNIFORM = 0.35  # interior spread / |contrast| of a decaying (fan) pattern


@dataclass(frozen=True)
class Shape:
    """Geometric and thermal features of one anomaly (pixels unless named)."""

    area_px: int
    perimeter_px: int
    length_px: float  # long side of the minimum-area rectangle
    width_px: float  # mean width: area / length (at most the rectangle's short side)
    elongation: float
    rect_fill: float
    solidity: float
    orientation_deg: float  # long axis, degrees from the column axis, in [0, 180)
    centroid_row: float
    centroid_col: float
    transition_px: float  # |contrast| / 90th percentile of |∇u| across the outline
    nonuniformity: float  # interior spread of the contrast u − reference (noise removed) / |contrast|
    taper: float  # pixels in the wider end third / the narrower end third along the long axis
    upper_roughness_px: float = 0.0  # spread of its upper outline about a straight line (a tide line is wavy)
    fades_from_end: bool = False  # detected anomalies: strongest at one end, fading to half toward the other

    @property
    def sharp(self) -> bool:
        return self.transition_px <= SHARP_TRANSITION_PX

    @property
    def compact(self) -> bool:
        return self.solidity >= COMPACT_SOLIDITY and self.rect_fill >= COMPACT_FILL

    @property
    def uniform(self) -> bool:
        return self.nonuniformity <= NONUNIFORM

    @property
    def streaky(self) -> bool:
        return (
            self.solidity < STREAKY_SOLIDITY
            or self.rect_fill < STREAKY_FILL
            or self.elongation >= STREAK_ELONGATION
            or self.taper >= FAN_TAPER
            or self.fades_from_end
        )

    @property
    def diffuse(self) -> bool:
        return self.transition_px > SHARP_TRANSITION_PX or self.nonuniformity > NONUNIFORM


def shape_features(
    region: np.ndarray,
    *,
    u_crop: np.ndarray,
    reference_crop: np.ndarray,
    dist_crop: np.ndarray,
    delta_k: float,
    noise_k: float,
    row_offset: int,
    col_offset: int,
) -> Shape:
    """Features of the region ``region`` (bool crop).

    ``u_crop`` is the smooth field and ``reference_crop`` the local sound reference
    over the same crop (°C); ``dist_crop`` the distance to the region (px).
    """
    rr, cc = np.nonzero(region)
    area = int(rr.size)
    boundary = region & ~_eroded(region)
    perimeter = int(boundary.sum())
    br, bc = np.nonzero(boundary)
    pts = np.column_stack([bc, br]).astype(np.float32)
    (_, _), (w, h), _ = cv2.minAreaRect(pts)
    length, width = max(w, h) + 1.0, min(w, h) + 1.0
    hull = cv2.convexHull(pts)
    hull_area = float(cv2.contourArea(hull)) + 0.5 * float(cv2.arcLength(hull, True)) + 1.0  # Pick's theorem
    cov = np.cov(np.vstack([cc, rr]).astype(float)) if area > 1 else np.zeros((2, 2))
    evals, evecs = np.linalg.eigh(cov)
    major = evecs[:, int(np.argmax(evals))]
    orientation = math.degrees(math.atan2(major[1], major[0])) % 180.0
    along = (cc - cc.mean()) * major[0] + (rr - rr.mean()) * major[1]
    lo_s, hi_s = float(along.min()), float(along.max())
    third = (hi_s - lo_s) / 3.0
    n_lo = int((along < lo_s + third).sum())
    n_hi = int((along > hi_s - third).sum())
    taper = max(n_lo, n_hi) / max(min(n_lo, n_hi), 1) if third > 0 else 1.0
    gy, gx = np.gradient(u_crop.astype(float))
    grad = np.hypot(gx, gy)
    band = boundary | ((dist_crop > 0) & (dist_crop <= 1.5))
    g90 = float(np.percentile(grad[band], 90)) if band.any() else 0.0
    transition = abs(delta_k) / g90 if g90 > 1e-12 else float("inf")
    inner = region & ~boundary if (region & ~boundary).sum() >= 4 else region
    vals = u_crop[inner] - reference_crop[inner]  # contrast, free of the sound gradient
    spread = robust_sigma(vals)
    spread = math.sqrt(max(spread * spread - noise_k * noise_k, 0.0))
    return Shape(
        area_px=area,
        perimeter_px=perimeter,
        length_px=float(length),
        width_px=float(max(1.0, min(width, area / length))),  # mean width: robust to ragged outlines
        elongation=float(length / max(1.0, min(width, area / length))),
        rect_fill=float(min(1.0, area / (length * width))),
        solidity=float(min(1.0, area / max(hull_area, 1.0))),
        orientation_deg=orientation,
        centroid_row=float(rr.mean()) + row_offset,
        centroid_col=float(cc.mean()) + col_offset,
        transition_px=float(transition),
        nonuniformity=float(spread / abs(delta_k)) if delta_k else float("inf"),
        taper=float(taper),
        upper_roughness_px=_upper_roughness(rr, cc),
    )


_CROSS = np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8)


def _eroded(region: np.ndarray) -> np.ndarray:
    """Binary erosion by the 4-neighbourhood cross, pixels off the array counted as background: the result of
    :func:`scipy.ndimage.binary_erosion` with its defaults, by OpenCV."""
    img = np.ascontiguousarray(region, dtype=bool).view(np.uint8)
    return cv2.erode(img, _CROSS, borderType=cv2.BORDER_CONSTANT, borderValue=0).astype(bool)


def _upper_roughness(rr: np.ndarray, cc: np.ndarray) -> float:
    """Robust spread (1.4826·MAD) of the topmost row of each column about a straight line through
    them (Theil-Sen), px, the outer tenth of the columns at each end left out (rounded corners): about
    0 for a straight edge, the wave of a tide line for a damp zone."""
    if rr.size < 3:
        return 0.0
    order = np.argsort(rr, kind="stable") if rr.size > 1 and bool(np.any(rr[1:] < rr[:-1])) else None
    if order is not None:  # pixels in raster order (as np.nonzero gives them): the first of a column is its top
        rr, cc = rr[order], cc[order]
    cols, first = np.unique(cc, return_index=True)
    if cols.size < 10:
        return 0.0
    trim = max(1, cols.size // 10)
    cols = cols[trim:-trim]
    top = rr[first[trim:-trim]].astype(float)
    step = max(1, cols.size // 200)  # Theil-Sen on at most ~200 columns
    slope = _theil_sen_slope(top[::step], cols[::step].astype(float))
    resid = top - slope * cols
    return float(robust_sigma(resid - np.median(resid)))


def _theil_sen_slope(y: np.ndarray, x: np.ndarray) -> float:
    """The Theil-Sen slope: the median of the slopes between all pairs of points with different ``x``
    (the slope :func:`scipy.stats.theilslopes` returns, formed the same way, without its confidence interval)."""
    deltax = x[:, np.newaxis] - x
    deltay = y[:, np.newaxis] - y
    return float(np.median(deltay[deltax > 0] / deltax[deltax > 0]))
