"""``analyse``: regions of a segmentation -> measured, classified anomalies."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy import ndimage

from ..errors import ConfigError
from ..types import ThermalFrame
from ._classify import Shape, classify_cause, find_regular_sets, shape_features
from ._conditions import check_conditions
from ._confidence import BandInputs, confidence_bands
from ._measure import annual_energy_kwh, excess_heat_w, temperature_factor
from ._geometry import MIN_SPOT_PX, pixel_area_m2, pixel_footprint_m
from ._reference import RingReference, estimate_noise_k, find_sound_regions, ring_reference
from ._surface import CONVENTIONAL_WIND_M_S, h_convective_exterior, h_convective_interior, h_radiative, resolve_heat_flow
from ._types import Analysis, Anomaly, severity_key, severity_score

__all__ = ["analyse", "significance_threshold_k"]

GAP_PX = 2.0  # ring starts beyond the jump band
RIM_PX = 3.0  # soft rim added to the thermal footprint
RING_SIGMA_FACTOR = 2.0  # contrast must also exceed this many ring spreads
FRSI_PERCENTILE = 5.0


@dataclass
class _Candidate:
    label: int
    r0: int
    c0: int
    crop: tuple[slice, slice]
    region: np.ndarray
    dist: np.ndarray
    ref: RingReference
    mean_c: float
    reference_c: float
    delta_k: float


def significance_threshold_k(*, noise_k: float, netd_k: float, min_step_k: float, min_contrast_k: float | None) -> float:
    """Smallest |contrast| kept: ``min_contrast_k`` if set, else ``max(3·noise, ½·min_step_k)``."""
    if min_contrast_k is not None:
        return float(min_contrast_k)
    return max(3.0 * max(noise_k, netd_k), 0.5 * min_step_k)


def _ring_width(area_px: int) -> float:
    return float(np.clip(round(0.5 * math.sqrt(area_px)), 3, 15))


def analyse(frame: ThermalFrame, seg) -> Analysis:
    """Measure and classify the anomalies of one corrected thermogram.

    Parameters
    ----------
    frame : ThermalFrame
        Corrected temperatures (°C), mask and metadata; every setting comes from
        ``frame.meta`` (camera geometry and NETD, surface view/emissivity, air
        temperatures and wind, analysis settings).
    seg : Segmentation
        Any object with ``u`` (M, N), ``edges`` (M, N bool), ``labels`` (M, N int,
        regions 1..n, 0 masked) and optionally ``params.noise_k`` / ``params.min_step_k``.

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
    meta = frame.meta
    cam, surf, air, an = meta.camera, meta.surface, meta.air, meta.analysis
    t = np.asarray(frame.temperature_c, dtype=float)
    shape = t.shape
    labels = np.array(seg.labels, dtype=np.int32, copy=True)
    u = np.asarray(getattr(seg, "u", t), dtype=float)
    edges = np.asarray(getattr(seg, "edges", np.zeros(shape, bool)), dtype=bool)
    mask = np.asarray(frame.mask, dtype=bool)
    for name, arr in (("labels", labels), ("u", u), ("edges", edges), ("mask", mask)):
        if arr.shape != shape:
            raise ConfigError(
                f"{frame.path}: segmentation {name} has shape {arr.shape}, the thermogram {shape}; "
                "segment the same frame that is analysed"
            )
    view = surf.view
    heat_flow = resolve_heat_flow(view, surf.heat_flow)
    labels[mask] = 0
    valid = labels > 0
    usable = valid & ~edges

    footprint = pixel_footprint_m(n_columns=shape[1], hfov_deg=cam.hfov_deg, distance_m=cam.distance_m, pixel_m=cam.pixel_m)
    px_area = pixel_area_m2(footprint_m=footprint, tilt_deg=cam.tilt_deg)
    warn = list(check_conditions(meta, has_geometry=footprint is not None))

    params = getattr(seg, "params", None)
    noise = getattr(params, "noise_k", None)
    if noise is None or not math.isfinite(float(noise)) or float(noise) <= 0:
        noise = estimate_noise_k(t, valid=valid, edges=edges)
    noise = float(noise)
    min_step = getattr(params, "min_step_k", None)
    min_step = float(meta.segment.min_step_k if min_step is None else min_step)
    thr = significance_threshold_k(noise_k=noise, netd_k=cam.netd_k, min_step_k=min_step, min_contrast_k=an.min_contrast_k)

    n = int(labels.max()) if labels.size else 0
    reference = np.full(shape, np.nan)
    if n == 0 or not valid.any():
        return Analysis((), np.zeros(shape, np.int32), footprint, px_area, None, reference, tuple(warn))

    flat = labels.ravel()
    areas = np.bincount(flat, minlength=n + 1).astype(float)
    safe = np.maximum(areas, 1.0)
    means_u = np.bincount(flat, weights=u.ravel(), minlength=n + 1) / safe
    sound, trend = find_sound_regions(
        u=u, labels=labels, usable=usable, areas=areas, means_u=means_u, threshold_k=thr, min_area_px=MIN_SPOT_PX
    )
    rows = np.arange(shape[0], dtype=float)[:, None]
    cols = np.arange(shape[1], dtype=float)[None, :]
    reference[:] = trend.evaluate(rows, cols)
    reference[~valid] = np.nan

    # surface coefficient, linearised about the sound surface and its radiant surroundings
    allowed = usable & sound[labels]  # pixels that may serve as a sound reference
    t_surface = trend.a if math.isfinite(trend.a) else float(np.median(t[valid]))
    side_air = air.inside_c if view == "interior" else air.outside_c
    t_surr = surf.reflected_c if surf.reflected_c is not None else (side_air if side_air is not None else t_surface)
    h_r = h_radiative(0.5 * (t_surface + t_surr), surf.emissivity)
    if view == "interior":
        h_c = h_convective_interior(heat_flow)
    else:
        h_c = h_convective_exterior(air.wind_m_s if air.wind_m_s is not None else CONVENTIONAL_WIND_M_S)
    h = h_c + h_r
    sky_limit_c = None
    if view == "roof" and air.outside_c is not None and surf.reflected_c is not None:
        sky_limit_c = (h_c * air.outside_c + h_r * surf.reflected_c) / h

    # ---- first pass: local reference and significance of every candidate region
    slices = ndimage.find_objects(labels)
    accepted: list[_Candidate] = []
    for lab in range(1, n + 1):
        sl = slices[lab - 1]
        if sl is None or sound[lab] or areas[lab] < MIN_SPOT_PX:
            continue
        width = _ring_width(int(areas[lab]))
        for factor in (1.0, 4.0):  # a wider crop only when the first ring is too thin
            pad = int(math.ceil(GAP_PX + factor * width)) + 1
            r0, r1 = max(0, sl[0].start - pad), min(shape[0], sl[0].stop + pad)
            c0, c1 = max(0, sl[1].start - pad), min(shape[1], sl[1].stop + pad)
            crop = (slice(r0, r1), slice(c0, c1))
            region = labels[crop] == lab
            dist = ndimage.distance_transform_edt(~region)
            ref = ring_reference(
                u_crop=u[crop], t_crop=t[crop], dist_crop=dist, allowed_crop=allowed[crop],
                row_offset=r0, col_offset=c0, gap_px=GAP_PX, width_px=width, trend=trend,
                widen=factor > 1.0,
            )
            if ref.source == "ring" or factor > 1.0:
                break
        rr, cc = np.nonzero(region)
        ref_vals = ref.plane.evaluate(rr + float(r0), cc + float(c0))
        mean_c = float(t[crop][region].mean())
        reference_c = float(ref_vals.mean())
        delta = mean_c - reference_c
        if abs(delta) < max(thr, RING_SIGMA_FACTOR * ref.sigma_k):
            continue
        accepted.append(_Candidate(lab, r0, c0, crop, region, dist, ref, mean_c, reference_c, delta))

    if not accepted:
        return Analysis((), np.zeros(shape, np.int32), footprint, px_area, h, reference, tuple(warn))

    # ---- second pass: thermal footprint, shape, stats
    is_anomaly = np.zeros(n + 1, dtype=bool)
    is_anomaly[[c.label for c in accepted]] = True
    loss_sign = -1.0 if view == "interior" else 1.0  # loss = sign·(T − reference)
    expected_kind = "cold" if view == "interior" else "warm"
    shapes: dict[int, Shape] = {}
    kinds: dict[int, str] = {}
    sums: dict[int, tuple[float, int]] = {}
    bboxes: dict[int, tuple[int, int, int, int]] = {}
    for c in accepted:
        lab_c = labels[c.crop]
        t_c = t[c.crop]
        kind = "cold" if c.delta_k < 0 else "warm"
        rim = (c.dist > 0) & (c.dist <= RIM_PX) & (lab_c > 0) & ~is_anomaly[lab_c]
        rr, cc = np.nonzero(rim)
        rim_contrast = t_c[rr, cc] - c.ref.plane.evaluate(rr + float(c.r0), cc + float(c.c0))
        keep = np.sign(c.delta_k) * rim_contrast > noise
        rr_in, cc_in = np.nonzero(c.region)
        in_contrast = t_c[rr_in, cc_in] - c.ref.plane.evaluate(rr_in + float(c.r0), cc_in + float(c.c0))
        loss_sum = loss_sign * (float(in_contrast.sum()) + float(rim_contrast[keep].sum()))
        sums[c.label] = (loss_sum, int(rr_in.size + keep.sum()))
        reference[c.crop][c.region] = c.ref.plane.evaluate(rr_in + float(c.r0), cc_in + float(c.c0))
        reference[c.r0 + rr[keep], c.c0 + cc[keep]] = c.ref.plane.evaluate(rr[keep] + float(c.r0), cc[keep] + float(c.c0))
        # shape features on a tight crop: bounding box + 3 px
        rb, cb = np.nonzero(c.region.any(1))[0], np.nonzero(c.region.any(0))[0]
        tr0, tc0 = max(0, rb[0] - 3), max(0, cb[0] - 3)
        tight = (slice(tr0, rb[-1] + 4), slice(tc0, cb[-1] + 4))
        shapes[c.label] = shape_features(
            c.region[tight], u_crop=u[c.crop][tight], dist_crop=c.dist[tight], delta_k=c.delta_k, noise_k=noise,
            row_offset=c.r0 + tr0, col_offset=c.c0 + tc0,
        )
        bboxes[c.label] = (int(c.r0 + rb[0]), int(c.c0 + cb[0]), int(c.r0 + rb[-1] + 1), int(c.c0 + cb[-1] + 1))
        kinds[c.label] = kind
    sets = find_regular_sets(shapes, kinds, pixel_m=footprint)

    dt_air = None
    if air.inside_c is not None and air.outside_c is not None and air.inside_c - air.outside_c > 0:
        dt_air = float(air.inside_c - air.outside_c)

    rows_out = []
    for c in accepted:
        s = shapes[c.label]
        kind = kinds[c.label]
        vals = t[c.crop][c.region]
        cause, reason = classify_cause(
            s, kind=kind, view=view, delta_k=c.delta_k, mean_c=c.mean_c, threshold_k=thr, pixel_m=footprint,
            regular_set=sets.get(c.label), delta_air_k=dt_air, sky_limit_c=sky_limit_c,
        )
        loss_sum, n_fp = sums[c.label]
        area_m2 = None if px_area is None else s.area_px * px_area
        excess_w = None
        if px_area is not None and kind == expected_kind:
            excess_w = excess_heat_w(h_w_m2k=h, loss_sum_kpx=loss_sum, pixel_area_m2=px_area)
        kwh = annual_energy_kwh(excess_w, inside_c=air.inside_c, outside_c=air.outside_c, degree_days=an.degree_days)
        f_rsi = mould = None
        if view == "interior":
            t_si = float(np.percentile(vals, FRSI_PERCENTILE))
            f_rsi = temperature_factor(t_si, inside_c=air.inside_c, outside_c=air.outside_c)
            mould = None if f_rsi is None else bool(f_rsi < an.frsi_limit)
        rows_out.append(dict(
            label=c.label, crop=c.crop, region=c.region, kind=kind, cause=cause, reason=reason, area_px=s.area_px, area_m2=area_m2,
            mean_c=c.mean_c, min_c=float(vals.min()), max_c=float(vals.max()), reference_c=c.reference_c,
            delta_k=c.delta_k, excess_w=excess_w, excess_kwh_year=kwh, f_rsi=f_rsi, mould_risk=mould,
            centroid_row=s.centroid_row, centroid_col=s.centroid_col,
            bbox=bboxes[c.label],
            bands=BandInputs(
                area_px=s.area_px, perimeter_px=s.perimeter_px, loss_sum_kpx=loss_sum, n_footprint=n_fp,
                pixel_area_m2=px_area, h_convective=h_c, h_radiative=h_r, emissivity=surf.emissivity,
                emissivity_uncertainty=surf.emissivity_uncertainty, distance_uncertainty=an.distance_uncertainty,
                h_uncertainty=an.h_uncertainty, netd_k=cam.netd_k, reference_sigma_k=c.ref.sigma_k,
            ),
        ))
    rows_out.sort(key=lambda d: (d["bbox"][0], d["bbox"][1], d["label"]))

    out_labels = np.zeros(shape, np.int32)
    drafts = []
    for i, d in enumerate(rows_out, start=1):
        out_labels[d["crop"]][d["region"]] = i
        a_lo, a_hi, w_lo, w_hi = confidence_bands(
            d["bands"], seed=an.seed, anomaly_id=i, area_m2=d["area_m2"], excess_w=d["excess_w"]
        )
        score = severity_score(
            mould_risk=d["mould_risk"], excess_kwh_year=d["excess_kwh_year"], excess_w=d["excess_w"], area_px=d["area_px"]
        )
        drafts.append(Anomaly(
            anomaly=i, kind=d["kind"], cause=d["cause"], reason=d["reason"], area_px=d["area_px"],
            area_m2=d["area_m2"], area_low_m2=a_lo, area_high_m2=a_hi, mean_c=d["mean_c"], min_c=d["min_c"],
            max_c=d["max_c"], reference_c=d["reference_c"], delta_k=d["delta_k"], excess_w=d["excess_w"],
            excess_low_w=w_lo, excess_high_w=w_hi, excess_kwh_year=d["excess_kwh_year"], f_rsi=d["f_rsi"],
            mould_risk=d["mould_risk"], centroid_row=d["centroid_row"], centroid_col=d["centroid_col"],
            bbox_row0=d["bbox"][0], bbox_col0=d["bbox"][1], bbox_row1=d["bbox"][2], bbox_col1=d["bbox"][3],
            severity=0, severity_score=score,
        ))
    ranked = sorted(drafts, key=severity_key)
    rank = {a.anomaly: k for k, a in enumerate(ranked, start=1)}
    anomalies = tuple(replace(a, severity=rank[a.anomaly]) for a in drafts)
    return Analysis(anomalies, out_labels, footprint, px_area, h, reference, tuple(warn))
