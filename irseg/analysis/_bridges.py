"""Linear thermal bridges: length seen in the image and linear thermal transmittance ψ.

ISO 14683 and ISO 10211 define ψ (W/(m·K)) as the extra heat flow of a linear junction per
metre of its length and per kelvin of inside-outside difference, over what the adjoining
plane elements carry by their U-values. From a thermogram the extra heat flow is the excess
loss of the bridge's thermal footprint against the local sound surface, the same figure an
area anomaly gets (``h·Σ|T − T_ref|·A_px`` over its thermal region, :mod:`._measure`), so

    ψ = Q_extra / (L · (T_i − T_e)),

with ``L`` the length of the band seen in the image. Its 5-95 % band comes from the same
Monte Carlo draws as the heat band (:func:`._confidence.psi_band`). A framing summary adds
the members' lengths and heats, so its ψ is the length-weighted mean of its members'.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from ._confidence import BandInputs, psi_band
from ._geometry import tilt_factor
from ._shape import Shape

__all__ = ["LINEAR_CAUSE", "band_length_m", "linear_figures"]

#: The cause whose anomalies are measured per metre (linear thermal bridges and framing).
LINEAR_CAUSE = "thermal_bridge"


def band_length_m(members: Sequence[Sequence[Shape]], *, pixel_m: float, tilt_deg: float = 0.0) -> float:
    """Length of a band, or of the members of a set summed, on the surface, m.

    ``members`` holds the pieces of each member. A piece spans the long side of its
    minimum-area rectangle along the member's axis (the longest piece's orientation) about its
    centroid; a member's length is the union of its pieces' spans (overlapping pieces count
    once), in pixels, times the pixel side; along the image's rows (vertical) the oblique view
    stretches it by ``1/cos θ``.
    """
    stretch = tilt_factor(tilt_deg)
    total = 0.0
    for pieces in members:
        if not pieces:
            continue
        axis = max(pieces, key=lambda s: s.length_px)
        th = math.radians(axis.orientation_deg)  # from the column axis: 0 = horizontal band
        cos_t, sin_t = math.cos(th), math.sin(th)
        spans = sorted((cos_t * s.centroid_col + sin_t * s.centroid_row - 0.5 * s.length_px,
                        cos_t * s.centroid_col + sin_t * s.centroid_row + 0.5 * s.length_px) for s in pieces)
        covered, end = 0.0, -math.inf
        for a, b in spans:
            if b > end:
                covered += b - max(a, end)
                end = b
        total += covered * pixel_m * math.hypot(cos_t, sin_t * stretch)
    return float(total)


def linear_figures(
    members: Sequence[Sequence[Shape]], *, cause: str, pixel_m: float | None, tilt_deg: float, excess_w: float | None,
    delta_air_k: float | None, bands: BandInputs, seed: int, anomaly_id: int,
) -> tuple[float | None, float | None, float | None, float | None]:
    """``(length_m, psi_w_mk, psi_low_w_mk, psi_high_w_mk)`` of a linear thermal bridge.

    ``members`` holds the pieces of each member (:func:`band_length_m`). All None unless ``cause`` is :data:`LINEAR_CAUSE` and the pixel size is known; ψ and its band
    None without a heat figure or a positive inside-outside difference ``delta_air_k``.
    """
    if cause != LINEAR_CAUSE or pixel_m is None or not any(members):
        return None, None, None, None
    length = band_length_m(members, pixel_m=pixel_m, tilt_deg=tilt_deg)
    if excess_w is None or delta_air_k is None or delta_air_k <= 0 or length <= 0:
        return length, None, None, None
    psi = float(excess_w / (length * delta_air_k))
    lo, hi = psi_band(bands, seed=seed, anomaly_id=anomaly_id, psi_w_mk=psi, length_m=length,
                      delta_air_k=delta_air_k)
    return length, psi, lo, hi
