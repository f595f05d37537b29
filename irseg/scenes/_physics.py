"""Surface heat-transfer coefficients and the survey-time conditions of a scene.

The coefficients follow the ISO 6946 annex (surface resistances): a convective
part plus a linearised radiative part ``h_r = ε·4σT_m³`` (ISO 6946:2017 Annex C [M for the
clause]), so the simulated surfaces obey the same physics the analysis assumes when it
turns ΔT into watts.

These helpers deliberately repeat ``irseg.analysis``'s ``h_radiative`` /
``h_convective_interior`` / ``h_convective_exterior`` instead of calling them: the
scenes are the truth side of the validation, so a slip in the analysis'
coefficients must show up as an excess-heat error there rather than cancel out,
and the bundled sample survey must not change when the analysis does. Both are
checked against the same ISO 6946 / ISO 13789 values in their own tests. Only the
Kelvin offset is shared (:data:`irseg._shared.KELVIN_AT_0C`): it is a definition, not a model.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from irseg._shared import KELVIN_AT_0C
from irseg.errors import ConfigError

__all__ = ["Conditions", "NightSchedule", "h_radiative", "h_convective_interior", "h_convective_exterior",
           "saturation_pressure_pa", "evaporation_w_m2"]

# Stefan-Boltzmann constant, CODATA 2018 recommended value [V] (scipy.constants.sigma).
SIGMA = 5.670374419e-8
# ISO 13789 Table 8 / ISO 6946 annex internal convection, W/m²K [V, via open-source code]
_H_CI = {"horizontal": 2.5, "upward": 5.0, "downward": 0.7}


def h_radiative(t_mean_c: float, emissivity: float) -> float:
    """Linearised radiative coefficient ``ε·4σT_m³`` (ISO 6946 annex), W/m²K."""
    return emissivity * 4.0 * SIGMA * (t_mean_c + KELVIN_AT_0C) ** 3


def h_convective_interior(heat_flow: str) -> float:
    """Internal convective coefficient h_ci for a heat-flow direction, W/m²K."""
    try:
        return _H_CI[heat_flow]
    except KeyError:
        raise ConfigError(f"heat_flow={heat_flow!r} is not one of {sorted(_H_CI)}") from None


def h_convective_exterior(wind_m_s: float) -> float:
    """External convective coefficient ``4 + 4v`` (ISO 6946 annex) [M], W/m²K."""
    return 4.0 + 4.0 * wind_m_s


# Magnus form of the saturation vapour pressure over water, Alduchov & Eskridge (1996), J. Appl.
# Meteor. 35, 601-609: e_s = 610.94·exp(17.625·T/(T + 243.04)) Pa, T in °C [M].
_MAGNUS = (610.94, 17.625, 243.04)
_P_ATM = 101325.0  # standard atmosphere, Pa [V, ISO 2533]
_CP_AIR = 1006.0  # specific heat of dry air, J/kgK [M]
_LATENT = 2.45e6  # latent heat of evaporation of water near 20 °C, J/kg [M]


def saturation_pressure_pa(t_c: float | np.ndarray) -> float | np.ndarray:
    """Saturation vapour pressure over water, Pa (Magnus form, Alduchov & Eskridge 1996 [M])."""
    a, b, c = _MAGNUS
    return a * np.exp(b * np.asarray(t_c, float) / (np.asarray(t_c, float) + c))


def _humidity_ratio(p_vapour_pa):
    """Mass of water vapour per mass of dry air, kg/kg (0.622·e/(p − e), ideal gases [C])."""
    return 0.622 * p_vapour_pa / (_P_ATM - p_vapour_pa)


def evaporation_w_m2(*, surface_c, air_c: float, relative_humidity: float, h_convective_w_m2k: float,
                     wet_fraction) -> np.ndarray:
    """Latent heat drawn by evaporation from a damp surface, W/m².

    Mass transfer by the Chilton-Colburn (Lewis) analogy with a Lewis number of 1 [M]:
    ``g = h_c/c_p`` (kg/m²s), evaporation ``m = g·(x_s − x_a)·φ`` with the humidity ratios at
    saturation at the surface and of the room air, and ``φ`` the wet fraction of the surface
    (1: a free water film; damp plaster evaporates at a fraction of that); latent heat ``L·m``.
    """
    x_s = _humidity_ratio(saturation_pressure_pa(surface_c))
    x_a = _humidity_ratio(relative_humidity * saturation_pressure_pa(air_c))
    return np.maximum(0.0, h_convective_w_m2k / _CP_AIR * (x_s - x_a)) * _LATENT * np.asarray(wet_fraction, float)


@dataclass(frozen=True)
class Conditions:
    """Boundary conditions of a scene at survey time.

    Attributes
    ----------
    inside_c : float
        Inside air temperature at 1.5 m above the floor, °C; also the room's mean
        radiant temperature.
    outside_c : float
        Outside air temperature, °C.
    wind_m_s : float
        Wind speed at the outside surface, m/s.
    stratification_k_m : float
        Inside air temperature gradient with height, K/m (at 1.5 m above the floor).
    stratification_k_m2 : float
        Curvature of the inside air temperature with height, K/m²: the air is
        ``inside_c + a·(z − 1.5) + b·(z − 1.5)²`` at height ``z`` (stratification that is
        not linear: a warm layer under the ceiling, cold air pooling at the floor).
    relative_humidity : float
        Inside relative humidity (for the evaporation from damp surfaces), 0..1.
    top_height_m : float
        Height of the element's top edge above the room floor, m (walls) or the
        ceiling height (ceilings, roofs: the whole soffit is at this height).
    sky_c : float or None
        Effective clear-sky radiant temperature, °C (None: outside − 20 K, a clear
        night [CP]).
    sky_view_top, sky_view_bottom : float
        Fraction of the outside face's radiant surroundings that is sky, at the top
        and bottom edge (linear in between); the rest is at the outside air temperature.
    emissivity : float
        Long-wave emissivity of both faces.
    outside_exposure : {"open", "ventilated", "loft"}
        ``open``: outside air, wind and sky; ``ventilated``: behind ventilated cladding
        (R_se = R_si = 0.13, ISO 6946 [M]); ``loft``: a ventilated loft at the outside
        temperature (R = 0.10, upward flow [V, ISO 6946 R_si upward]).
    """

    inside_c: float = 20.0
    outside_c: float = 0.0
    wind_m_s: float = 1.0
    stratification_k_m: float = 1.0
    stratification_k_m2: float = 0.0
    relative_humidity: float = 0.5
    top_height_m: float = 2.4
    sky_c: float | None = None
    sky_view_top: float = 0.5
    sky_view_bottom: float = 0.5
    emissivity: float = 0.9
    outside_exposure: str = "open"

    def sky_temperature_c(self) -> float:
        return self.outside_c - 20.0 if self.sky_c is None else self.sky_c


@dataclass(frozen=True)
class NightSchedule:
    """A clear sunny day followed by the evening: the transient roof case.

    The run starts at ``start_h`` from the steady state of that hour's conditions and
    ends at ``end_h`` (the survey time). Absorbed solar flux is a half-sine between
    ``sunrise_h`` and ``sunset_h``; outside air follows a sine with its maximum at
    15:00 [CP]; the sky stays ``sky_depression_k`` below the air.
    """

    start_h: float = 6.0
    end_h: float = 22.0
    dt_s: float = 900.0
    sunrise_h: float = 6.0
    sunset_h: float = 19.0
    solar_peak_w_m2: float = 650.0
    absorptance: float = 0.9
    air_mean_c: float = 10.0
    air_amplitude_k: float = 5.0
    sky_depression_k: float = 20.0

    def air_c(self, hour: float) -> float:
        return self.air_mean_c + self.air_amplitude_k * float(np.cos(2 * np.pi * (hour - 15.0) / 24.0))

    def solar_w_m2(self, hour: float) -> float:
        if not self.sunrise_h < hour < self.sunset_h:
            return 0.0
        frac = (hour - self.sunrise_h) / (self.sunset_h - self.sunrise_h)
        return self.absorptance * self.solar_peak_w_m2 * float(np.sin(np.pi * frac))
