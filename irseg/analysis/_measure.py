"""Heat-loss, energy and temperature-factor formulas used per anomaly.

References
----------
Degree-day method: annual energy = excess conductance × heating degree-days × 24 h.
ISO 13788: temperature factor f_Rsi = (θ_si − θ_e)/(θ_i − θ_e).
"""

from __future__ import annotations

import math

from ._conditions import MIN_AIR_DIFFERENCE_K

__all__ = ["excess_heat_w", "annual_energy_kwh", "temperature_factor", "FRSI_PERCENTILE"]

FRSI_PERCENTILE = 5.0  # an anomaly's surface temperature for f_Rsi: this percentile of its pixels (its coldest part, not one noisy pixel)


def excess_heat_w(*, h_w_m2k: float, loss_sum_kpx: float, pixel_area_m2: float) -> float:
    """Excess heat flow ``ΔQ = h · Σ ΔT_pixel · A_pixel``, W.

    Parameters
    ----------
    h_w_m2k : float
        Surface heat-transfer coefficient, W/m²K.
    loss_sum_kpx : float
        Sum over the thermal region (region + soft rim) of the loss-signed contrast, K·px
        (reference − T from inside, T − reference from outside).
    pixel_area_m2 : float
        Surface area of one pixel, m².
    """
    return float(h_w_m2k) * float(loss_sum_kpx) * float(pixel_area_m2)


def annual_energy_kwh(excess_w: float | None, *, inside_c: float | None, outside_c: float | None,
                      degree_days: float) -> float | None:
    """Annual energy of an excess heat flow by the degree-day method, kWh/year.

    ``E = ΔQ / (θ_i − θ_e) · HDD · 24 / 1000``.

    Parameters
    ----------
    excess_w : float or None
        Excess heat flow at survey time, W.
    inside_c, outside_c : float or None
        Air temperatures at survey time, °C.
    degree_days : float
        Heating degree-days, K·d per year.

    Returns
    -------
    float or None
        None when a temperature is unknown or the inside is not warmer than the outside by
        at least ``MIN_AIR_DIFFERENCE_K`` (1 K; a smaller difference is within the
        thermometers' error and dividing by it gives any number).
    """
    if excess_w is None or inside_c is None or outside_c is None:
        return None
    dt = float(inside_c) - float(outside_c)
    if not (dt >= MIN_AIR_DIFFERENCE_K) or not math.isfinite(dt):
        return None
    return float(excess_w) / dt * float(degree_days) * 24.0 / 1000.0


def temperature_factor(t_si_c: float, *, inside_c: float | None, outside_c: float | None) -> float | None:
    """Measured temperature factor ``(θ_si − θ_e)/(θ_i − θ_e)`` (None if undefined).

    This is the on-site ratio at survey conditions (real R_si ≈ 0.13 m²K/W); the
    design f_Rsi of ISO 13788 / DIN 4108-2 uses R_si = 0.25 and is lower for the
    same wall. None when an air temperature is unknown or the inside is not warmer than
    the outside by at least ``MIN_AIR_DIFFERENCE_K`` (1 K).
    """
    if inside_c is None or outside_c is None:
        return None
    dt = float(inside_c) - float(outside_c)
    if not (dt >= MIN_AIR_DIFFERENCE_K) or not math.isfinite(dt):
        return None
    return (float(t_si_c) - float(outside_c)) / dt
