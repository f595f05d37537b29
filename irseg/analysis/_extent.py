"""Measured extent of an anomaly: where its edge line lies.

A segmentation hands the jump band (the steep part of a blurred or conducting edge)
to one of the two regions it separates; the thermographer's extent stops at the
edge itself, the inflection of the temperature profile across it.
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage

__all__ = ["inside_edge_line", "EDGE_SIGMA_PX"]

EDGE_SIGMA_PX = 1.0  # Gaussian derivative scale of the edge-line gradient (Canny 1986), px


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
        # normalised Gaussian smoothing over valid pixels only (masked values carry no information)
        w = ndimage.gaussian_filter(valid_crop.astype(float), EDGE_SIGMA_PX, mode="nearest")
        sm = ndimage.gaussian_filter(np.where(valid_crop, u_crop, 0.0), EDGE_SIGMA_PX, mode="nearest")
        u_s = np.where(w > 1e-6, sm / np.maximum(w, 1e-6), u_crop)
        gr, gc = np.gradient(u_s)
        g = np.hypot(gr, gc)
        m, n = g.shape
        gp = np.pad(g, 2, mode="edge")
        up = np.pad(np.where(valid_crop, u_crop, u_s), 2, mode="edge")
        dp = np.pad(ndimage.distance_transform_edt(region), 2, mode="constant")
        q = np.round(np.mod(np.arctan2(gr, gc), np.pi) / (np.pi / 4)).astype(int) % 4
        sgn = 1.0 if delta_k >= 0 else -1.0

        def shifted(a: np.ndarray, dr: int, dc: int) -> np.ndarray:
            return a[2 + dr : 2 + dr + m, 2 + dc : 2 + dc + n]

        for k, (dr, dc) in enumerate(((0, 1), (1, 1), (1, 0), (1, -1))):
            sel = band & (q == k)
            if not sel.any():
                continue
            # inward = deeper into the region (a neighbour more extreme than the region is not its outside)
            da, db = shifted(dp, dr, dc), shifted(dp, -dr, -dc)
            a_is_in = (da > db) | ((da == db) & (sgn * shifted(up, dr, dc) >= sgn * shifted(up, -dr, -dc)))
            g_in = np.where(a_is_in, shifted(gp, dr, dc), shifted(gp, -dr, -dc))
            g_out = np.where(a_is_in, shifted(gp, -dr, -dc), shifted(gp, dr, dc))
            u_in2 = np.where(a_is_in, shifted(up, 2 * dr, 2 * dc), shifted(up, -2 * dr, -2 * dc))
            u_out2 = np.where(a_is_in, shifted(up, -2 * dr, -2 * dc), shifted(up, 2 * dr, 2 * dc))
            outer_flank = (g_in > g) & (g_out <= g)
            peak = (g_in <= g) & (g_out <= g)
            u_p = shifted(up, 0, 0)
            nearer_out = np.abs(u_p - u_out2) < np.abs(u_p - u_in2)
            # on a ramp down to the outside: the pixel lies between the inner and the outer values
            between = (sgn * (u_in2 - u_p) > 0) & (sgn * (u_p - u_out2) > 0)
            between &= np.where(a_is_in, shifted(dp, 2 * dr, 2 * dc), shifted(dp, -2 * dr, -2 * dc)) > 0  # in the region
            out |= sel & between & (outer_flank | (peak & nearer_out))
    return ~out[rr, cc]
