"""Inspection-condition checks; messages travel in ``Analysis.warnings``.

Nothing here calls :func:`warnings.warn`: the pipeline collects the texts with
the results so that they reach the CSV, JSON and report.

References
----------
EN 13187:1998 and ASTM C1060: inside-outside difference of at least 10 K.
ASTM C1060: wind at most 15 mph (6.7 m/s).
Below :data:`MIN_AIR_DIFFERENCE_K` (1 K) the difference is within two air thermometers'
error (±0.5 K each, common practice): the per-kelvin figures are not computed at all.
"""

from __future__ import annotations

from .._defaults import DEFAULT_REFLECTED_C
from ..metadata import MIN_AIR_DIFFERENCE_K
from ..types import Air, AnalysisSettings

__all__ = ["check_conditions", "MIN_AIR_DIFFERENCE_K"]


def check_conditions(
    *, air: Air, analysis: AnalysisSettings, view: str, reflected_given: bool, has_geometry: bool
) -> tuple[str, ...]:
    """Human-readable warnings about the survey conditions and missing metadata.

    Parameters
    ----------
    air : Air
        Air temperatures and wind at survey time.
    analysis : AnalysisSettings
        The limits (``min_delta_t_k``, ``max_wind_m_s``).
    view : {"interior", "exterior", "roof"}
        Side the camera looks at.
    reflected_given : bool
        Whether ``[surface] reflected_c`` was given (a roof needs the sky temperature).
    has_geometry : bool
        Whether the pixel side on the surface is known.

    Returns
    -------
    tuple of str
    """
    out: list[str] = []
    an = analysis
    if air.inside_c is None or air.outside_c is None:
        missing = " and ".join(k for k, v in (("inside_c", air.inside_c), ("outside_c", air.outside_c)) if v is None)
        out.append(
            f"[air] {missing} not given: annual energy (kWh/year) and f_Rsi / mould risk cannot be estimated; "
            "record the inside and outside air temperatures at survey time"
        )
    else:
        dt = air.inside_c - air.outside_c
        if dt <= 0:
            out.append(
                f"inside {air.inside_c:g} °C is not warmer than outside {air.outside_c:g} °C: heating-season "
                "estimates (kWh/year, f_Rsi) are not computed and the sign of the anomalies may be reversed"
            )
        elif dt < MIN_AIR_DIFFERENCE_K:
            out.append(
                f"inside-outside difference {dt:.3g} K is below {MIN_AIR_DIFFERENCE_K:g} K, within the error of "
                "two air thermometers: annual energy (kWh/year), f_Rsi and mould risk are not computed, as "
                "dividing by so small a difference gives any number; check [air] inside_c and outside_c, "
                "and survey when the difference is at least 10 K (EN 13187)"
            )
        elif dt < an.min_delta_t_k:
            out.append(
                f"inside-outside difference {dt:.1f} K is below {an.min_delta_t_k:g} K (EN 13187 / ASTM C1060 "
                "practice): contrasts are weak and defects may be missed; survey when the difference is larger"
            )
    if view in ("exterior", "roof"):
        if air.wind_m_s is None:
            out.append(
                "[air] wind_m_s not given: the exterior coefficient uses the conventional 4 m/s "
                "(h_ce = 20 W/m²K, ISO 13789); record the wind at the surface"
            )
        elif air.wind_m_s > an.max_wind_m_s:
            out.append(
                f"wind {air.wind_m_s:g} m/s exceeds {an.max_wind_m_s:g} m/s (ASTM C1060 practice): convection "
                "masks surface contrasts and the heat-loss estimates are unreliable"
            )
    if view == "roof" and not reflected_given:
        used = "the outside air" if air.outside_c is not None else f"{DEFAULT_REFLECTED_C:g} °C"
        out.append(
            "[surface] reflected_c not given for a roof view: set it to the sky temperature; the radiative "
            f"coefficient then uses {used} and the check for sky-reflecting patches is off"
        )
    if not has_geometry:
        out.append(
            "no geometry: set [camera] pixel_m, or hfov_deg and distance_m; areas are in pixels only "
            "(area_m2 None) and excess heat loss cannot be estimated"
        )
    return tuple(out)
