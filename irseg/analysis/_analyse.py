"""``analyse``: regions of a segmentation -> measured, classified anomalies."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy import ndimage

from ..errors import ConfigError
from ..segmentation import estimate_noise_k
from ..types import ThermalFrame
from ._classify import Shape, classify_cause, find_lines, find_regular_sets, shape_features
from ._conditions import check_conditions
from ._extent import inside_edge_line
from ._confidence import BandInputs, confidence_bands
from ._measure import annual_energy_kwh, excess_heat_w, temperature_factor
from ._geometry import MIN_SPOT_PX, pixel_area_m2, pixel_footprint_m
from ._reference import Plane, RingReference, find_sound_regions, rim_extent_px, ring_reference
from ._surface import CONVENTIONAL_WIND_M_S, h_convective_exterior, h_convective_interior, h_radiative, resolve_heat_flow
from ._types import Analysis, Anomaly, severity_key, severity_score

__all__ = ["analyse", "significance_threshold_k"]

GAP_PX = 2.0  # the ring starts at least beyond the jump band
RIM_PX = 3.0  # the thermal footprint takes at least this much of the soft rim
RIM_FRACTION = 0.3  # the soft rim is searched out to 0.3·√area ...
MAX_RIM_PX = 30.0  # ... but not beyond 30 px
RING_SIGMA_FACTOR = 2.0  # contrast must also exceed this many ring spreads
FRSI_PERCENTILE = 5.0
SLIVER_FRACTION = 0.05  # a piece of a larger anomaly's rim is at most this fraction of its area
_CROSS = ndimage.generate_binary_structure(2, 1)
HALF_CONTRAST = 0.5  # the measured extent ends where the contrast falls to half its core value


@dataclass
class _Candidate:
    """A region whose contrast against its local ring is significant."""

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
    gap_px: float
    rr: np.ndarray  # region pixels in the crop
    cc: np.ndarray
    ref_in: np.ndarray  # the reference plane on them, °C


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
    labels[mask | (labels < 0)] = 0
    valid = labels > 0
    usable = valid & ~edges

    footprint = pixel_footprint_m(n_columns=shape[1], hfov_deg=cam.hfov_deg, distance_m=cam.distance_m, pixel_m=cam.pixel_m)
    px_area = pixel_area_m2(footprint_m=footprint, tilt_deg=cam.tilt_deg)
    warn = tuple(check_conditions(meta, has_geometry=footprint is not None))

    params = getattr(seg, "params", None)
    noise = getattr(params, "noise_k", None)
    if noise is None or not math.isfinite(float(noise)) or float(noise) <= 0:
        noise = estimate_noise_k(t, mask=~valid)  # as the segmenter estimates it
    noise = float(noise)
    min_step = getattr(params, "min_step_k", None)
    min_step = float(meta.segment.min_step_k if min_step is None else min_step)
    thr = significance_threshold_k(noise_k=noise, netd_k=cam.netd_k, min_step_k=min_step, min_contrast_k=an.min_contrast_k)

    n = int(labels.max()) if labels.size else 0
    reference = np.full(shape, np.nan)
    if n == 0 or not valid.any():
        return Analysis((), np.zeros(shape, np.int32), footprint, px_area, None, reference, warn)

    flat = labels.ravel()
    areas = np.bincount(flat, minlength=n + 1).astype(float)
    means_u = np.bincount(flat, weights=u.ravel(), minlength=n + 1) / np.maximum(areas, 1.0)
    slices = ndimage.find_objects(labels)
    sound, trend = find_sound_regions(
        u=u, labels=labels, usable=usable, areas=areas, means_u=means_u, threshold_k=thr, min_area_px=MIN_SPOT_PX,
        slices=slices,
    )
    reference[:] = trend.evaluate(np.arange(shape[0], dtype=float)[:, None], np.arange(shape[1], dtype=float)[None, :])
    reference[~valid] = np.nan
    allowed = usable & sound[labels]  # pixels that may serve as a sound reference

    t_surface = trend.a if math.isfinite(trend.a) else float(np.median(t[valid]))
    h_c, h_r, sky_limit_c = _coefficients(meta, heat_flow=heat_flow, t_surface_c=t_surface)
    h = h_c + h_r

    accepted = [
        c for lab in range(1, n + 1)
        if slices[lab - 1] is not None and not sound[lab] and areas[lab] >= MIN_SPOT_PX
        for c in [_local_contrast(lab, slices[lab - 1], labels=labels, t=t, u=u, allowed=allowed, area_px=int(areas[lab]),
                                  mean_u=float(means_u[lab]), noise_k=noise, threshold_k=thr, trend=trend)]
        if c is not None
    ]
    if not accepted:
        return Analysis((), np.zeros(shape, np.int32), footprint, px_area, h, reference, warn)

    accepted, host_of = _group_fragments(accepted, labels=labels, min_step_k=min_step)
    is_anomaly = np.zeros(n + 1, dtype=bool)
    is_anomaly[[c.label for c in accepted]] = True
    loss_sign = -1.0 if view == "interior" else 1.0  # loss = sign·(T − reference)
    measured = [
        _measure_candidate(c, labels=labels, t=t, u=u, edges=edges, is_anomaly=is_anomaly, noise_k=noise,
                           loss_sign=loss_sign, reference=reference)
        for c in accepted
    ]
    shapes = {m.cand.label: m.shape for m in measured}
    kinds = {m.cand.label: m.kind for m in measured}
    sets = find_regular_sets(shapes, kinds, pixel_m=footprint)
    lines_found = find_lines(
        shapes, kinds, {m.cand.label: m.cand.delta_k for m in measured}, pixel_m=footprint, exclude=set(sets),
        bboxes={m.cand.label: m.bbox for m in measured},
    )
    dt_air = None
    if air.inside_c is not None and air.outside_c is not None and air.inside_c - air.outside_c > 0:
        dt_air = float(air.inside_c - air.outside_c)
    expected_kind = "cold" if view == "interior" else "warm"

    # pieces of one framing member (a stud interrupted by other anomalies) form one anomaly
    # fragments of similar temperature inside or along a larger anomaly are part of it
    lines: dict[tuple[int, int], list[_Measured]] = {}
    units: list[list[_Measured]] = []
    by_label: dict[int, list[_Measured]] = {}
    for m in measured:
        if m.cand.label in host_of:
            continue
        info = sets.get(m.cand.label) or lines_found.get(m.cand.label)
        if info is None:
            units.append([m])
            by_label[m.cand.label] = units[-1]
        else:
            lines.setdefault(info[2], []).append(m)
            by_label[m.cand.label] = lines[info[2]]
    for m in measured:
        if m.cand.label in host_of:
            by_label[host_of[m.cand.label]].append(m)
    units.extend(lines.values())
    units.sort(key=lambda u: (min(m.bbox[0] for m in u), min(m.bbox[1] for m in u), min(m.cand.label for m in u)))

    out_labels = np.zeros(shape, np.int32)
    drafts = []
    for i, unit in enumerate(units, start=1):
        main = max(unit, key=lambda m: (m.shape.area_px, -m.cand.label))
        kind, s = main.kind, main.shape
        prow = np.concatenate([m.cand.rr[m.inside] + m.cand.r0 for m in unit])
        pcol = np.concatenate([m.cand.cc[m.inside] + m.cand.c0 for m in unit])
        out_labels[prow, pcol] = i
        vals = t[prow, pcol]
        refs = np.concatenate([m.cand.ref_in[m.inside] for m in unit])
        area_px = int(vals.size)
        mean_c = float(vals.mean())
        reference_c = float(refs.mean())
        delta_k = mean_c - reference_c
        # a soft-rim pixel shared by pieces of one anomaly counts once (the largest piece's value)
        ordered = [main] + [m for m in unit if m is not main]
        rim_idx = np.concatenate([m.rim_index for m in ordered])
        rim_loss = np.concatenate([m.rim_loss_kpx for m in ordered])
        _, first = np.unique(rim_idx, return_index=True)
        loss_sum = float(sum(m.loss_sum_kpx for m in unit)) + float(rim_loss[first].sum())
        n_rim = int(first.size)
        centroid_row = float(prow.mean())
        centroid_col = float(pcol.mean())
        bbox = (int(prow.min()), int(pcol.min()), int(prow.max()) + 1, int(pcol.max()) + 1)
        cause, reason = classify_cause(
            s, kind=kind, view=view, delta_k=delta_k, mean_c=mean_c, threshold_k=thr, pixel_m=footprint,
            regular_set=sets.get(main.cand.label), delta_air_k=dt_air, sky_limit_c=sky_limit_c,
            line=lines_found.get(main.cand.label),
        )
        n_frag = sum(1 for m in unit if m.cand.label in host_of)
        if len(unit) - n_frag > 1:
            reason += f" ({len(unit) - n_frag} pieces of one member, interrupted by other anomalies or the segmentation)"
        if n_frag:
            reason += f" (with {n_frag} touching fragment(s) of similar temperature)"
        if any(m.cand.ref.source == "trend" for m in unit):
            reason += "; reference: the image's sound trend (no sound surface around it)"
        area_m2 = None if px_area is None else area_px * px_area
        excess_w = None
        if px_area is not None and kind == expected_kind:
            excess_w = excess_heat_w(h_w_m2k=h, loss_sum_kpx=loss_sum, pixel_area_m2=px_area)
        kwh = annual_energy_kwh(excess_w, inside_c=air.inside_c, outside_c=air.outside_c, degree_days=an.degree_days)
        f_rsi = mould = None
        if view == "interior":
            t_si = float(np.percentile(vals, FRSI_PERCENTILE))
            f_rsi = temperature_factor(t_si, inside_c=air.inside_c, outside_c=air.outside_c)
            mould = None if f_rsi is None else bool(f_rsi < an.frsi_limit)
        bands = BandInputs(
            area_px=area_px, perimeter_px=int(sum(m.shape.perimeter_px for m in unit)), loss_sum_kpx=loss_sum,
            n_footprint=int(sum(m.n_footprint for m in unit)) + n_rim, pixel_area_m2=px_area, h_convective=h_c,
            h_radiative=h_r, emissivity=surf.emissivity, emissivity_uncertainty=surf.emissivity_uncertainty,
            distance_uncertainty=an.distance_uncertainty, h_uncertainty=an.h_uncertainty, netd_k=cam.netd_k,
            reference_sigma_k=max(m.cand.ref.sigma_k for m in unit),
        )
        a_lo, a_hi, w_lo, w_hi = confidence_bands(bands, seed=an.seed, anomaly_id=i, area_m2=area_m2, excess_w=excess_w)
        drafts.append(Anomaly(
            anomaly=i, kind=kind, cause=cause, reason=reason, area_px=area_px,
            area_m2=area_m2, area_low_m2=a_lo, area_high_m2=a_hi, mean_c=mean_c, min_c=float(vals.min()),
            max_c=float(vals.max()), reference_c=reference_c, delta_k=float(delta_k), excess_w=excess_w,
            excess_low_w=w_lo, excess_high_w=w_hi, excess_kwh_year=kwh, f_rsi=f_rsi, mould_risk=mould,
            centroid_row=centroid_row, centroid_col=centroid_col,
            bbox_row0=bbox[0], bbox_col0=bbox[1], bbox_row1=bbox[2], bbox_col1=bbox[3],
            severity=0,
            severity_score=severity_score(mould_risk=mould, excess_kwh_year=kwh, excess_w=excess_w, area_px=area_px),
        ))
    rank = {a.anomaly: k for k, a in enumerate(sorted(drafts, key=severity_key), start=1)}
    anomalies = tuple(replace(a, severity=rank[a.anomaly]) for a in drafts)
    return Analysis(anomalies, out_labels, footprint, px_area, h, reference, warn)


def _coefficients(meta, *, heat_flow: str, t_surface_c: float) -> tuple[float, float, float | None]:
    """``(h_c, h_r, sky_limit_c)`` linearised about the sound surface and its radiant surroundings.

    ``sky_limit_c`` (roofs with known outside air and sky temperature) is the
    temperature of a surface with no conduction from below:
    ``(h_c·T_e + h_r·T_sky)/(h_c + h_r)``.
    """
    surf, air = meta.surface, meta.air
    side_air = air.inside_c if surf.view == "interior" else air.outside_c
    t_surr = surf.reflected_c if surf.reflected_c is not None else (side_air if side_air is not None else t_surface_c)
    h_r = h_radiative(0.5 * (t_surface_c + t_surr), surf.emissivity)
    if surf.view == "interior":
        h_c = h_convective_interior(heat_flow)
    else:
        h_c = h_convective_exterior(air.wind_m_s if air.wind_m_s is not None else CONVENTIONAL_WIND_M_S)
    sky_limit_c = None
    if surf.view == "roof" and air.outside_c is not None and surf.reflected_c is not None:
        sky_limit_c = (h_c * air.outside_c + h_r * surf.reflected_c) / (h_c + h_r)
    return h_c, h_r, sky_limit_c


def _local_contrast(
    lab: int, sl: tuple[slice, slice], *, labels: np.ndarray, t: np.ndarray, u: np.ndarray, allowed: np.ndarray,
    area_px: int, mean_u: float, noise_k: float, threshold_k: float, trend: Plane,
) -> _Candidate | None:
    """Local ring reference of one candidate region; None when its contrast is not significant."""
    shape = labels.shape
    width = _ring_width(area_px)
    max_gap = float(np.clip(RIM_FRACTION * math.sqrt(area_px), GAP_PX, MAX_RIM_PX))
    gap = GAP_PX
    for factor in (1.0, 4.0):  # a wider crop only when the first ring is too thin
        pad = int(math.ceil(max_gap + factor * width)) + 1
        r0, r1 = max(0, sl[0].start - pad), min(shape[0], sl[0].stop + pad)
        c0, c1 = max(0, sl[1].start - pad), min(shape[1], sl[1].stop + pad)
        crop = (slice(r0, r1), slice(c0, c1))
        region = labels[crop] == lab
        dist = ndimage.distance_transform_edt(~region)
        extent = (sl[0].start - r0, sl[1].start - c0, sl[0].stop - 1 - r0, sl[1].stop - 1 - c0)
        if factor == 1.0:
            gap = rim_extent_px(
                u_crop=u[crop], dist_crop=dist, allowed_crop=allowed[crop], region_mean_u=mean_u,
                noise_k=noise_k, min_px=GAP_PX, max_px=max_gap, width_px=width,
            )
        ref = ring_reference(
            u_crop=u[crop], t_crop=t[crop], dist_crop=dist, allowed_crop=allowed[crop],
            row_offset=r0, col_offset=c0, gap_px=gap, width_px=width, trend=trend, extent=extent,
            widen=factor > 1.0,
        )
        if ref.source == "ring":
            break
    rr, cc = np.nonzero(region)
    ref_vals = ref.plane.evaluate(rr + float(r0), cc + float(c0))
    t_reg = t[crop][region]
    mean_c = float(t_reg.mean())
    reference_c = float(ref_vals.mean())
    delta = mean_c - reference_c
    needed = max(threshold_k, RING_SIGMA_FACTOR * ref.sigma_k)
    # the median contrast must agree: a sound region pulled by a neighbour's rim is not an anomaly
    if abs(delta) < needed or abs(float(np.median(t_reg - ref_vals))) < needed:
        return None
    return _Candidate(lab, r0, c0, crop, region, dist, ref, mean_c, reference_c, delta, gap, rr, cc, ref_vals)


def _group_fragments(
    accepted: list[_Candidate], *, labels: np.ndarray, min_step_k: float
) -> tuple[list[_Candidate], dict[int, int]]:
    """Fragments of a larger anomaly: ``(kept candidates, {fragment label: host label})``.

    A candidate touching a larger anomaly of the same sign (4-adjacent) is

    - *absorbed* into it (one defect, measured together) when their mean
      temperatures differ by less than ``min_step_k``: the segmentation split one
      plateau, it did not see a step (a jump below the step threshold is not a jump);
    - dropped as a *rim sliver* when it is a small piece (at most 5 % of the host's
      area) of the host's soft rim: every pixel within the host's rim extent and a
      contrast between the host's and zero. A blurred or conducting edge spreads the
      host's contrast outwards; a piece of that ramp cut off by the segmentation is
      the host's edge, not a defect of its own. Its pixels then count, like the rest
      of the rim, into the host's heat integral.

    Touching regions of *different* temperature that are not rim slivers (a stud
    beside an empty bay, a warm strip beside a cold patch) stay separate anomalies.
    """
    if len(accepted) < 2:
        return accepted, {}
    by_label = {c.label: c for c in accepted}
    order = sorted(accepted, key=lambda c: (c.rr.size, c.label))
    dropped: set[int] = set()
    host_of: dict[int, int] = {}
    for c in order:
        ring = ndimage.binary_dilation(c.region, structure=_CROSS) & ~c.region
        hosts = [by_label[int(h)] for h in np.unique(labels[c.crop][ring]) if int(h) in by_label and int(h) != c.label]
        hosts = [h for h in hosts if h.rr.size > c.rr.size and np.sign(h.delta_k) == np.sign(c.delta_k)
                 and h.label not in dropped]
        if not hosts:
            continue
        host = max(hosts, key=lambda h: (h.rr.size, -h.label))
        similar = [h for h in hosts if abs(h.mean_c - c.mean_c) < min_step_k]
        if similar:
            host_of[c.label] = max(similar, key=lambda h: (h.rr.size, -h.label)).label
            continue
        if c.rr.size > SLIVER_FRACTION * host.rr.size or abs(c.delta_k) >= abs(host.delta_k):
            continue
        rows = c.rr + (c.r0 - host.r0)
        cols = c.cc + (c.c0 - host.c0)
        inside = (rows >= 0) & (rows < host.dist.shape[0]) & (cols >= 0) & (cols < host.dist.shape[1])
        reach = max(RIM_PX, host.gap_px)
        if inside.all() and float(host.dist[rows, cols].max()) <= reach:
            dropped.add(c.label)
    # chains (a fragment of a fragment) end at the final host
    for k in list(host_of):
        h = host_of[k]
        while h in host_of:
            h = host_of[h]
        host_of[k] = h
    host_of = {k: h for k, h in host_of.items() if h not in dropped}
    kept = [c for c in accepted if c.label not in dropped]
    return kept, host_of


@dataclass
class _Measured:
    cand: _Candidate
    kind: str
    shape: Shape
    bbox: tuple[int, int, int, int]
    loss_sum_kpx: float  # over the region's own pixels, K·px (loss-signed)
    n_footprint: int  # the region's own pixels
    rim_index: np.ndarray  # flat image indices of its soft-rim pixels
    rim_loss_kpx: np.ndarray  # their loss-signed contrast, K
    inside: np.ndarray  # region pixels (in c.rr, c.cc order) inside the half-contrast edge


def _measure_candidate(
    c: _Candidate, *, labels: np.ndarray, t: np.ndarray, u: np.ndarray, edges: np.ndarray, is_anomaly: np.ndarray,
    noise_k: float, loss_sign: float, reference: np.ndarray,
) -> _Measured:
    """Thermal footprint (region + soft rim of the same sign), loss sum and shape of one anomaly.

    Writes the anomaly's reference plane over its footprint into ``reference``.
    """
    lab_c = labels[c.crop]
    t_c = t[c.crop]
    reach = max(RIM_PX, c.gap_px)
    rr, cc = np.nonzero((c.dist > 0) & (c.dist <= reach))
    lab_rim = lab_c[rr, cc]
    ok = (lab_rim > 0) & ~is_anomaly[lab_rim]
    rr, cc = rr[ok], cc[ok]
    rim_ref = c.ref.plane.evaluate(rr + float(c.r0), cc + float(c.c0))
    rim_contrast = t_c[rr, cc] - rim_ref
    keep = np.sign(c.delta_k) * rim_contrast > noise_k
    rr_in, cc_in = c.rr, c.cc
    in_ref = c.ref_in
    in_contrast = t_c[rr_in, cc_in] - in_ref
    loss_sum = loss_sign * float(in_contrast.sum())
    rim_index = np.ravel_multi_index((c.r0 + rr[keep], c.c0 + cc[keep]), labels.shape)
    rim_loss = loss_sign * rim_contrast[keep]
    reference[c.r0 + rr_in, c.c0 + cc_in] = in_ref
    reference[c.r0 + rr[keep], c.c0 + cc[keep]] = rim_ref[keep]
    # shape features on a tight crop: bounding box + 3 px
    rb = (int(rr_in.min()), int(rr_in.max()))
    cb = (int(cc_in.min()), int(cc_in.max()))
    tr0, tc0 = max(0, rb[0] - 3), max(0, cb[0] - 3)
    tr1, tc1 = min(c.region.shape[0], rb[-1] + 4), min(c.region.shape[1], cb[-1] + 4)
    tight = (slice(tr0, tr1), slice(tc0, tc1))
    tr = np.arange(tr0, tr1, dtype=float)[:, None]
    tc = np.arange(tc0, tc1, dtype=float)[None, :]
    shape = shape_features(
        c.region[tight], u_crop=u[c.crop][tight],
        reference_crop=c.ref.plane.evaluate(tr + float(c.r0), tc + float(c.c0)), dist_crop=c.dist[tight],
        delta_k=c.delta_k, noise_k=noise_k, row_offset=c.r0 + tr0, col_offset=c.c0 + tc0,
    )
    bbox = (c.r0 + rb[0], c.c0 + cb[0], c.r0 + rb[-1] + 1, c.c0 + cb[-1] + 1)
    # the measured extent: region pixels whose smooth contrast holds at least half the core contrast
    # (the half-maximum edge of a blurred step); the jump band a segmentation adds to a region is outside
    contrast_u = u[c.crop][rr_in, cc_in] - in_ref
    sgn = 1.0 if c.delta_k >= 0 else -1.0
    inside = sgn * contrast_u >= HALF_CONTRAST * abs(float(np.median(contrast_u))) * (1.0 - 1e-9)
    inside &= inside_edge_line(
        c.region, rr=c.rr, cc=c.cc, delta_k=c.delta_k, u_crop=u[c.crop], edges_crop=edges[c.crop], valid_crop=lab_c > 0
    )
    if int(inside.sum()) < MIN_SPOT_PX:
        inside = np.ones(rr_in.size, bool)
    return _Measured(
        c, "cold" if c.delta_k < 0 else "warm", shape, bbox, loss_sum, int(rr_in.size), rim_index, rim_loss, inside
    )
