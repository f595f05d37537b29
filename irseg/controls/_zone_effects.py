"""What zones change in an analysis once it is done: "cut by zone" reasons, material heat-transfer coefficients.

The analysis itself never sees a zone: exclude zones reach it as invalid pixels of the frame,
material zones as corrected temperatures. Two things are settled here, afterwards:

- an anomaly whose region touches an exclude zone (the region dilated by one pixel, 8-connected)
  may be larger than what is seen: its reason gains ``cut by zone '<label>'``;
- inside a material zone the radiative part of the surface coefficient follows the zone's
  emissivity. The linearised coefficient is ``h = h_c + h_r`` with ``h_r = ε·4σT_m³``
  (ISO 6946:2017, annex on surface resistances), so ``h_r`` scales with ε at the same mean
  temperature. Each anomaly takes ``ε_a``, the mean of the emissivity map over its pixels, and its
  heat figures (excess W, its band, kWh/year) are scaled by
  ``(h_c + h_r·ε_a/ε_surface) / (h_c + h_r)``; the survey ranks are then recomputed.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..types import SurveyMeta
from ._zones import ZoneLayer

__all__ = ["mark_zones", "convective_coefficient"]

#: Wind speed behind the conventional exterior coefficient h_ce = 20 W/m²K (h_ce = 4 + 4·v at
#: v = 4 m/s, ISO 6946 annex; the same value as irseg.analysis uses when no wind is given).
_CONVENTIONAL_WIND_M_S = 4.0


def convective_coefficient(meta: SurveyMeta) -> float:
    """The convective part ``h_c`` of the surface coefficient the analysis uses, W/m²K.

    Interior views: ``h_ci`` for the heat-flow direction (``[surface] heat_flow``, else horizontal
    for walls, upward for roofs); other views: ``h_ce`` for the wind (else the conventional 4 m/s).
    """
    from ..analysis import h_convective_exterior, h_convective_interior

    surf = meta.surface
    if surf.view == "interior":
        return h_convective_interior(surf.heat_flow or "horizontal")
    wind = meta.air.wind_m_s
    return h_convective_exterior(_CONVENTIONAL_WIND_M_S if wind is None else wind)


def _touching(labels: np.ndarray, zone: np.ndarray) -> set[int]:
    """Ids of the anomalies whose region, dilated by one pixel (8-connected), meets ``zone``."""
    from scipy import ndimage

    near = ndimage.binary_dilation(zone, structure=np.ones((3, 3), bool))
    ids = np.unique(labels[near])
    return {int(i) for i in ids if i > 0}


def _scale(value: float | None, factor: float) -> float | None:
    return None if value is None else float(value) * factor


def mark_zones(analysis, layer: ZoneLayer | None, meta: SurveyMeta):
    """The analysis with the zones' effects: reasons of cut anomalies, heat figures in material zones.

    Parameters
    ----------
    analysis : irseg.analysis.Analysis
    layer : ZoneLayer or None
        The image's zones (:func:`irseg.controls.zone_layer`); None returns ``analysis`` as it is.
    meta : SurveyMeta

    Returns
    -------
    irseg.analysis.Analysis
        Same labels, reference and warnings; anomalies changed only where a zone touches them,
        ranks recomputed when a heat figure changed.
    """
    from ..analysis import severity_key, severity_score

    if layer is None or not analysis.anomalies:
        return analysis
    labels = np.asarray(analysis.labels)
    notes: dict[int, list[str]] = {}
    for zone in layer.of_kind("exclude"):
        for aid in sorted(_touching(labels, zone.mask)):
            notes.setdefault(aid, []).append(f"cut by zone '{zone.label}'")
    factors = _material_factors(analysis, layer, meta, labels, notes)
    if not notes:
        return analysis
    changed = []
    for a in analysis.anomalies:
        if a.anomaly not in notes:
            changed.append(a)
            continue
        updates = {"reason": f"{a.reason}; " + "; ".join(notes[a.anomaly])}
        factor = factors.get(a.anomaly)
        if factor is not None:
            updates.update(
                excess_w=_scale(a.excess_w, factor), excess_low_w=_scale(a.excess_low_w, factor),
                excess_high_w=_scale(a.excess_high_w, factor), excess_kwh_year=_scale(a.excess_kwh_year, factor),
            )
            updates["severity_score"] = severity_score(
                mould_risk=a.mould_risk, excess_kwh_year=updates["excess_kwh_year"], excess_w=updates["excess_w"],
                area_px=a.area_px)
        changed.append(replace(a, **updates))
    if factors:
        rank = {a.anomaly: k for k, a in enumerate(sorted(changed, key=severity_key), start=1)}
        changed = [replace(a, severity=rank[a.anomaly]) for a in changed]
    return replace(analysis, anomalies=tuple(changed))


def _material_factors(analysis, layer: ZoneLayer, meta: SurveyMeta, labels: np.ndarray,
                      notes: dict[int, list[str]]) -> dict[int, float]:
    """Heat-figure factor of each anomaly inside a material zone with its own emissivity (notes added)."""
    zones = [z for z in layer.of_kind("material") if z.zone.emissivity is not None]
    h = analysis.h_w_m2k
    if not zones or h is None or not math.isfinite(h):
        return {}
    surface_e = float(meta.surface.emissivity)
    emissivity = np.full(labels.shape, surface_e)
    for z in zones:
        emissivity[z.mask] = z.zone.emissivity
    h_c = convective_coefficient(meta)
    h_r = float(h) - h_c
    if not h_r > 0.0:
        return {}
    factors: dict[int, float] = {}
    for a in analysis.anomalies:
        region = labels == a.anomaly
        inside = [z for z in zones if (z.mask & region).any()]
        if not inside or not region.any():
            continue
        e_a = float(emissivity[region].mean())
        factors[a.anomaly] = (h_c + h_r * e_a / surface_e) / (h_c + h_r)
        names = ", ".join(f"'{z.label}'" for z in inside)
        notes.setdefault(a.anomaly, []).append(f"emissivity {e_a:.2f} from material zone {names}")
    return factors
