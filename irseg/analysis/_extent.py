"""Measured extent of an anomaly: where its edge line lies.

A segmentation hands the jump band (the steep part of a blurred or conducting edge)
to one of the two regions it separates; the thermographer's extent stops at the
edge itself, the inflection of the temperature profile across it.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from ._reach import distance_to_zeros
from ._scales import _dilate

__all__ = ["inside_edge_line", "EDGE_SIGMA_PX"]

EDGE_SIGMA_PX = 1.0  # Gaussian derivative scale of the edge-line gradient (Canny 1986), px
_TRUNCATE = 4.0  # Gaussian kernel radius in sigmas (scipy.ndimage.gaussian_filter default)
_STEP_R = np.array([0, 1, 1, 1])  # neighbour step along 0°, 45°, 90°, 135° of the gradient angle
_STEP_C = np.array([1, 1, 0, -1])


def inside_edge_line(
    region: np.ndarray, *, rr: np.ndarray, cc: np.ndarray, delta_k: float, u_crop: np.ndarray,
    edges_crop: np.ndarray, valid_crop: np.ndarray,
) -> np.ndarray:
    """Region pixels (in ``rr, cc`` order) on the inner side of the region's edge line.

    The edge of a blurred step lies where the temperature gradient peaks along its
    normal (the inflection point; the non-maximum suppression of Canny 1986). For a
    step between two plateaus that is the half-way level, but next to a neighbour
    that is itself off the reference (a cold stud beside an empty bay, conduction
    spreading the contrast sideways) the half-reference level slides outwards onto
    the neighbour, while the gradient peak stays on the defect's edge. On the
    region's jump-band pixels, compared with the two neighbours along the gradient:
    a pixel whose inner neighbour (deeper in the region) has the steeper gradient
    (and the outer one not) is on the outer flank of the edge and is left out; a
    pixel at the peak counts when its value is nearer the inner side two pixels away
    (it is at least half covered). Only edges across which the contrast falls
    outwards are trimmed (a colder neighbour of a cold region is not its rim), and
    pixels off the jump band are never removed.

    Parameters
    ----------
    region : (m, n) bool ndarray
        The region in a crop.
    rr, cc : (k,) int ndarray
        Its pixels (crop coordinates), the order of the returned mask.
    delta_k : float
        Its contrast (sign: cold < 0 < warm), K.
    u_crop, edges_crop, valid_crop : (m, n) ndarray
        Smooth field (°C), jump set and valid pixels in the crop.

    Returns
    -------
    (k,) bool ndarray
        True for the pixels kept in the measured extent.

    References
    ----------
    J. Canny, "A computational approach to edge detection", IEEE PAMI 8 (1986) 679-698.
    """
    band = region & edges_crop
    out = np.zeros(region.shape, bool)
    if band.any():
        # work on the band's bounding box plus the filters' reach (2 px of neighbours along the
        # gradient, 1 px of central difference, the Gaussian's truncation radius): every value used
        # is then the same as on the whole crop
        margin = 3 + int(_TRUNCATE * EDGE_SIGMA_PX + 0.5)
        br, bc = np.nonzero(band)
        r0, c0 = max(0, int(br.min()) - margin), max(0, int(bc.min()) - margin)
        r1 = min(region.shape[0], int(br.max()) + margin + 1)
        c1 = min(region.shape[1], int(bc.max()) + margin + 1)
        win = (slice(r0, r1), slice(c0, c1))
        out[win] = _outer_flank(band[win], region=region, win=win, delta_k=delta_k, u_crop=u_crop[win],
                                valid_crop=valid_crop[win])
    return ~out[rr, cc]


def _inner_distance(region: np.ndarray, *, band: np.ndarray, win: tuple[slice, slice]) -> np.ndarray:
    """Euclidean distance to the nearest pixel off ``region``, on the window ``win`` of it.

    Computed on the window alone when that gives the whole region's distance on the
    pixels the neighbour comparison reads (the band and its 8 neighbours): a distance
    shorter than the way to every side where the window cuts the region cannot have
    been lengthened by the cut. Otherwise the whole region's transform is cropped.
    """
    d = distance_to_zeros(region[win])
    m, n = d.shape
    rows, cols = np.arange(m)[:, None], np.arange(n)[None, :]
    room = np.full(d.shape, np.inf)
    if win[0].start > 0:
        room = np.minimum(room, rows + 1.0)
    if win[0].stop < region.shape[0]:
        room = np.minimum(room, m - rows + 0.0)
    if win[1].start > 0:
        room = np.minimum(room, cols + 1.0)
    if win[1].stop < region.shape[1]:
        room = np.minimum(room, n - cols + 0.0)
    read = _dilate(band, 1)  # 3×3 binary dilation
    if region[win].all() or bool(np.any(d[read] >= room[read])):
        return distance_to_zeros(region)[win]
    return d


def _outer_flank(
    band: np.ndarray, *, region: np.ndarray, win: tuple[slice, slice], delta_k: float, u_crop: np.ndarray,
    valid_crop: np.ndarray,
) -> np.ndarray:
    """Jump-band pixels (of the window ``win`` of the crop) on the outer flank of the edge."""
    # normalised Gaussian smoothing over valid pixels only (masked values carry no information)
    w = ndimage.gaussian_filter(valid_crop.astype(float), EDGE_SIGMA_PX, mode="nearest", truncate=_TRUNCATE)
    sm = ndimage.gaussian_filter(np.where(valid_crop, u_crop, 0.0), EDGE_SIGMA_PX, mode="nearest", truncate=_TRUNCATE)
    u_s = np.where(w > 1e-6, sm / np.maximum(w, 1e-6), u_crop)
    gr, gc = np.gradient(u_s)
    gp = np.pad(np.hypot(gr, gc), 2, mode="edge")
    up = np.pad(np.where(valid_crop, u_crop, u_s), 2, mode="edge")
    dp = np.pad(_inner_distance(region, band=band, win=win), 2, mode="constant")
    sgn = 1.0 if delta_k >= 0 else -1.0
    # on each band pixel, its two neighbours along the gradient direction (quantised to 45°)
    br, bc = np.nonzero(band)
    q = np.round(np.mod(np.arctan2(gr[br, bc], gc[br, bc]), np.pi) / (np.pi / 4)).astype(int) % 4
    dr, dc = _STEP_R[q], _STEP_C[q]
    br, bc = br + 2, bc + 2  # padded coordinates
    # inward = deeper into the region (a neighbour more extreme than the region is not its outside)
    da, db = dp[br + dr, bc + dc], dp[br - dr, bc - dc]
    a_is_in = (da > db) | ((da == db) & (sgn * up[br + dr, bc + dc] >= sgn * up[br - dr, bc - dc]))
    ir, ic = np.where(a_is_in, dr, -dr), np.where(a_is_in, dc, -dc)  # one step inwards
    g_p = gp[br, bc]
    g_in, g_out = gp[br + ir, bc + ic], gp[br - ir, bc - ic]
    u_in2, u_out2 = up[br + 2 * ir, bc + 2 * ic], up[br - 2 * ir, bc - 2 * ic]
    outer_flank = (g_in > g_p) & (g_out <= g_p)
    peak = (g_in <= g_p) & (g_out <= g_p)
    u_p = up[br, bc]
    nearer_out = np.abs(u_p - u_out2) < np.abs(u_p - u_in2)
    # on a ramp down to the outside: the pixel lies between the inner and the outer values
    between = (sgn * (u_in2 - u_p) > 0) & (sgn * (u_p - u_out2) > 0)
    between &= dp[br + 2 * ir, bc + 2 * ic] > 0  # in the region
    out = np.zeros(band.shape, bool)
    out[br - 2, bc - 2] = between & (outer_flank | (peak & nearer_out))
    return out
