"""Seeded Monte Carlo confidence bands for area and excess heat loss.

Each anomaly gets its own generator ``np.random.default_rng([seed, anomaly_id])``
so a band does not depend on the other anomalies of the image, and the same
metadata always gives the same bands.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["BandInputs", "N_DRAWS", "BAND_PERCENTILES", "confidence_bands", "psi_band"]

N_DRAWS = 1000
BAND_PERCENTILES = (5.0, 95.0)


@dataclass(frozen=True)
class BandInputs:
    """What the bands of one anomaly depend on.

    Attributes
    ----------
    area_px, perimeter_px : int
        Region size and outline length, px (the outline is uncertain by ±½ px).
    loss_sum_kpx : float
        Σ of the loss-signed contrast over the thermal region (region + soft rim), K·px.
    thermal_area_px : int
        Pixels in the thermal region.
    pixel_area_m2 : float or None
        Area of one pixel, m².
    h_convective_w_m2k, h_radiative_w_m2k : float or None
        Parts of the surface coefficient, W/m²K.
    emissivity, emissivity_uncertainty_abs : float
        Surface emissivity and its ± uncertainty (absolute).
    distance_uncertainty_rel, h_uncertainty_rel : float
        Relative uncertainties (one standard deviation).
    netd_k : float
        Camera noise, K per pixel.
    reference_sigma_k : float
        Robust spread of the sound ring about its plane, K (the reference level is
        taken as uncertain by this much, conservatively not divided by √n).
    """

    area_px: int
    perimeter_px: int
    loss_sum_kpx: float
    thermal_area_px: int
    pixel_area_m2: float | None
    h_convective_w_m2k: float | None
    h_radiative_w_m2k: float | None
    emissivity: float
    emissivity_uncertainty_abs: float
    distance_uncertainty_rel: float
    h_uncertainty_rel: float
    netd_k: float
    reference_sigma_k: float


def _band(draws: np.ndarray, estimate: float) -> tuple[float, float]:
    lo, hi = np.percentile(draws, BAND_PERCENTILES)
    return float(min(lo, estimate)), float(max(hi, estimate))


def confidence_bands(
    inputs: BandInputs, *, seed: int, anomaly_id: int, area_m2: float | None, excess_w: float | None
) -> tuple[float | None, float | None, float | None, float | None]:
    """``(area_low_m2, area_high_m2, excess_low_w, excess_high_w)``; None where the estimate is None.

    The bands are the 5th and 95th percentiles of the draws, widened if needed so
    that they always contain the estimate itself.
    """
    if inputs.pixel_area_m2 is None or area_m2 is None:
        return None, None, None, None
    _, area_draws, w_draws = _draws(inputs, seed=seed, anomaly_id=anomaly_id, heat=excess_w is not None)
    area_lo, area_hi = _band(area_draws, area_m2)
    if w_draws is None:
        return area_lo, area_hi, None, None
    w_lo, w_hi = _band(w_draws, excess_w)
    return area_lo, area_hi, w_lo, w_hi


def psi_band(
    inputs: BandInputs, *, seed: int, anomaly_id: int, psi_w_mk: float, length_m: float, delta_air_k: float
) -> tuple[float | None, float | None]:
    """5-95 % band of a linear thermal transmittance ``ψ = Q / (L · ΔT)``, W/(m·K).

    The same draws as :func:`confidence_bands` (same seed, same anomaly): each draw's heat
    divided by its length (the length scales with the distance draw, as the pixel side does)
    and the inside-outside difference. ``(None, None)`` when the heat band cannot be drawn.
    """
    if inputs.pixel_area_m2 is None or length_m <= 0 or delta_air_k <= 0:
        return None, None
    scale_d, _, w_draws = _draws(inputs, seed=seed, anomaly_id=anomaly_id, heat=True)
    if w_draws is None:
        return None, None
    return _band(w_draws / (length_m * scale_d * delta_air_k), psi_w_mk)


def _draws(inputs: BandInputs, *, seed: int, anomaly_id: int, heat: bool):
    """``(distance scale, area draws, heat draws or None)`` of one anomaly's generator."""
    rng = np.random.default_rng([int(seed) & 0xFFFFFFFF, int(anomaly_id)])
    z = rng.standard_normal((6, N_DRAWS))
    outline = rng.uniform(-0.5, 0.5, N_DRAWS)
    scale_d = np.clip(1.0 + inputs.distance_uncertainty_rel * z[0], 0.1, None)  # pixel side ∝ distance
    a_px = inputs.pixel_area_m2 * scale_d**2
    area_draws = np.clip(inputs.area_px + outline * inputs.perimeter_px, 1.0, None) * a_px
    if not heat or inputs.h_convective_w_m2k is None or inputs.h_radiative_w_m2k is None:
        return scale_d, area_draws, None
    eps = inputs.emissivity
    eps_draw = np.clip(eps + inputs.emissivity_uncertainty_abs * z[1], 0.05, 1.0)
    # a contrast corrected with ε when the truth is ε' scales by about ε/ε'; h_r scales with ε'
    contrast_scale = eps / eps_draw
    h_draw = (inputs.h_convective_w_m2k + inputs.h_radiative_w_m2k * eps_draw / eps) * np.clip(
        1.0 + inputs.h_uncertainty_rel * z[2], 0.05, None
    )
    loss = (
        inputs.loss_sum_kpx * contrast_scale
        + inputs.reference_sigma_k * z[3] * inputs.thermal_area_px
        + inputs.netd_k * np.sqrt(max(inputs.thermal_area_px, 1)) * z[4]
    )
    return scale_d, area_draws, h_draw * loss * a_px
