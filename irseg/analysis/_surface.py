"""Surface heat-transfer coefficients and conventional surface resistances.

The linearised surface balance of ISO 6946 (annex on surface resistances) splits
the coefficient into a convective part ``h_c`` and a radiative part
``h_r = ε·h_r0`` with ``h_r0 = 4σT_m³``; ``R_s = 1/(h_c + h_r)``.

References
----------
ISO 6946:2017, annex on surface resistances (Annex A in the 2007 edition).
BS EN ISO 13789:2017, Table 8 (h_ci 5.0 / 2.5 / 0.7 W/m²K; h_ce 20 at v = 4 m/s).
"""

from __future__ import annotations

import math

from scipy.constants import Stefan_Boltzmann

from .._shared import KELVIN_AT_0C, check_emissivity
from ..errors import ConfigError
from ..vocabulary import HEAT_FLOWS, VIEWS

__all__ = [
    "SIGMA",
    "H_CI",
    "CONVENTIONAL_WIND_M_S",
    "h_radiative",
    "h_convective_interior",
    "h_convective_exterior",
    "h_interior",
    "h_exterior",
    "surface_resistance_interior",
    "surface_resistance_exterior",
    "resolve_heat_flow",
]

#: Stefan–Boltzmann constant, W m⁻² K⁻⁴ (CODATA 2018, via scipy.constants).
SIGMA: float = float(Stefan_Boltzmann)

#: Interior convective coefficient by heat-flow direction, W/m²K (BS EN ISO 13789:2017 Table 8).
H_CI: dict[str, float] = {"upward": 5.0, "horizontal": 2.5, "downward": 0.7}

#: Wind speed behind the conventional h_ce = 20 W/m²K of ISO 13789 Table 8 (4 + 4·4).
CONVENTIONAL_WIND_M_S: float = 4.0

def h_radiative(t_mean_c: float, emissivity: float = 1.0) -> float:
    """Linearised radiative coefficient ``h_r = ε·4σT_m³``.

    Parameters
    ----------
    t_mean_c : float
        Mean of the surface and radiant-surroundings temperatures, °C.
    emissivity : float, optional
        Long-wave emissivity in (0, 1]; 1 gives the black-body ``h_r0``.

    Returns
    -------
    float
        W/m²K (4.62 at 0 °C, 5.71 at 20 °C for ε = 1).

    Raises
    ------
    ConfigError
        Temperature at or below absolute zero, or emissivity outside (0, 1].

    References
    ----------
    ISO 6946:2017, annex on surface resistances (h_r0 = 4σT_m³).
    """
    t_k = float(t_mean_c) + KELVIN_AT_0C
    if not (t_k > 0.0) or not math.isfinite(t_k):
        raise ConfigError(f"mean temperature {t_mean_c!r} °C is not a physical temperature")
    return check_emissivity(emissivity) * 4.0 * SIGMA * t_k**3


def h_convective_interior(heat_flow: str = "horizontal") -> float:
    """Interior convective coefficient ``h_ci`` for a heat-flow direction, W/m²K.

    Parameters
    ----------
    heat_flow : {"horizontal", "upward", "downward"}

    Raises
    ------
    ConfigError
        Unknown direction.

    References
    ----------
    BS EN ISO 13789:2017 Table 8; ISO 6946 annex.
    """
    try:
        return H_CI[heat_flow]
    except KeyError:
        raise ConfigError(
            f"[surface] heat_flow = {heat_flow!r} is not one of {', '.join(HEAT_FLOWS)}"
        ) from None


def h_convective_exterior(wind_m_s: float = CONVENTIONAL_WIND_M_S) -> float:
    """Exterior convective coefficient ``h_ce = 4 + 4·v``, W/m²K (ISO 6946 annex).

    Raises
    ------
    ConfigError
        Negative or non-finite wind speed.
    """
    v = float(wind_m_s)
    if not (v >= 0.0) or not math.isfinite(v):
        raise ConfigError(f"[air] wind_m_s = {wind_m_s!r} must be a finite speed >= 0 m/s")
    return 4.0 + 4.0 * v


def h_interior(*, heat_flow: str = "horizontal", t_mean_c: float = 20.0, emissivity: float = 0.9) -> float:
    """Interior surface coefficient ``h_si = h_ci + ε·4σT_m³``, W/m²K.

    Parameters
    ----------
    heat_flow : {"horizontal", "upward", "downward"}
        Direction of the heat flow (walls horizontal, ceilings upward, floors downward).
    t_mean_c : float
        Mean of surface and surroundings temperature, °C.
    emissivity : float
        Surface emissivity (the ISO convention uses 0.9).

    Returns
    -------
    float
        7.64 W/m²K for a wall at 20 °C with ε 0.9 (R_si ≈ 0.13).
    """
    return h_convective_interior(heat_flow) + h_radiative(t_mean_c, emissivity)


def h_exterior(*, wind_m_s: float = CONVENTIONAL_WIND_M_S, t_mean_c: float = 0.0, emissivity: float = 0.9) -> float:
    """Exterior surface coefficient ``h_se = 4 + 4·v + ε·4σT_m³``, W/m²K.

    For roofs the radiant surroundings are the sky; the linearisation around
    ``T_m`` (mean of surface and sky temperature) is a simplification that holds
    for small contrasts between the anomaly and the sound surface.

    Parameters
    ----------
    wind_m_s : float
        Wind speed at the surface, m/s (4 m/s gives the conventional h_ce = 20).
    t_mean_c : float
        Mean of surface and surroundings (sky) temperature, °C.
    emissivity : float
        Surface emissivity.
    """
    return h_convective_exterior(wind_m_s) + h_radiative(t_mean_c, emissivity)


def surface_resistance_interior(
    *, heat_flow: str = "horizontal", t_mean_c: float = 20.0, emissivity: float = 0.9
) -> float:
    """Interior surface resistance ``R_si = 1/h_si``, m²K/W (0.13 / 0.10 / 0.17 when rounded)."""
    return 1.0 / h_interior(heat_flow=heat_flow, t_mean_c=t_mean_c, emissivity=emissivity)


def surface_resistance_exterior(
    *, wind_m_s: float = CONVENTIONAL_WIND_M_S, t_mean_c: float = 0.0, emissivity: float = 0.9
) -> float:
    """Exterior surface resistance ``R_se = 1/h_se``, m²K/W (0.04 at the conventional 4 m/s)."""
    return 1.0 / h_exterior(wind_m_s=wind_m_s, t_mean_c=t_mean_c, emissivity=emissivity)


def resolve_heat_flow(view: str, heat_flow: str | None) -> str:
    """Heat-flow direction in force: the given one, else horizontal (walls) or upward (roof).

    Raises
    ------
    ConfigError
        Unknown view or direction.
    """
    if view not in VIEWS:
        raise ConfigError(f"[surface] view = {view!r} is not one of {', '.join(VIEWS)}")
    if heat_flow is None:
        return "upward" if view == "roof" else "horizontal"
    h_convective_interior(heat_flow)  # validates
    return heat_flow
