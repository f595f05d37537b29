"""One anomaly per defect: detected regions joined with the segmentation's regions.

The detector (:mod:`._significance`) finds every patch whose contrast against the
local sound surface is significant at its own scale, jump or no jump, and gives it
one extent (half its own peak contrast). The segmentation finds jumps. They are
joined here, region by region:

- a segmented anomaly that agrees with the detected region(s) it covers (IoU of
  its measured extent with their union at least :data:`SNAP_IOU`) and is the only
  segmented piece of them keeps its segmented outline and measurement: where a
  jump bounds a defect, the jump places the outline (the half-peak level of a
  blurred step lies on the step);
- a detected region holding several segmented pieces (the rings of a graded wet
  area, the pieces of a cold-air fan, the fragments of a ramp-edged damp zone), or
  one piece that disagrees with it (a soft area the segmentation cut somewhere
  else), becomes *one* anomaly with the detected extent; the pieces are its parts;
- a detected region with no segmented piece (a weak soft defect without a jump)
  becomes an anomaly of its own;
- framing members (regular sets and straight bands of pieces) and uniform bands
  (a stud, plate or header on its own) always keep their segmented outline; a detected region is split at them (their extent, widened by
  one pixel for the jump band, is taken out of it), so a soft void beside a stud
  does not take the stud in.

A detected anomaly is measured on the sound surface: reference = the surface under
its extent, contrast = temperature − surface, excess heat summed over its
*thermal region*, the pixels of its significant component nearest to it, on no other
anomaly, within the sound length of its extent, where its smooth contrast holds at
least a tenth of its peak; plus what it adds to the members (framing, uniform bands,
detected lines) beside or across it, taken off theirs (:func:`_member_shares`).
A framing member is narrow (at most ``BAND_MAX_WIDTH_M``): a wide area lined up with
small pieces (a damp zone and the fragments of its tide line) is not one.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
from scipy import ndimage

from .._shared import robust_sigma
from ._candidates import Candidate
from ._framing import BAND_ELONGATION, BAND_MAX_WIDTH_M, is_band
from ._geometry import MIN_SPOT_PX
from ._reach import distance_to_zeros, near_sources, within_reach
from ._scales import _dilate, _fill_holes, _group_max, label8
from ._reference import Plane, RingReference
from ._shape import Shape, shape_features
from ._significance import DetectionInfo
from ._thermal_region import Measured

__all__ = ["join_detections", "SNAP_IOU", "OWN_FRACTION", "QUARTER", "TAIL_FADE", "RIM_FRACTION"]

SNAP_IOU = 0.6  # a segmented anomaly gives the outline when its extent agrees this well with the detection
OWN_FRACTION = 0.5  # a piece belongs to a detected region holding at least half of its extent
_PAD = 3
TAIL_FADE = 0.75  # a tail's far half holds at most this fraction of its near half's contrast
RIM_FRACTION = 0.1  # a detected anomaly's thermal region reaches down to this fraction of its peak
QUARTER = 0.25  # the non-uniformity of a detected anomaly is read down to this fraction of its peak


def _extent_index(m: Measured, n_cols: int) -> np.ndarray:
    c = m.cand
    return (c.rr[m.extent_mask] + c.r0) * n_cols + (c.cc[m.extent_mask] + c.c0)


class _Nearest:
    """Lazily computed nearest detected region of every pixel (within its own component)."""

    def __init__(self, det_labels: np.ndarray, components: np.ndarray) -> None:
        self._det, self._comp, self._map = det_labels, components, None

    def labels(self) -> np.ndarray:
        if self._map is None:
            det = self._det
            if det.any():  # indices only, the map formed by bands (memory, issue 15)
                ir, ic = ndimage.distance_transform_edt(det == 0, return_distances=False, return_indices=True)
                comp = self._comp
                out = np.zeros(det.shape, det.dtype)
                for r0 in range(0, det.shape[0], 256):
                    rows = slice(r0, r0 + 256)
                    near_r, near_c = ir[rows], ic[rows]
                    same = (comp[rows] == comp[near_r, near_c]) & (comp[rows] != 0)
                    np.copyto(out[rows], det[near_r, near_c], where=same)
                del ir, ic
                self._map = out.ravel()
            else:
                self._map = np.zeros(det.size, np.int32)
        return self._map


def _fades_from(idx: np.ndarray, core: np.ndarray, *, sign: int, u: np.ndarray, surface_c: np.ndarray) -> bool:
    """A piece (flat pixels ``idx``) beside a detected region ``core`` is its tail: its contrast fades away from it.

    The piece's far half (pixels beyond their median distance from the core) must hold at most
    :data:`TAIL_FADE` of the contrast of its near half. The rings of a graded area, the lower
    pieces of a fan and the fragments of a ramp do; a member or a plateau of its own, whose
    contrast holds away from the region (a stud running past a half-empty bay), does not.
    """
    shape = core.shape
    rows, cols = np.divmod(idx, shape[1])
    cr, cc = np.nonzero(core)
    r0, r1 = min(int(rows.min()), int(cr.min())), max(int(rows.max()), int(cr.max())) + 1
    c0, c1 = min(int(cols.min()), int(cc.min())), max(int(cols.max()), int(cc.max())) + 1
    dist = distance_to_zeros(~core[r0:r1, c0:c1])[rows - r0, cols - c0]
    contrast = sign * (u.flat[idx] - surface_c.flat[idx])
    far = dist > float(np.median(dist))
    if far.all() or not far.any():
        return True
    near_mean, far_mean = float(contrast[~far].mean()), float(contrast[far].mean())
    return near_mean <= 0 or far_mean <= TAIL_FADE * near_mean


def _assign(
    units: dict[int, list[Measured]], ext: dict[int, np.ndarray], is_frame: dict[int, bool], *,
    det_labels: np.ndarray, components: np.ndarray, d_area: np.ndarray, u: np.ndarray, surface_c: np.ndarray,
    pixel_m: float | None,
) -> tuple[dict[int, int], dict[int, int], dict[int, list[int]]]:
    """Which detected region each segmented piece belongs to.

    Returns ``(core_of, tail_of, covers)``: a piece is a *core* piece of the detected region
    holding at least half of its extent; otherwise a *tail* of the nearest detected region in
    its significant component when its contrast fades away from it (:func:`_fades_from`) and it
    is not a uniform band; ``covers`` lists the detected regions at least half covered by it.
    Framing members are neither.
    """
    dl = det_labels.ravel()
    comp = components.ravel()
    nearest = _Nearest(det_labels, components)
    core_of: dict[int, int] = {}
    tail_of: dict[int, int] = {}
    covers: dict[int, list[int]] = {}
    for k, idx in ext.items():
        if is_frame[k] or idx.size == 0:
            continue
        counts = np.bincount(dl[idx], minlength=d_area.size)
        counts[0] = 0
        covers[k] = [int(lab) for lab in np.flatnonzero(counts >= OWN_FRACTION * d_area)]
        if counts.max() >= OWN_FRACTION * idx.size:
            core_of[k] = int(counts.argmax())
            continue
        main = max(units[k], key=lambda m: (m.shape.area_px, -m.cand.label))
        width_m = None if pixel_m is None else main.shape.width_px * pixel_m
        if main.shape.uniform and is_band(main.shape, width_m, BAND_ELONGATION):
            continue  # a uniform band beside a detected region is a member of its own, not its tail
        sign = -1 if main.kind == "cold" else 1
        near = nearest.labels()[idx[np.sign(comp[idx]) == sign]]
        near = near[near > 0]
        if near.size >= OWN_FRACTION * idx.size:
            lab = int(np.bincount(near).argmax())
            if _fades_from(idx, det_labels == lab, sign=sign, u=u, surface_c=surface_c):
                tail_of[k] = lab
    return core_of, tail_of, covers


def _absorb(unit: list[Measured], tails: list[np.ndarray], *, t: np.ndarray, loss_sign: float) -> list[Measured]:
    """The unit with the tail pieces' pixels (flat ``tails``) added to its main piece's thermal region."""
    main = max(unit, key=lambda m: (m.shape.area_px, -m.cand.label))
    idx = np.concatenate(tails)
    rows, cols = np.divmod(idx, t.shape[1])
    loss = loss_sign * (t.flat[idx] - main.cand.ref.plane.evaluate(rows.astype(float), cols.astype(float)))
    new = replace(main, rim_index=np.concatenate([main.rim_index, idx]),
                  rim_loss_k=np.concatenate([main.rim_loss_k, loss]))
    return [new if m is main else m for m in unit]


def join_detections(
    measured: list[Measured], *, host_of: dict[int, int], framing: set[int], det_labels: np.ndarray,
    info: DetectionInfo, surface_c: np.ndarray, t: np.ndarray, u: np.ndarray, valid: np.ndarray, noise_k: float,
    loss_sign: float, reference: np.ndarray, first_label: int, min_contrast_k: float, pixel_m: float | None,
) -> tuple[list[Measured], dict[int, int]]:
    """Segmented anomalies and detected regions -> one measured anomaly per defect.

    Parameters
    ----------
    measured : list of Measured
        Segmented anomalies (confirmed by the detection), fragments included.
    host_of : dict
        Fragment label -> host label.
    framing : set of int
        Labels of framing members (regular sets, straight bands of pieces).
    det_labels, info, surface_c
        The detector's regions, its description and the sound surface (°C).
    t, u : (M, N) ndarray
        Measured and smooth temperature, °C.
    valid : (M, N) bool ndarray
    noise_k, loss_sign, min_contrast_k : float
        Noise (K), −1 from inside / +1 from outside, smallest contrast reported (K).
    reference : (M, N) ndarray
        Written in place over the thermal region of each detected anomaly.
    first_label : int
        Labels of detected anomalies start here (above every segmented label).
    pixel_m : float or None
        One pixel's side on the surface, m.

    Returns
    -------
    (list of Measured, dict)
        The kept segmented anomalies and the new detected ones; the fragments map
        restricted to the kept ones.
    """
    shape = t.shape
    n_cols = shape[1]
    dl = det_labels.ravel()
    comp = info.components.ravel()
    regions = {r.label: r for r in info.regions}
    units: dict[int, list[Measured]] = {}
    for m in measured:
        units.setdefault(host_of.get(m.cand.label, m.cand.label), []).append(m)
    ext = {k: np.concatenate([_extent_index(m, n_cols) for m in ms]) for k, ms in units.items()}
    # a framing member is narrow: a wide area that lines up with other pieces (a damp zone along the base
    # of a wall and the fragments of its tide line) is not one
    is_frame = {k: any(m.cand.label in framing for m in ms) and (pixel_m is None or max(
        m.shape.width_px for m in ms) * pixel_m <= BAND_MAX_WIDTH_M) for k, ms in units.items()}
    d_area = np.zeros(max(max(regions, default=0), int(dl.max(initial=0))) + 1, np.int64)
    for i0 in range(0, dl.size, 1 << 20):  # by pieces: no frame-sized int64 copy of the labels (issue 15)
        d_area += np.bincount(dl[i0 : i0 + (1 << 20)], minlength=d_area.size)
    core_of, tail_of, covers = _assign(units, ext, is_frame, det_labels=det_labels, components=info.components,
                                       d_area=d_area, u=u, surface_c=surface_c, pixel_m=pixel_m)

    consumed: set[int] = set()
    dropped: set[int] = set()
    for k, labs in covers.items():
        # the detected regions this piece covers, of which it is the only core piece
        mine = [lab for lab in labs if all(j == k for j, c in core_of.items() if c == lab)]
        if not mine or core_of.get(k, mine[0]) not in mine:
            continue
        inter = int(np.isin(dl[ext[k]], mine).sum())
        union = ext[k].size + int(d_area[mine].sum()) - inter
        if inter / max(union, 1) >= SNAP_IOU:
            consumed.update(mine)  # the segmented outline stands for these detected regions ...
            tails = [j for j, lab in tail_of.items() if lab in mine]
            if tails:  # ... and the pieces falling away from it are its tail: its heat, not anomalies
                units[k] = _absorb(units[k], [ext[j] for j in tails], t=t, loss_sign=loss_sign)
                dropped.update(tails)
    soft = [lab for lab in regions if lab not in consumed]
    for j, lab in list(core_of.items()) + list(tail_of.items()):
        if lab in soft:
            dropped.add(j)
    members = {lab: sum(1 for j, c in list(core_of.items()) + list(tail_of.items()) if c == lab) for lab in soft}

    taken = np.zeros(t.size, bool)
    for k, idx in ext.items():
        if k not in dropped:
            taken[idx] = True
    blocked = _dilate(taken.reshape(shape), 1)  # 3×3 binary dilation
    extents: dict[int, np.ndarray] = {}
    mine = x = None
    for lab in soft:
        r = regions[lab]
        mine = det_labels == lab
        x = mine & ~blocked
        n_x = int(x.sum())
        need = info.min_area_px if members[lab] else max(info.min_area_px, OWN_FRACTION * r.area_px)
        idx = np.flatnonzero(x)
        # a reading needs 3×3 pixels that themselves hold half the peak (smoothing widens a tiny spot)
        strong = int((r.sign * (t.flat[idx] - surface_c.flat[idx]) >= 0.5 * abs(r.peak_k)).sum())
        if n_x >= need and strong >= MIN_SPOT_PX:
            extents[lab] = idx
    del blocked, mine, x  # frame-sized masks of the loop above (memory, issue 15)
    final = taken  # taken is not needed apart any more
    for idx in extents.values():
        final[idx] = True

    # the smallest anomaly is a physical area (the detector's), for the segmented ones too
    dropped.update(k for k, idx in ext.items() if not is_frame[k] and idx.size < info.min_area_px)
    out = [m for k, ms in units.items() if k not in dropped for m in ms]
    framing_kept = {m.cand.label for k, ms in units.items() if k not in dropped and is_frame[k] for m in ms}
    made: list[tuple[int, object, np.ndarray]] = []
    new_host = {f: h for f, h in host_of.items() if h not in dropped}
    nearest = _Nearest(det_labels, info.components)
    # a member crossing a detected anomaly is part of its sound state (summed in place: the members'
    # field is not needed apart any more, and a frame-sized sum is memory, issue 15)
    with_members = np.add(surface_c, info.members_k, out=info.members_k)
    multi = {c for c, n in zip(*np.unique([regions[lab].component for lab in extents], return_counts=True)) if n > 1} \
        if extents else set()
    for i, (lab, idx) in enumerate(sorted(extents.items())):
        r = regions[lab]
        own_comp = comp == r.component
        if r.component in multi:
            own_comp &= nearest.labels() == lab
        thermal = np.flatnonzero(own_comp & ~final)
        thermal = thermal[within_reach(idx, thermal, info.sound_length_px, shape)]
        # its soft rim: down to a tenth of its peak (the rest of a wide significant component is the
        # sound surface's own misfit summed over many pixels, not the defect's heat)
        thermal = thermal[r.sign * (u.flat[thermal] - with_members.flat[thermal]) >= RIM_FRACTION * abs(r.peak_k)]
        m = _measure(first_label + i, idx, thermal, abs(r.peak_k), shape=shape, surface_c=with_members, t=t, u=u,
                     valid=valid, noise_k=noise_k, loss_sign=loss_sign, reference=reference,
                     n_parts=members[lab])
        if m is not None and abs(m.cand.delta_k) >= min_contrast_k and np.sign(m.cand.delta_k) == r.sign:
            out.append(m)
            made.append((len(out) - 1, r, np.concatenate([idx, thermal])))
    # members (framing, uniform bands, narrow detected lines): a broad detected anomaly beside or across
    # one takes what it adds to it
    width = lambda m: None if pixel_m is None else m.shape.width_px * pixel_m  # noqa: E731
    is_member = {m.cand.label for m in out if m.cand.label in framing_kept or (
        m.shape.uniform and is_band(m.shape, width(m), BAND_ELONGATION)) or (
        m.cand.ref.source == "detected" and m.shape.elongation >= BAND_ELONGATION
        and m.shape.width_px <= info.line_px)}
    for pos, r, pix in made:
        if out[pos].cand.label in is_member:
            continue
        add_i, add_l = _member_shares(pix, r, out, is_member, comp=comp, u=u, t=t, surface_c=surface_c,
                                      reach_px=info.sound_length_px, loss_sign=loss_sign, reference=reference)
        if add_i.size:
            m = out[pos]
            out[pos] = replace(m, rim_index=np.concatenate([m.rim_index, add_i]),
                               rim_loss_k=np.concatenate([m.rim_loss_k, add_l]))
    return out, new_host


def _member_shares(
    idx: np.ndarray, r, out: list[Measured], is_member: set[int], *, comp: np.ndarray, u: np.ndarray,
    t: np.ndarray, surface_c: np.ndarray, reach_px: float, loss_sign: float, reference: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """What a detected anomaly adds to the members beside or across it: ``(flat pixels, loss K)``.

    A stud or joist the defect exposes (insulation left at part of its depth beside a joist) gets
    colder *because of* the defect; that share is the defect's heat. A member's own contrast is
    what it shows away from the defect (the median of its contrast against the sound surface over
    its pixels farther than ``reach_px``, the sound length, from the defect's extent); on its pixels
    within that reach and in the defect's significant component, what exceeds its own contrast by
    at least :data:`RIM_FRACTION` of the defect's peak is the defect's (and taken off the member's
    loss, in place in ``out``). A member with fewer than 9 pixels away from the defect is left as it is.
    """
    shape = u.shape
    mask = np.zeros(u.size, bool)
    mask[idx] = True
    rows, cols = np.divmod(idx, shape[1])
    r0, r1 = max(0, int(rows.min() - reach_px) - 1), min(shape[0], int(rows.max() + reach_px) + 2)
    c0, c1 = max(0, int(cols.min() - reach_px) - 1), min(shape[1], int(cols.max() + reach_px) + 2)
    box = mask.reshape(shape)[r0:r1, c0:c1]
    near_box = near_sources((~box).view(np.uint8), reach_px)
    got_i: list[np.ndarray] = []
    got_l: list[np.ndarray] = []
    for j, m in enumerate(out):
        if m.cand.label not in is_member:
            continue
        c = m.cand
        reg = (c.rr + c.r0) * shape[1] + (c.cc + c.c0)
        pix = np.concatenate([reg, m.rim_index])
        pr, pc = np.divmod(pix, shape[1])
        inside = (pr >= r0) & (pr < r1) & (pc >= c0) & (pc < c1)
        near = np.zeros(pix.size, bool)
        near[inside] = near_box[pr[inside] - r0, pc[inside] - c0]
        away = ~near[: reg.size]
        if not near.any() or int(away.sum()) < 9:
            continue
        own = max(float(np.median(r.sign * (u.flat[reg[away]] - surface_c.flat[reg[away]]))), 0.0)
        extra_u = r.sign * (u.flat[pix] - surface_c.flat[pix]) - own
        take = near & (comp[pix] == r.component) & (extra_u >= RIM_FRACTION * abs(r.peak_k)) & ~mask[pix]
        if not take.any():
            continue
        # loss of the taken pixels against the sound surface plus the member's own contrast
        ref = surface_c.flat[pix] + r.sign * own
        loss = loss_sign * (t.flat[pix] - ref)
        in_reg, in_rim = take[: reg.size], take[reg.size:]
        rim_loss = m.rim_loss_k.copy()
        rim_loss[in_rim] -= loss[reg.size:][in_rim]
        out[j] = replace(m, loss_sum_kpx=m.loss_sum_kpx - float(loss[: reg.size][in_reg].sum()), rim_loss_k=rim_loss)
        first = np.unique(pix[take], return_index=True)[1]
        got_i.append(pix[take][first])
        got_l.append(loss[take][first])
        reference.flat[pix[take]] = ref[take]
    if not got_i:
        return np.zeros(0, np.int64), np.zeros(0)
    return np.concatenate(got_i), np.concatenate(got_l)


def _measure(
    label: int, idx: np.ndarray, rim: np.ndarray, peak_k: float, *, shape: tuple[int, int], surface_c: np.ndarray,
    t: np.ndarray, u: np.ndarray, valid: np.ndarray, noise_k: float, loss_sign: float, reference: np.ndarray,
    n_parts: int, shares: tuple[np.ndarray, np.ndarray] | None = None,
) -> Measured | None:
    """One detected anomaly (extent ``idx``, the rest of its thermal region ``rim``) measured on the sound surface;
    ``shares`` (flat pixels, loss K) is what it adds to the members beside it (:func:`_member_shares`)."""
    rows, cols = np.divmod(idx, shape[1])
    allr = np.concatenate([rows, rim // shape[1]])
    allc = np.concatenate([cols, rim % shape[1]])
    r0, r1 = max(0, int(allr.min()) - _PAD), min(shape[0], int(allr.max()) + _PAD + 1)
    c0, c1 = max(0, int(allc.min()) - _PAD), min(shape[1], int(allc.max()) + _PAD + 1)
    crop = (slice(r0, r1), slice(c0, c1))
    region = np.zeros((r1 - r0, c1 - c0), bool)
    rr, cc = rows - r0, cols - c0
    region[rr, cc] = True
    rr, cc = np.nonzero(region)  # raster order
    dist = distance_to_zeros(~region)
    s_crop = surface_c[crop]
    t_crop = t[crop]
    ref_in = s_crop[rr, cc]
    vals = t_crop[rr, cc]
    mean_c = float(vals.mean())
    reference_c = float(ref_in.mean())
    delta = mean_c - reference_c
    if delta == 0.0:
        return None
    # spread of the measured temperature about the surface on the sound pixels around it (local texture)
    rim_crop = np.zeros(region.shape, bool)
    rim_crop[rim // shape[1] - r0, rim % shape[1] - c0] = True
    around = valid[crop] & ~region & ~rim_crop & (dist <= max(6.0, 0.3 * math.sqrt(idx.size)))
    resid = (t_crop - s_crop)[around]
    sigma = robust_sigma(resid) if resid.size >= 24 else float(noise_k)
    plane = Plane(reference_c, 0.0, 0.0, float(rows.mean()), float(cols.mean()), sigma, int(resid.size))
    ref = RingReference(plane, float(sigma), int(resid.size), "detected")
    cand = Candidate(label, r0, c0, crop, region, dist, ref, mean_c, reference_c, delta, 0.0, rr, cc, ref_in)
    reference.flat[idx] = surface_c.flat[idx]
    reference.flat[rim] = surface_c.flat[rim]
    shp = _shape(region, dist, rim_crop, delta=delta, peak_k=peak_k, u_crop=u[crop], s_crop=s_crop,
                 noise_k=noise_k, offset=(r0, c0))
    loss_in = loss_sign * float((vals - ref_in).sum())
    rim_loss = loss_sign * (t.flat[rim] - surface_c.flat[rim])
    if shares is not None and shares[0].size:
        rim, rim_loss = np.concatenate([rim, shares[0]]), np.concatenate([rim_loss, shares[1]])
    bbox = (int(rows.min()), int(cols.min()), int(rows.max()) + 1, int(cols.max()) + 1)
    return Measured(cand, "cold" if delta < 0 else "warm", shp, bbox, loss_in, int(idx.size), rim, rim_loss,
                    np.ones(rr.size, bool), n_parts)


def _shape(region: np.ndarray, dist: np.ndarray, rim_crop: np.ndarray, *, delta: float, peak_k: float,
           u_crop: np.ndarray, s_crop: np.ndarray, noise_k: float, offset: tuple[int, int]) -> Shape:
    """Shape features of a detected anomaly: its outline from its extent, its fading below half its peak.

    Size, fill, solidity, length, width, taper and outline come from the extent (what is reported).
    The extent (half-peak) of a decaying pattern keeps its stronger part only; what makes it a fan or
    a streak from a gap (its fading away from the source) shows between a quarter and a half of the
    peak, so that is read on the region where the contrast holds a quarter of the peak, joined to the
    extent (:func:`_fades_from_end`). A soft edge makes the contrast vary *across* any soft
    anomaly, a stud as much as a fan; what tells a fading pattern from a uniform one (a member, a
    void, a damp band) is the variation *along* it: the non-uniformity is the robust spread (noise
    removed) over the mean of the profile of the strongest contrast across each 1-px slice along
    the region's principal axis, the ratio the segmented anomalies use.
    """
    sgn = 1.0 if delta >= 0 else -1.0
    contrast = sgn * (u_crop - s_crop)
    low = (region | rim_crop) & (contrast >= QUARTER * peak_k)
    lab = label8(low | region)  # its 8-connected components that hold the extent, holes filled
    keep = np.zeros(int(lab.max()) + 1, bool)
    keep[lab[region]] = True
    keep[0] = False
    reg = _fill_holes(keep[lab] | region)
    shp = shape_features(region, u_crop=u_crop, reference_crop=s_crop, dist_crop=dist, delta_k=delta,
                         noise_k=noise_k, row_offset=offset[0], col_offset=offset[1])
    rr, cc = np.nonzero(reg)
    fades = _fades_from_end(contrast, rr, cc)
    if rr.size < 3:
        return shp
    cov = np.cov(np.vstack([cc, rr]).astype(float))
    evals, evecs = np.linalg.eigh(cov)
    axis = evecs[:, int(np.argmax(evals))]
    along = np.round((cc - cc.mean()) * axis[0] + (rr - rr.mean()) * axis[1]).astype(int)
    along -= int(along.min())
    profile = _group_max(along, contrast[rr, cc], int(along.max()) + 1)
    profile = profile[np.isfinite(profile)]
    mean = float(profile.mean())
    spread = robust_sigma(profile) if profile.size > 1 else 0.0
    spread = math.sqrt(max(spread * spread - noise_k * noise_k, 0.0))
    return replace(shp, fades_from_end=fades, nonuniformity=float(spread / mean) if mean > 0 else float("inf"))


def _fades_from_end(contrast: np.ndarray, rr: np.ndarray, cc: np.ndarray) -> bool:
    """Strongest near one end of the region, down a row or column axis, fading to half toward the other end.

    The strongest contrast of each row (and of each column) of the region is read as a profile;
    a fan or streak from a gap peaks in the outer quarter of its length at one end and holds at most
    half of that peak over the outer fifth at the other end. A member, a void or a damp band holds
    its contrast along its length; a graded area peaks in its middle.
    """
    for along in (rr, cc):
        a = along - int(along.min())
        n = int(a.max()) + 1
        if n < 8:
            continue
        profile = _group_max(a, contrast[rr, cc], n)
        profile = np.where(np.isfinite(profile), profile, np.nan)
        top = float(np.nanmax(profile))
        i = int(np.nanargmax(profile))
        tail = max(1, n // 5)
        if i < n // 4 and float(np.nanmean(profile[-tail:])) <= 0.5 * top:
            return True
        if i >= n - n // 4 and float(np.nanmean(profile[:tail])) <= 0.5 * top:
            return True
    return False

