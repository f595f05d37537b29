"""``analyse``: significant contrast against the sound surface, joined with the segmentation -> anomalies.

The steps, each in its own module: the robust local sound surface and the anomalies found by
their contrast at their own scale (:mod:`._sound_surface`, :mod:`._significance`,
:mod:`._components`); the segmentation's candidates against their local ring, confirmed by that
contrast (:mod:`._reference`, :mod:`._candidates`); fragments of one anomaly
(:mod:`._fragments`); the thermal region and extent of each (:mod:`._thermal_region`); one anomaly
per defect, jump outlines where they agree (:mod:`._soft`); framing members (:mod:`._framing`);
then one :class:`Anomaly` per unit (:mod:`._records`, :mod:`._classify`).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import ndimage

from .._defaults import resolve_reflected_c
from .._shared import robust_sigma
from ..errors import ConfigError
from ..segmentation import estimate_noise_k
from ..types import Air, Surface, SurveyMeta, ThermalFrame
from ._candidates import forget_last_read, select_candidates, significance_threshold_k
from ._conditions import check_conditions
from ._emitters import with_emitters
from ._classify import GLAZING_REASON
from ._fragments import group_fragments
from ._glazing import mark_panes
from ._framing import find_lines, find_regular_sets
from ._geometry import MIN_SPOT_PX, pixel_area_m2, pixel_size_m
from ._records import ImageContext, anomaly_record, group_units, rank_by_severity
from ._reference import FieldWrites, SurfaceReference, find_sound_regions
from ._significance import MIN_CONTRAST_K, detect_regions
from ._soft import OWN_FRACTION, join_detections
from ._surface import CONVENTIONAL_WIND_M_S, h_convective_exterior, h_convective_interior, h_radiative, resolve_heat_flow
from ._thermal_region import measure_candidate
from ._types import Analysis

__all__ = ["analyse", "significance_threshold_k"]

_BLOCK_ROWS = 256


def analyse(frame: ThermalFrame, seg, meta: SurveyMeta) -> Analysis:
    """Measure and classify the anomalies of one corrected thermogram.

    Parameters
    ----------
    frame : ThermalFrame
        Corrected temperatures (°C) and validity mask; its path names the image in errors.
    seg : Segmentation
        Any object with ``u`` (M, N), ``edges`` (M, N bool), ``labels`` (M, N int,
        regions 1..n, 0 masked) and optionally ``params.noise_k`` / ``params.min_step_k``.
    meta : SurveyMeta
        The metadata in force for this image: every setting comes from here (camera
        geometry and NETD, surface view/emissivity/reflected temperature, air
        temperatures and wind, analysis and segmentation settings).

    Returns
    -------
    Analysis
        Anomalies ordered by id, anomaly label image, geometry, coefficient,
        reference field and warnings. An image without significant anomalies gives
        an empty tuple.

    Raises
    ------
    ConfigError
        Segmentation arrays whose shape differs from the frame; invalid view,
        heat-flow direction, emissivity or geometry in the metadata.

    References
    ----------
    ISO 6946 / ISO 13789 (surface coefficients), ISO 13788 (temperature factor),
    EN 13187 and ASTM C1060 (conditions and signatures), ASTM C1153 (roofs).
    """
    # heat emitters seen from inside: filled from the wall around them, then reported (._emitters)
    try:
        return with_emitters(frame, seg, meta, _analyse)
    finally:
        forget_last_read()  # the candidates' last kept crop is not held past the analysis


def _analyse(frame: ThermalFrame, seg, meta: SurveyMeta) -> Analysis:
    """:func:`analyse` without the emitter step."""
    cam, surf, air, an = meta.camera, meta.surface, meta.air, meta.analysis
    t = _float_field(frame.temperature_c)  # float32 stays float32: no float64 copy of the frame (issue 15)
    shape = t.shape
    labels = _int_labels(seg.labels)  # copied below only when it must change
    u = _float_field(getattr(seg, "u", t))
    edges = np.asarray(getattr(seg, "edges", np.zeros(shape, bool)), dtype=bool)
    mask = np.asarray(frame.mask, dtype=bool)
    for name, arr in (("labels", labels), ("u", u), ("edges", edges), ("mask", mask)):
        if arr.shape != shape:
            raise ConfigError(
                f"{frame.path}: segmentation {name} has shape {arr.shape}, the thermogram {shape}; "
                "segment the same frame that is analysed"
            )
    heat_flow = resolve_heat_flow(surf.view, surf.heat_flow)
    reflected_c, reflected_reason = resolve_reflected_c(meta)
    clear = mask | (labels < 0)
    if labels[clear].any():  # a segmentation's own labels are 0 there already
        labels = labels.copy()
        labels[clear] = 0
    del clear
    valid = labels > 0
    usable = valid & ~edges

    pixel_m = pixel_size_m(n_cols=shape[1], hfov_deg=cam.hfov_deg, distance_m=cam.distance_m, pixel_m=cam.pixel_m)
    px_area = pixel_area_m2(pixel_m=pixel_m, tilt_deg=cam.tilt_deg)
    warn = tuple(check_conditions(air=air, analysis=an, view=surf.view, reflected_given=reflected_reason is None,
                                  has_geometry=pixel_m is not None))

    params = getattr(seg, "params", None)
    noise = getattr(params, "noise_k", None)
    if noise is None or not math.isfinite(float(noise)) or float(noise) <= 0:
        noise = estimate_noise_k(t, mask=~valid)  # as the segmenter estimates it
    noise = float(noise)
    min_step = getattr(params, "min_step_k", None)
    min_step = float(meta.segment.min_step_k if min_step is None else min_step)
    thr = significance_threshold_k(noise_k=noise, netd_k=cam.netd_k, min_step_k=min_step, min_contrast_k=an.min_contrast_k)

    n = int(labels.max()) if labels.size else 0
    if n == 0 or not valid.any():
        return Analysis((), np.zeros(shape, np.int32), pixel_m, px_area, None, np.full(shape, np.nan, t.dtype), warn)

    # significant contrast against the local sound surface, at the scale of each defect
    floor_k = float(an.min_contrast_k) if an.min_contrast_k is not None else MIN_CONTRAST_K
    det_labels, surface_c, det = detect_regions(t, ~valid, noise_k=noise, pixel_m=pixel_m, min_contrast_k=floor_k,
                                                filled=getattr(seg, "filled", None))
    areas, cold, warm, core, sum_u = _region_sums(labels, (
        None, lambda rows: det.components[rows] < 0, lambda rows: det.components[rows] > 0,
        lambda rows: det_labels[rows] > 0, lambda rows: u[rows]), n)
    per = np.maximum(areas, 1.0)
    share = {-1: cold / per, 1: warm / per}
    in_core = core / per
    means_u = sum_u / per
    slices = ndimage.find_objects(labels)
    sound, trend = find_sound_regions(
        u=u, labels=labels, usable=usable, areas=areas, means_u=means_u, threshold_k=thr, min_area_px=MIN_SPOT_PX,
        slices=slices,
    )
    # a region is a candidate when most of it lies in a detected anomaly, or when it is off the image's
    # sound trend and most of it shows significant contrast against the local sound surface (a region
    # off the trend only because the sound surface is not a plane, lens shading, is sound)
    sound &= in_core < OWN_FRACTION
    sound |= (share[-1] + share[1] < OWN_FRACTION) & (in_core < OWN_FRACTION)
    sound[0] = False
    # the reference field: the sound surface on valid pixels, each anomaly's own reference over its thermal
    # region; the measuring steps only write it, so their writes are kept and the field is formed once
    # the detector's fields are done with (FieldWrites: not held beside them; memory, issue 15)
    reference = FieldWrites(shape, t.dtype)
    allowed = usable & np.take(sound, labels)  # pixels that may serve as a sound reference

    t_surface = trend.a if math.isfinite(trend.a) else float(np.median(t[valid]))
    h_c, h_r, sky_limit_c = _coefficients(
        surf, air, heat_flow=heat_flow, reflected_c=reflected_c, sky_known=reflected_reason is None,
        t_surface_c=t_surface,
    )
    h = h_c + h_r

    sound_px = valid & (det.components == 0)
    step = max(1, int(sound_px.sum()) // 40_000)
    at = np.flatnonzero(sound_px)[::step]  # a regular subsample of the sound pixels
    spread = robust_sigma(t.ravel()[at] - surface_c.ravel()[at]) if at.size else noise
    last_resort = SurfaceReference(surface_c, float(spread), int(sound_px.sum()))
    accepted = select_candidates(
        labels=labels, t=t, u=u, allowed=allowed, sound=sound, areas=areas, means_u=means_u, slices=slices,
        noise_k=noise, threshold_k=thr, trend=last_resort,
    )
    del usable, allowed, sound_px  # frame-sized masks not needed any more (memory, issue 15)
    # a segmented candidate is confirmed by significant contrast of its own sign over most of it
    accepted = [c for c in accepted if share[-1 if c.delta_k < 0 else 1][c.label] >= OWN_FRACTION]
    accepted, host_of = group_fragments(accepted, labels=labels, min_step_k=min_step)
    is_anomaly = np.zeros(n + 1, dtype=bool)
    is_anomaly[[c.label for c in accepted]] = True
    loss_sign = -1.0 if surf.view == "interior" else 1.0  # loss = sign·(T − reference)
    measured = [
        measure_candidate(c, labels=labels, t=t, u=u, edges=edges, is_anomaly=is_anomaly, noise_k=noise,
                          loss_sign=loss_sign, reference=reference)
        for c in accepted
    ]
    sets, lines = _framing(measured, pixel_m)
    measured, host_of = join_detections(
        measured, host_of=host_of, framing=set(sets) | set(lines), det_labels=det_labels, info=det,
        surface_c=surface_c, t=t, u=u, valid=valid, noise_k=noise, loss_sign=loss_sign, reference=reference,
        first_label=n + 1, min_contrast_k=floor_k, pixel_m=pixel_m,
    )
    reference = reference.apply(_surface_reference(surface_c, valid, t.dtype))
    # the detector's frame-sized fields, the region masks and the labels' copy are not read any more
    # (memory, issue 15: the records and the glazing step below run without them)
    del det_labels, surface_c, det, valid, labels, edges, u, is_anomaly, last_resort
    if not measured:
        return Analysis((), np.zeros(shape, np.int32), pixel_m, px_area, h, reference, warn)
    sets, lines = _framing(measured, pixel_m)
    delta_air_k = None
    if air.inside_c is not None and air.outside_c is not None and air.inside_c - air.outside_c > 0:
        delta_air_k = float(air.inside_c - air.outside_c)
    ctx = ImageContext(
        temperature_c=t, meta=meta, threshold_k=thr, pixel_m=pixel_m, pixel_area_m2=px_area,
        h_convective_w_m2k=h_c, h_radiative_w_m2k=h_r, sky_limit_c=sky_limit_c, delta_air_k=delta_air_k,
        heat_flow=heat_flow,
    )
    out_labels = np.zeros(shape, np.int32)
    drafts = [
        anomaly_record(i, unit, ctx=ctx, sets=sets, lines=lines, host_of=host_of, labels_out=out_labels)
        for i, unit in enumerate(group_units(measured, host_of=host_of, sets=sets, lines=lines), start=1)
    ]
    drafts = mark_panes(drafts, out_labels, t, reference, pixel_m=pixel_m, view=surf.view, reason=GLAZING_REASON,
                        ctx=ctx)
    return Analysis(rank_by_severity(drafts), out_labels, pixel_m, px_area, h, reference, warn)


def _region_sums(labels: np.ndarray, weights: tuple, n: int) -> list[np.ndarray]:
    """Per-label sums of each ``weights[i](rows)`` (pixel counts when None), float64, ``n + 1`` entries each.

    ``np.bincount`` over a band of rows at a time: no frame-sized int64 labels or float64
    weights (each 8 B/px; memory, issue 15); the band's labels are widened once for all the sums.
    """
    out = [np.zeros(n + 1) for _ in weights]
    for r0 in range(0, labels.shape[0], _BLOCK_ROWS):
        rows = slice(r0, r0 + _BLOCK_ROWS)
        lab = labels[rows].ravel().astype(np.intp)
        for acc, weight in zip(out, weights):
            w = None if weight is None else np.ravel(weight(rows))
            if w is not None and w.dtype == bool:  # a count where the mask holds (the same whole numbers)
                acc += np.bincount(lab[w], minlength=n + 1)
            else:
                acc += np.bincount(lab, weights=w, minlength=n + 1)
    return out


def _surface_reference(surface_c: np.ndarray, valid: np.ndarray, dtype: np.dtype) -> np.ndarray:
    """The sound surface as the reference field (``dtype``), NaN on invalid pixels."""
    reference = np.empty(surface_c.shape, dtype)
    reference[...] = surface_c
    reference[~valid] = np.nan
    return reference


def _int_labels(values) -> np.ndarray:
    """Region labels as given when they are signed integers of at most 32 bits (the segmentation's
    int16 is not widened: memory, issue 15), else as int32."""
    arr = np.asarray(values)
    return arr if arr.dtype in (np.int16, np.int32) else arr.astype(np.int32)


def _float_field(values) -> np.ndarray:
    """A frame-sized field as float32 or float64 as given (no copy), other types as float64."""
    arr = np.asarray(values)
    return arr if arr.dtype in (np.float32, np.float64) else arr.astype(np.float64)


def _framing(measured: list, pixel_m: float | None) -> tuple[dict, dict]:
    """Regular parallel sets and straight bands of pieces among the measured anomalies."""
    shapes = {m.cand.label: m.shape for m in measured}
    kinds = {m.cand.label: m.kind for m in measured}
    sets = find_regular_sets(shapes, kinds, pixel_m=pixel_m, deltas={m.cand.label: m.cand.delta_k for m in measured})
    lines = find_lines(
        shapes, kinds, {m.cand.label: m.cand.delta_k for m in measured}, pixel_m=pixel_m, exclude=set(sets),
        bboxes={m.cand.label: m.bbox for m in measured},
    )
    return sets, lines


def _coefficients(
    surf: Surface, air: Air, *, heat_flow: str, reflected_c: float, sky_known: bool, t_surface_c: float
) -> tuple[float, float, float | None]:
    """``(h_c, h_r, sky_limit_c)`` linearised about the sound surface and its radiant surroundings.

    ``reflected_c`` is the reflected temperature in force (:func:`irseg._defaults.resolve_reflected_c`).
    ``sky_limit_c`` (roofs with known outside air and a given sky temperature,
    ``sky_known``) is the temperature of a surface with no conduction from below:
    ``(h_c·T_e + h_r·T_sky)/(h_c + h_r)``.
    """
    h_r = h_radiative(0.5 * (t_surface_c + reflected_c), surf.emissivity)
    if surf.view == "interior":
        h_c = h_convective_interior(heat_flow)
    else:
        h_c = h_convective_exterior(air.wind_m_s if air.wind_m_s is not None else CONVENTIONAL_WIND_M_S)
    sky_limit_c = None
    if surf.view == "roof" and air.outside_c is not None and sky_known:
        sky_limit_c = (h_c * air.outside_c + h_r * reflected_c) / (h_c + h_r)
    return h_c, h_r, sky_limit_c
