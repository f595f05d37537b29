"""Anomaly analysis: local sound reference, cause, area, excess heat loss, f_Rsi, confidence.

``analyse(frame, seg, meta)`` finds the anomalies of a thermogram by their significant contrast
against a robust local sound surface (with or without a jump; the segmentation's jumps place the
outline where they exist) and measures and classifies them, one anomaly per defect. All quantities are estimates; see ``docs/analysis.md`` for
every rule, formula, default and its source.
"""

from __future__ import annotations

from ._analyse import analyse, significance_threshold_k
from ..vocabulary import CAUSES
from ._measure import annual_energy_kwh, excess_heat_w, temperature_factor
from ._geometry import MIN_SPOT_PX, pixel_area_m2, pixel_size_m, tilt_factor
from ._surface import (
    H_CI,
    SIGMA,
    h_convective_exterior,
    h_convective_interior,
    h_exterior,
    h_interior,
    h_radiative,
    surface_resistance_exterior,
    surface_resistance_interior,
)
from ._types import Analysis, Anomaly, severity_key, severity_score

__all__ = [
    "analyse",
    "Analysis",
    "Anomaly",
    "severity_key",
    "severity_score",
    "significance_threshold_k",
    "CAUSES",
    "MIN_SPOT_PX",
    "SIGMA",
    "H_CI",
    "h_radiative",
    "h_convective_interior",
    "h_convective_exterior",
    "h_interior",
    "h_exterior",
    "surface_resistance_interior",
    "surface_resistance_exterior",
    "pixel_size_m",
    "excess_heat_w",
    "annual_energy_kwh",
    "temperature_factor",
    "pixel_area_m2",
    "tilt_factor",
]
