"""Measurement of one candidate: its thermal region, loss sum, shape and measured extent.

The *thermal region* of an anomaly is its segmented region plus the pixels of its
soft rim (within :attr:`Candidate.rim_reach_px`, on no other anomaly) whose
contrast has the anomaly's sign and exceeds the noise: the excess heat is summed
over it. The *measured extent* (area, outline, temperatures) is the part of the
region inside the half-contrast edge line.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ._candidates import Candidate
from ._extent import inside_edge_line
from ._geometry import MIN_SPOT_PX
from ._shape import Shape, shape_features

__all__ = ["Measured", "measure_candidate", "HALF_CONTRAST"]

HALF_CONTRAST = 0.5  # the measured extent ends where the contrast falls to half its core value


@dataclass
class Measured:
    """One measured candidate."""

    cand: Candidate
    kind: str  # "cold" or "warm"
    shape: Shape
    bbox: tuple[int, int, int, int]  # row0, col0, row1, col1 (exclusive) of the region
    loss_sum_kpx: float  # over the region's own pixels, K·px (loss-signed)
    region_area_px: int  # the region's own pixels
    rim_index: np.ndarray  # flat image indices of its soft-rim pixels
    rim_loss_k: np.ndarray  # their loss-signed contrast, K
    extent_mask: np.ndarray  # region pixels (in cand.rr, cand.cc order) inside the half-contrast edge
    parts: int = 0  # detected anomalies: segmented pieces joined into it


def measure_candidate(
    c: Candidate, *, labels: np.ndarray, t: np.ndarray, u: np.ndarray, edges: np.ndarray, is_anomaly: np.ndarray,
    noise_k: float, loss_sign: float, reference: np.ndarray,
) -> Measured:
    """Thermal region (region + soft rim of the same sign), loss sum, shape and extent of one anomaly.

    Writes the anomaly's reference plane over its thermal region into ``reference``.

    Parameters
    ----------
    c : Candidate
        The anomaly.
    labels, t, u, edges : (M, N) ndarray
        Region labels, measured and smooth temperature (°C), jump set.
    is_anomaly : (n + 1,) bool ndarray
        Labels accepted as anomalies (their pixels are never another's rim).
    noise_k : float
        Noise, K.
    loss_sign : float
        -1 from inside (loss = reference − T), +1 from outside (loss = T − reference).
    reference : (M, N) float ndarray
        Written in place.
    """
    lab_c = labels[c.crop]
    t_c = t[c.crop]
    rr, cc = np.nonzero((c.dist > 0) & (c.dist <= c.rim_reach_px))
    lab_rim = lab_c[rr, cc]
    ok = (lab_rim > 0) & ~is_anomaly[lab_rim]
    rr, cc = rr[ok], cc[ok]
    rim_ref = c.ref.plane.evaluate(rr + float(c.r0), cc + float(c.c0))
    rim_contrast = t_c[rr, cc] - rim_ref
    keep = np.sign(c.delta_k) * rim_contrast > noise_k
    rr_in, cc_in = c.rr, c.cc
    in_ref = c.ref_in
    in_contrast = t_c[rr_in, cc_in] - in_ref
    loss_sum = loss_sign * float(in_contrast.sum())
    rim_index = np.ravel_multi_index((c.r0 + rr[keep], c.c0 + cc[keep]), labels.shape)
    rim_loss = loss_sign * rim_contrast[keep]
    reference[c.r0 + rr_in, c.c0 + cc_in] = in_ref
    reference[c.r0 + rr[keep], c.c0 + cc[keep]] = rim_ref[keep]
    rb = (int(rr_in.min()), int(rr_in.max()))
    cb = (int(cc_in.min()), int(cc_in.max()))
    shape = _shape_on_tight_crop(c, u=u, rb=rb, cb=cb, noise_k=noise_k)
    bbox = (c.r0 + rb[0], c.c0 + cb[0], c.r0 + rb[-1] + 1, c.c0 + cb[-1] + 1)
    extent = _extent_mask(c, u=u, edges=edges, valid_crop=lab_c > 0)
    return Measured(
        c, "cold" if c.delta_k < 0 else "warm", shape, bbox, loss_sum, int(rr_in.size), rim_index, rim_loss, extent
    )


def _shape_on_tight_crop(
    c: Candidate, *, u: np.ndarray, rb: tuple[int, int], cb: tuple[int, int], noise_k: float
) -> Shape:
    """Shape features on a tight crop: the region's bounding box (rows ``rb``, columns ``cb``) + 3 px."""
    tr0, tc0 = max(0, rb[0] - 3), max(0, cb[0] - 3)
    tr1, tc1 = min(c.region.shape[0], rb[-1] + 4), min(c.region.shape[1], cb[-1] + 4)
    tight = (slice(tr0, tr1), slice(tc0, tc1))
    tr = np.arange(tr0, tr1, dtype=float)[:, None]
    tc = np.arange(tc0, tc1, dtype=float)[None, :]
    return shape_features(
        c.region[tight], u_crop=u[c.crop][tight],
        reference_crop=c.ref.plane.evaluate(tr + float(c.r0), tc + float(c.c0)), dist_crop=c.dist[tight],
        delta_k=c.delta_k, noise_k=noise_k, row_offset=c.r0 + tr0, col_offset=c.c0 + tc0,
    )


def _extent_mask(c: Candidate, *, u: np.ndarray, edges: np.ndarray, valid_crop: np.ndarray) -> np.ndarray:
    """Region pixels (in ``c.rr, c.cc`` order) of the measured extent.

    Those whose smooth contrast holds at least half the core contrast (the
    half-maximum edge of a blurred step) and that lie inside the edge line: the jump
    band a segmentation adds to a region is outside. All of the region when fewer
    than :data:`MIN_SPOT_PX` pixels would remain.
    """
    contrast_u = u[c.crop][c.rr, c.cc] - c.ref_in
    sgn = 1.0 if c.delta_k >= 0 else -1.0
    inside = sgn * contrast_u >= HALF_CONTRAST * abs(float(np.median(contrast_u))) * (1.0 - 1e-9)
    inside &= inside_edge_line(
        c.region, rr=c.rr, cc=c.cc, delta_k=c.delta_k, u_crop=u[c.crop], edges_crop=edges[c.crop],
        valid_crop=valid_crop,
    )
    if int(inside.sum()) < MIN_SPOT_PX:
        inside = np.ones(c.rr.size, bool)
    return inside
