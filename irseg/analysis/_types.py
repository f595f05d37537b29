"""Result types of the analysis stage and the severity ordering."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Anomaly", "Analysis", "severity_key", "severity_score"]


@dataclass(frozen=True)
class Anomaly:
    """One measured, classified anomaly. Field names are the CSV columns.

    Attributes
    ----------
    anomaly : int
        Id 1..k within the image (raster order of the bounding box's top-left corner).
    kind : {"cold", "warm"}
        Sign of the contrast against the local sound reference.
    cause : {"missing_insulation", "thermal_bridge", "air_leakage", "moisture", "unclassified"}
    reason : str
        The rule that decided the cause, in a few words.
    area_px : int
        Pixels of the measured extent: where the anomaly holds half of its own peak
        contrast (a segmented region's pixels holding half its core contrast inside
        its edge line, when the segmentation's outline agrees; all pieces when one
        framing member was split into several regions).
    area_m2, area_low_m2, area_high_m2 : float or None
        Surface area estimate and its 5-95 % band, m² (None without geometry).
    mean_c, min_c, max_c : float
        Surface temperature over the region, °C.
    reference_c : float
        Local sound reference averaged over the region, °C.
    delta_k : float
        ``mean_c − reference_c``, K.
    excess_w, excess_low_w, excess_high_w : float or None
        Excess heat loss estimate and band, W (None without geometry or for the
        sign that is not a heat-loss signature from this side).
    excess_kwh_year : float or None
        Annual energy estimate, kWh/year (degree-day method).
    f_rsi : float or None
        Measured temperature factor from the anomaly's 5th-percentile temperature
        (interior views with known air temperatures).
    mould_risk : bool or None
        ``f_rsi < frsi_limit``.
    centroid_row, centroid_col : float
        Pixel centroid.
    bbox_row0, bbox_col0, bbox_row1, bbox_col1 : int
        Bounding box (row1/col1 exclusive).
    severity : int
        Rank within the image, 1 = repair first.
    severity_score : float
        Ordering score, larger = more urgent (not a physical quantity).
    length_m : float or None
        Linear thermal bridges (cause ``thermal_bridge``): length seen in the image, m (the
        members' lengths summed for a framing summary); None for area anomalies or without geometry.
    psi_w_mk, psi_low_w_mk, psi_high_w_mk : float or None
        Linear thermal transmittance ψ = excess heat / (length · (T_i − T_e)) and its 5-95 % band,
        W/(m·K) (ISO 14683 meaning; :mod:`._bridges`); None without a positive inside-outside
        difference or a heat figure.
    """

    anomaly: int
    kind: str
    cause: str
    reason: str
    area_px: int
    area_m2: float | None
    area_low_m2: float | None
    area_high_m2: float | None
    mean_c: float
    min_c: float
    max_c: float
    reference_c: float
    delta_k: float
    excess_w: float | None
    excess_low_w: float | None
    excess_high_w: float | None
    excess_kwh_year: float | None
    f_rsi: float | None
    mould_risk: bool | None
    centroid_row: float
    centroid_col: float
    bbox_row0: int
    bbox_col0: int
    bbox_row1: int
    bbox_col1: int
    severity: int
    severity_score: float
    length_m: float | None = None
    psi_w_mk: float | None = None
    psi_low_w_mk: float | None = None
    psi_high_w_mk: float | None = None


@dataclass(frozen=True)
class Analysis:
    """Anomalies of one image.

    Attributes
    ----------
    anomalies : tuple of Anomaly
        Ordered by id.
    labels : (M, N) int32 ndarray
        Anomaly id per pixel of its measured extent, 0 elsewhere.
    pixel_m : float or None
        One pixel's side on the surface, m (None without geometry).
    pixel_area_m2 : float or None
        Area of one pixel including the tilt factor, m².
    h_w_m2k : float or None
        Surface heat-transfer coefficient used, W/m²K.
    reference_c : (M, N) float ndarray
        Local sound reference, °C: each segmented anomaly's ring plane over its thermal
        region, the local sound surface elsewhere (under the detected anomalies too); NaN
        on masked pixels and on heat emitters seen from inside (:mod:`._emitters`).
    warnings : tuple of str
        Conditions and metadata warnings.
    """

    anomalies: tuple[Anomaly, ...]
    labels: np.ndarray
    pixel_m: float | None
    pixel_area_m2: float | None
    h_w_m2k: float | None
    reference_c: np.ndarray
    warnings: tuple[str, ...]


def _desc(x: float | None) -> float:
    """Sort key component: larger first, None last."""
    return math.inf if x is None or not math.isfinite(x) else -float(x)


def severity_key(anomaly: Anomaly) -> tuple:
    """Key for ``sorted``: mould risk first, then excess kWh/year, W, area (m², then px).

    Works across images of a survey (ties keep the anomaly id order).
    """
    return (
        0 if anomaly.mould_risk else 1,
        _desc(anomaly.excess_kwh_year),
        _desc(anomaly.excess_w),
        _desc(anomaly.area_m2),
        -anomaly.area_px,
        anomaly.anomaly,
    )


def severity_score(
    *, mould_risk: bool | None, excess_kwh_year: float | None, excess_w: float | None, area_px: int
) -> float:
    """``10⁶·[mould risk] + kWh/year`` (or W when kWh is unknown) ``+ 10⁻⁶·area_px``.

    Within one image kWh ∝ W, so ranking by this score equals ranking by
    :func:`severity_key`. Negative or unknown heat loss counts as zero.
    """
    energy = excess_kwh_year if excess_kwh_year is not None else excess_w
    energy = max(0.0, float(energy)) if energy is not None and math.isfinite(energy) else 0.0
    return (1e6 if mould_risk else 0.0) + min(energy, 9.99e5) + 1e-6 * min(area_px, 9.99e5)
