"""From measured candidates to :class:`Anomaly` records: units, cause, heat, bands, severity.

A *unit* is what the thermographer calls one anomaly: a candidate with the fragments
absorbed into it, or every piece of one framing member.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..types import SurveyMeta
from ._bridges import (GeometricProfile, geometric_profile, linear_figures, side_coefficients, side_note,
                       straight_band_loss)
from ._classify import GEOMETRIC_REASON, GLAZING_REASON, classify_cause, framing_summary_reason
from ._confidence import BandInputs, confidence_bands
from ._framing import LineInfo
from ._glazing import is_framed_pane, pane_profile
from ._measure import FRSI_PERCENTILE, annual_energy_kwh, excess_heat_w, temperature_factor
from ._thermal_region import Measured
from ._types import Anomaly, severity_key, severity_score

__all__ = ["ImageContext", "group_units", "anomaly_record", "rank_by_severity", "FRSI_PERCENTILE", "EDGE_NOTE"]

EDGE_NOTE = "touches the frame edge: its area may be cut"


@dataclass(frozen=True)
class ImageContext:
    """What every anomaly of one image is measured and judged with.

    Attributes
    ----------
    temperature_c : (M, N) ndarray
        Corrected temperatures, °C.
    meta : SurveyMeta
        The metadata in force (air temperatures, analysis settings, emissivity,
        uncertainties, camera NETD).
    threshold_k : float
        Significance threshold, K.
    pixel_m, pixel_area_m2 : float or None
        One pixel's side on the surface (m) and its area with the tilt factor (m²).
    h_convective_w_m2k, h_radiative_w_m2k : float
        Parts of the surface coefficient.
    sky_limit_c : float or None
        Roofs: temperature of a surface with no conduction from below, °C.
    delta_air_k : float or None
        Inside minus outside air temperature when positive, K.
    heat_flow : str
        Heat-flow direction in force (a ceiling is "upward").
    """

    temperature_c: np.ndarray
    meta: SurveyMeta
    threshold_k: float
    pixel_m: float | None
    pixel_area_m2: float | None
    h_convective_w_m2k: float
    h_radiative_w_m2k: float
    sky_limit_c: float | None
    delta_air_k: float | None
    heat_flow: str = "horizontal"

    @property
    def h_w_m2k(self) -> float:
        """The surface coefficient ``h_c + h_r``, W/m²K."""
        return self.h_convective_w_m2k + self.h_radiative_w_m2k


def group_units(
    measured: list[Measured], *, host_of: dict[int, int], sets: dict[int, LineInfo], lines: dict[int, LineInfo]
) -> list[list[Measured]]:
    """Units in raster order of their top-left corner.

    Pieces of one framing member (same ``(set, line)`` of a line found by
    :func:`._framing.find_lines`) form one unit, a member interrupted by other anomalies;
    every member of one regular set is one unit (the framing summary); fragments join
    their host's unit, except a framing member, which stays with its set or line.
    """
    members: dict[tuple[int, int], list[Measured]] = {}
    units: list[list[Measured]] = []
    by_label: dict[int, list[Measured]] = {}
    # a framing member stays with its set or line even when it touches another anomaly of similar
    # temperature (it is never that anomaly's fragment)
    host_of = _hosts(host_of, sets, lines)
    for m in measured:
        if m.cand.label in host_of:
            continue
        info = sets.get(m.cand.label) or lines.get(m.cand.label)
        if info is None:
            units.append([m])
            by_label[m.cand.label] = units[-1]
        else:
            key = (info[2][0], -1) if info[2][0] > 0 else info[2]  # a set: all its members
            members.setdefault(key, []).append(m)
            by_label[m.cand.label] = members[key]
    for m in measured:
        if m.cand.label in host_of:
            by_label[host_of[m.cand.label]].append(m)
    units.extend(members.values())
    units.sort(key=lambda u: (min(m.bbox[0] for m in u), min(m.bbox[1] for m in u), min(m.cand.label for m in u)))
    return units


def _hosts(host_of: dict[int, int], sets: dict[int, LineInfo], lines: dict[int, LineInfo]) -> dict[int, int]:
    """``host_of`` without the framing members: a member is never another anomaly's fragment."""
    return {k: v for k, v in host_of.items() if k not in sets and k not in lines}


@dataclass(frozen=True)
class _UnitPixels:
    rows: np.ndarray  # image rows of the measured extent
    cols: np.ndarray
    values_c: np.ndarray  # temperatures there
    reference_c: np.ndarray  # local sound reference there
    loss_sum_kpx: float  # over the thermal region of the whole unit
    n_rim: int  # soft-rim pixels of the unit, each counted once


def _unit_pixels(unit: list[Measured], main: Measured, t: np.ndarray) -> _UnitPixels:
    rows = np.concatenate([m.cand.rr[m.extent_mask] + m.cand.r0 for m in unit])
    cols = np.concatenate([m.cand.cc[m.extent_mask] + m.cand.c0 for m in unit])
    refs = np.concatenate([m.cand.ref_in[m.extent_mask] for m in unit])
    # a soft-rim pixel shared by pieces of one anomaly counts once (the largest piece's value)
    ordered = [main] + [m for m in unit if m is not main]
    rim_idx = np.concatenate([m.rim_index for m in ordered])
    rim_loss = np.concatenate([m.rim_loss_k for m in ordered])
    _, first = np.unique(rim_idx, return_index=True)
    loss_sum = float(sum(m.loss_sum_kpx for m in unit)) + float(rim_loss[first].sum())
    return _UnitPixels(rows, cols, t[rows, cols], refs, loss_sum, int(first.size))


def _cause(
    unit: list[Measured], main: Measured, *, ctx: ImageContext, delta_k: float, mean_c: float,
    sets: dict[int, LineInfo], lines: dict[int, LineInfo], host_of: dict[int, int], contact: dict[str, float],
    geometric: GeometricProfile | None = None,
) -> tuple[str, str]:
    """Cause of the unit's main piece, the reason telling how many pieces were joined.

    A unit holding two or more members of one regular set is the image's framing summary:
    ``thermal_bridge`` with the summary's reason when its sign is the heat-loss sign from this side.
    """
    view = ctx.meta.surface.view
    set_lines = {sets[m.cand.label][2] for m in unit if m.cand.label in sets}
    expected = "cold" if view == "interior" else "warm"
    if len(set_lines) >= 2 and (main.kind == expected or view == "roof"):
        info = sets[next(m.cand.label for m in unit if m.cand.label in sets)]
        reason = framing_summary_reason(len(set_lines), info[1], kind=main.kind, pixel_m=ctx.pixel_m,
                                        width_px=main.shape.width_px)
        return "thermal_bridge", reason
    cause, reason = classify_cause(
        main.shape, kind=main.kind, view=ctx.meta.surface.view, delta_k=delta_k, mean_c=mean_c,
        threshold_k=ctx.threshold_k, pixel_m=ctx.pixel_m, regular_set=sets.get(main.cand.label),
        delta_air_k=ctx.delta_air_k, sky_limit_c=ctx.sky_limit_c, line=lines.get(main.cand.label),
        contact=contact, heat_flow=ctx.heat_flow, detected=main.cand.ref.source == "detected", geometric=geometric,
    )
    n_frag = sum(1 for m in unit if m.cand.label in host_of)
    if len(unit) - n_frag > 1:
        reason += f" ({len(unit) - n_frag} pieces of one member, interrupted by other anomalies or the segmentation)"
    if n_frag:
        reason += f" (with {n_frag} touching fragment(s) of similar temperature)"
    if main.parts > 1:
        reason += f" (one anomaly over {main.parts} segmented pieces: its extent is where it holds half its peak contrast)"
    if any(m.cand.ref.source == "surface" for m in unit):
        reason += "; reference: the local sound surface (no sound ring around it)"
    return cause, reason


def _pane(main: Measured, px: _UnitPixels, ctx: ImageContext) -> tuple[float, float] | None:
    """``(rim, middle)`` contrast of a framed pane (:mod:`._glazing`), None when the unit is not one.

    Only a compact area of the heat-loss sign on a wall or ceiling, with a known pixel size.
    """
    view = ctx.meta.surface.view
    if ctx.pixel_m is None or view == "roof" or main.kind != ("cold" if view == "interior" else "warm"):
        return None
    if not main.shape.compact:
        return None
    sign = -1.0 if view == "interior" else 1.0
    profile = pane_profile(px.rows, px.cols, sign * (px.values_c - px.reference_c), ctx.pixel_m)
    return profile if is_framed_pane(profile, rect_fill=main.shape.rect_fill) else None


def _straight_band(px: _UnitPixels, main: Measured, ctx: ImageContext) -> _UnitPixels:
    """``px`` with the loss sum of a straight band's whole cross-profile (:func:`._bridges.straight_band_loss`)."""
    horizontal = abs(main.shape.orientation_deg % 180.0 - 90.0) > 45.0
    along = px.cols if horizontal else px.rows
    loss = straight_band_loss(ctx.temperature_c, main.shape, (int(along.min()), int(along.max())),
                              loss_sign=1.0 if ctx.meta.surface.view == "interior" else -1.0, pixel_m=ctx.pixel_m)
    return px if loss is None or loss <= 0 else replace(px, loss_sum_kpx=loss)


def _frame_contact(rows: np.ndarray, cols: np.ndarray, n_rows: int) -> dict[str, float]:
    """Share of the anomaly's columns in which it reaches the frame's top and bottom rows."""
    width = int(np.unique(cols).size)
    return {"top": int(np.unique(cols[rows == 0]).size) / max(width, 1),
            "bottom": int(np.unique(cols[rows == n_rows - 1]).size) / max(width, 1)}


def anomaly_record(
    anomaly_id: int, unit: list[Measured], *, ctx: ImageContext, sets: dict[int, LineInfo],
    lines: dict[int, LineInfo], host_of: dict[int, int], labels_out: np.ndarray,
) -> Anomaly:
    """The :class:`Anomaly` of one unit (``severity`` 0: ranked by :func:`rank_by_severity`).

    Writes ``anomaly_id`` over the unit's measured extent into ``labels_out``.
    """
    host_of = _hosts(host_of, sets, lines)
    meta = ctx.meta
    cam, surf, air, an = meta.camera, meta.surface, meta.air, meta.analysis
    main = max(unit, key=lambda m: (m.shape.area_px, -m.cand.label))
    px = _unit_pixels(unit, main, ctx.temperature_c)
    labels_out[px.rows, px.cols] = anomaly_id
    vals = px.values_c
    area_px = int(vals.size)
    mean_c = float(vals.mean())
    reference_c = float(px.reference_c.mean())
    delta_k = mean_c - reference_c
    n_rows, n_cols = ctx.temperature_c.shape
    pane = _pane(main, px, ctx)
    geometric = None
    if pane is not None:
        cause, reason = "unclassified", (
            f"{GLAZING_REASON}; straight-edged {main.kind} rectangle whose rim (frame, glass edge) shows "
            f"{pane[0]:.1f} K against {pane[1]:.1f} K in its middle: a framed pane (a void is strongest in its "
            "middle); its heat is that of the window, not counted as a defect's, and its f_Rsi is not judged "
            "against the mould limit of opaque elements"
        )
    else:
        if ctx.meta.surface.view != "roof" and not any(m.cand.label in sets for m in unit):
            side_h = side_coefficients(view=surf.view, heat_flow=ctx.heat_flow, tilt_deg=cam.tilt_deg,
                                       h_radiative_w_m2k=ctx.h_radiative_w_m2k)
            geometric = geometric_profile(ctx.temperature_c, main.shape, pixel_m=ctx.pixel_m,
                                          loss_sign=1.0 if ctx.meta.surface.view == "interior" else -1.0,
                                          side_h_w_m2k=side_h, h_w_m2k=ctx.h_w_m2k)
        cause, reason = _cause(unit, main, ctx=ctx, delta_k=delta_k, mean_c=mean_c, sets=sets, lines=lines,
                               host_of=host_of, contact=_frame_contact(px.rows, px.cols, n_rows), geometric=geometric)
        if cause == "thermal_bridge" and geometric is not None and GEOMETRIC_REASON in reason:
            # its heat against the plane wall on both sides (the local sound surface follows its tail)
            px = replace(px, loss_sum_kpx=geometric.loss_sum_kpx)
            if side_note(geometric):
                reason += f"; {side_note(geometric)}"
        else:
            geometric = None
            if cause == "thermal_bridge" and not any(m.cand.label in sets for m in unit):
                px = _straight_band(px, main, ctx)
    if px.rows.min() == 0 or px.cols.min() == 0 or px.rows.max() == n_rows - 1 or px.cols.max() == n_cols - 1:
        reason += f"; {EDGE_NOTE}"
    px_area = ctx.pixel_area_m2
    area_m2 = None if px_area is None else area_px * px_area
    expected_kind = "cold" if surf.view == "interior" else "warm"
    excess_w = None
    if px_area is not None and main.kind == expected_kind and pane is None:
        excess_w = excess_heat_w(h_w_m2k=ctx.h_w_m2k, loss_sum_kpx=px.loss_sum_kpx, pixel_area_m2=px_area)
    kwh = annual_energy_kwh(excess_w, inside_c=air.inside_c, outside_c=air.outside_c, degree_days=an.degree_days)
    f_rsi = mould = None
    if surf.view == "interior":
        t_si = float(np.percentile(vals, FRSI_PERCENTILE))
        f_rsi = temperature_factor(t_si, inside_c=air.inside_c, outside_c=air.outside_c)
        # glazing is not judged against the mould limit of opaque elements (ISO 13788 is for those)
        mould = None if f_rsi is None or pane is not None else bool(f_rsi < an.frsi_limit)
    bands = BandInputs(
        area_px=area_px, perimeter_px=int(sum(m.shape.perimeter_px for m in unit)), loss_sum_kpx=px.loss_sum_kpx,
        thermal_area_px=int(sum(m.region_area_px for m in unit)) + px.n_rim, pixel_area_m2=px_area,
        h_convective_w_m2k=ctx.h_convective_w_m2k, h_radiative_w_m2k=ctx.h_radiative_w_m2k,
        emissivity=surf.emissivity, emissivity_uncertainty_abs=surf.emissivity_uncertainty_abs,
        distance_uncertainty_rel=an.distance_uncertainty_rel, h_uncertainty_rel=an.h_uncertainty_rel, netd_k=cam.netd_k,
        reference_sigma_k=max(m.cand.ref.sigma_k for m in unit),
    )
    a_lo, a_hi, w_lo, w_hi = confidence_bands(bands, seed=an.seed, anomaly_id=anomaly_id, area_m2=area_m2,
                                              excess_w=excess_w)
    members: dict[object, list] = {}
    for m in unit:
        if m.cand.label not in host_of:
            info = sets.get(m.cand.label) or lines.get(m.cand.label)
            members.setdefault(m.cand.label if info is None else info[2], []).append(m.shape)
    length, psi, psi_lo, psi_hi = linear_figures(
        list(members.values()) or [[main.shape]], cause=cause, pixel_m=ctx.pixel_m, tilt_deg=cam.tilt_deg, excess_w=excess_w,
        delta_air_k=ctx.delta_air_k, bands=bands, seed=an.seed, anomaly_id=anomaly_id,
        across_tilt=geometric is not None,
    )
    return Anomaly(
        anomaly=anomaly_id, kind=main.kind, cause=cause, reason=reason, area_px=area_px,
        area_m2=area_m2, area_low_m2=a_lo, area_high_m2=a_hi, mean_c=mean_c, min_c=float(vals.min()),
        max_c=float(vals.max()), reference_c=reference_c, delta_k=float(delta_k), excess_w=excess_w,
        excess_low_w=w_lo, excess_high_w=w_hi, excess_kwh_year=kwh, f_rsi=f_rsi, mould_risk=mould,
        centroid_row=float(px.rows.mean()), centroid_col=float(px.cols.mean()),
        bbox_row0=int(px.rows.min()), bbox_col0=int(px.cols.min()),
        bbox_row1=int(px.rows.max()) + 1, bbox_col1=int(px.cols.max()) + 1,
        severity=0,
        severity_score=severity_score(mould_risk=mould, excess_kwh_year=kwh, excess_w=excess_w, area_px=area_px),
        length_m=length, psi_w_mk=psi, psi_low_w_mk=psi_lo, psi_high_w_mk=psi_hi,
    )


def rank_by_severity(drafts: list[Anomaly]) -> tuple[Anomaly, ...]:
    """The anomalies in id order with ``severity`` 1..k by :func:`severity_key` (1 = repair first)."""
    rank = {a.anomaly: k for k, a in enumerate(sorted(drafts, key=severity_key), start=1)}
    return tuple(replace(a, severity=rank[a.anomaly]) for a in drafts)
