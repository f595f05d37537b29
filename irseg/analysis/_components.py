"""The extent rule: the anomalies of one significant component, strongest first.

Helper of :mod:`._significance` (its module docstring states the rule): within one grown
component of significant contrast, the strongest place gives a peak and the anomaly extends to
half of it; broad anomalies are read with their narrow members taken out; domes are split at
saddles; a remainder touching a taken anomaly is a defect of its own only with its own plateau or
dome, beside it; tails are left to the anomaly they fall away from.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np
from scipy import ndimage

from ._scales import _dilate, _fill_holes, _pct, dome_of, gaussian_noise_factor, label8, long_lines, without_lines

__all__ = ["RegionInfo", "extract_component", "EXTENT_FRACTION", "JOIN_FRACTION", "PLATEAU_RATIO",
           "BROAD_FRACTION", "FIRST_BROAD_FRACTION", "SADDLE_DIP", "WRAP_MAX", "FINE_NOISE_FRACTION", "EDGE_JITTER_PX",
           "PEAK_NOISE_FRACTION", "PEAK_PERCENTILE", "FINE_SCALES"]

EXTENT_FRACTION = 0.5
JOIN_FRACTION = 0.25  # half-peak pieces joined through this fraction of the peak are one anomaly
PLATEAU_RATIO = 0.85
BROAD_FRACTION = 0.5  # a broad anomaly keeps this share of its peak with the narrow members taken out
FIRST_BROAD_FRACTION = 1 / 3  # ... a third, for the first anomaly of a component
SADDLE_DIP = 0.25  # a dome beside a taken anomaly: its contrast falls by a quarter toward it
WRAP_MAX = 0.5  # a touching plateau may border at most half of the other anomaly's outline
FINE_NOISE_FRACTION = 0.04  # the extent is measured where σ_fine ≤ 4 % of the peak
EDGE_JITTER_PX = 0.5  # ... and where the noise moves its half-peak edge by at most half a pixel
PEAK_NOISE_FRACTION = 0.01  # the peak is read where σ ≤ 1 % of it
PEAK_PERCENTILE = 99.0
FINE_SCALES = (0.7, 1.0, 1.4, 2.0, 2.8, 4.0, 5.7, 8.0, 11.3, 16.0)
_MAX_PASSES = 12
_SQUARE = ndimage.generate_binary_structure(2, 2)


@dataclass(frozen=True)
class RegionInfo:
    """One detected anomaly."""

    label: int
    sign: int  # +1 warm, −1 cold
    peak_k: float  # robust peak contrast against the sound surface, K (signed)
    level_k: float  # the extent threshold (fraction of the peak), K (signed)
    area_px: int
    fine_scale_px: float  # the smoothing the extent was measured at
    touches_edge: bool  # the anomaly reaches the frame edge (its area may be cut)
    split_from: int  # label of the touching anomaly it was split from (0: none)
    component: int  # its significant component in ``DetectionInfo.components`` (signed: < 0 cold)


def _choose_fine(peak_rough: float, noise: float, fraction: float) -> float:
    """Smallest window of the fine bank whose white-noise σ is at most ``fraction`` of the peak."""
    for s in FINE_SCALES:
        if noise * gaussian_noise_factor(s) <= fraction * abs(peak_rough):
            return s
    return FINE_SCALES[-1]


def _steady_edge_scale(rough: np.ndarray, piece: np.ndarray, peak: float, noise: float, s_f: float) -> float:
    """The fine scale, raised until the half-peak edge holds still: noise at that scale over the contrast
    gradient across the edge at most :data:`EDGE_JITTER_PX` px (a soft edge is crossed at a shallow
    slope, where the noise moves the crossing), but never wider than a quarter of the ramp itself
    (``peak/gradient``), so the smoothing does not move the edge either."""
    near = piece & (np.abs(rough - 0.5 * peak) <= 0.05 * peak)
    if near.sum() < 8:
        return s_f
    gr, gc = _gradient_at(rough, *np.nonzero(near))
    grad = float(np.percentile(np.hypot(gr, gc), 75))  # on the edge, not on a plateau near half the peak
    if grad <= 0:
        return s_f
    cap = 0.25 * peak / grad
    for s in FINE_SCALES:
        if s < s_f:
            continue
        if noise * gaussian_noise_factor(s) <= EDGE_JITTER_PX * grad or s >= cap:
            return max(s_f, min(s, max(cap, s_f)))
    return max(s_f, min(FINE_SCALES[-1], max(cap, s_f)))


def _gradient_at(f: np.ndarray, rr: np.ndarray, cc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``np.gradient(f)`` (both axes) at the pixels ``rr, cc`` only: central differences inside, one-sided at
    the border, formed as NumPy forms them (the same values, in ``f``'s dtype)."""
    m, n = f.shape
    if m < 2 or n < 2:
        gr, gc = np.gradient(f)
        return gr[rr, cc], gc[rr, cc]

    def along(i: np.ndarray, size: int, pick) -> np.ndarray:
        d = pick(np.minimum(i + 1, size - 1)) - pick(np.maximum(i - 1, 0))
        return np.where((i > 0) & (i < size - 1), d / 2.0, d / 1.0)

    return along(rr, m, lambda r: f[r, cc]), along(cc, n, lambda c: f[rr, c])


def _defect_share(v: np.ndarray, broad: np.ndarray, lines: np.ndarray, peak: float) -> np.ndarray:
    """The broad anomaly's own contrast on the members (studs, joists, with their flanks: ``lines``).

    A member's total contrast ``v`` is its own (sound) contrast plus what the anomaly adds to it. Its
    own contrast is what it shows where the anomaly has faded (the members-removed contrast ``broad``
    below a quarter of the peak), as a profile across it: the median of ``v`` there at each offset
    (1 px) from its axis (the principal axis of its pixels), so a flank is compared with the same
    flank. The anomaly's share is the rest, ``v`` minus that profile: a joist that a partial fill
    exposes, or a stud beside a bay left at part of its depth, takes about the defect's own level; a
    member the defect does not change takes nothing. (The members-removed contrast of a grey opening
    is no measure of it: at a defect's edge the opening carries the plateau's level onto the member
    and its flank.) A member with fewer than 9 pixels where the anomaly has faded (wholly inside it)
    keeps the members-removed contrast. Returns the share over the window (``broad`` off the members).
    """
    share = broad.copy()
    # each member on its own (they are disjoint and write only their own pixels: any order gives the same)
    k, lab, stats, _ = cv2.connectedComponentsWithStats(np.ascontiguousarray(lines, dtype=bool).view(np.uint8),
                                                        connectivity=8, ltype=cv2.CV_32S)
    for i in range(1, k):
        x0, y0, w, h = (int(v_) for v_ in stats[i, :4])
        rr, cc = np.nonzero(lab[y0 : y0 + h, x0 : x0 + w] == i)
        rr, cc = rr + y0, cc + x0
        away = broad[rr, cc] < JOIN_FRACTION * peak
        if int(away.sum()) < 9 or rr.size < 3:
            continue
        cov = np.cov(np.vstack([rr, cc]).astype(float))
        normal = np.linalg.eigh(cov)[1][:, 0]  # the smaller spread: across the member
        off = np.round((rr - rr.mean()) * normal[0] + (cc - cc.mean()) * normal[1]).astype(int)
        off -= int(off.min())
        # the median of v over the faded pixels at each offset (sorted by offset, then value)
        oa, ta = off[away], v[rr, cc][away]
        order = np.lexsort((ta, oa))
        oa, ta = oa[order], ta[order]
        starts = np.flatnonzero(np.r_[True, oa[1:] != oa[:-1]])
        ends = np.r_[starts[1:], oa.size]
        prof = np.full(int(off.max()) + 1, np.nan)
        prof[oa[starts]] = 0.5 * (ta[(starts + ends - 1) // 2] + ta[(starts + ends) // 2])
        known = np.flatnonzero(np.isfinite(prof))
        prof = np.interp(np.arange(prof.size), known, prof[known])  # offsets seen only inside the anomaly
        share[rr, cc] = v[rr, cc] - np.clip(prof[off], 0.0, None)
    return share


def _is_narrow(core: np.ndarray, line_px: float) -> bool:
    """No part of ``core`` holds a disk ``line_px`` across (a member's width): an opening with it keeps less
    than a tenth of the core."""
    f = max(1, int(line_px // 8))  # on a copy reduced so that the disk keeps about 8 px across
    m, n = core.shape
    small = core[: m - m % f or m, : n - n % f or n].astype(np.float32)
    if f > 1 and small.shape[0] >= f and small.shape[1] >= f:
        small = cv2.resize(small, (small.shape[1] // f, small.shape[0] // f), interpolation=cv2.INTER_AREA)
    small = (small >= 0.5).astype(np.uint8)
    r = max(1, int(round(0.5 * line_px / f)))
    disk = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * r + 1, 2 * r + 1))
    kept = cv2.morphologyEx(small, cv2.MORPH_OPEN, disk, borderType=cv2.BORDER_CONSTANT, borderValue=0)
    return int(kept.sum()) < 0.1 * max(int(small.sum()), 1)


def _box(mask: np.ndarray, margin: int) -> tuple[slice, slice]:
    """Bounding box of ``mask`` widened by ``margin`` (clipped to the array)."""
    rows, cols = np.flatnonzero(mask.any(axis=1)), np.flatnonzero(mask.any(axis=0))
    m, n = mask.shape
    return (slice(max(0, int(rows[0]) - margin), min(m, int(rows[-1]) + margin + 1)),
            slice(max(0, int(cols[0]) - margin), min(n, int(cols[-1]) + margin + 1)))


def _read_piece(*, v, vp, piece, near, claimed, peak, sig_f, line_px, min_contrast_k, k_hi, min_area_px,
                extent_fraction):
    """One piece's strongest anomaly: ``(is_broad, peak, level, region_of, lines, share, broad, core, extent)``
    or None when it holds nothing reportable.

    Broad anomalies before narrow members: where taking the members out (studs, joists) keeps at least
    half of the peak (a third for a component's first anomaly with long members standing out of it: a
    member's own blurred flanks hold no disk a member wide, so a third of the peak left by the opening
    is a broad defect beside or under the member; beside a taken anomaly it may be that one's halo),
    the peak, the strongest place and the domes are read without them. A broad reading that holds no anomaly of the smallest area (a member
    with wide conducting shoulders, a halo) leaves the piece to be read as it is.
    """
    broad = without_lines(vp, line_px)
    p_broad = float(broad[piece].max())
    first = p_broad >= BROAD_FRACTION * peak or (
        not claimed.any() and p_broad >= FIRST_BROAD_FRACTION * peak
        and bool(long_lines(v - broad >= 0.5 * extent_fraction * p_broad, line_px).any()))  # members there
    out = None
    for is_broad in ((True, False) if first else (False,)):
        pk = p_broad if is_broad else peak
        if pk < max(min_contrast_k, k_hi * sig_f):
            return out
        level = extent_fraction * pk
        region_of = piece | (near & ~claimed & _dilate(piece, 2))
        # a broad anomaly's extent is read with its narrow members taken out: on a stud or joist in or
        # beside it (a long narrow line standing out of the members-removed contrast) the members-removed
        # contrast decides, so the member neither widens nor cuts its outline (it stays an anomaly of
        # its own); elsewhere, corners included, the contrast itself
        lines = long_lines(v - broad >= 0.5 * level, line_px) if is_broad else np.zeros_like(piece)
        share = broad
        if lines.any():
            lines = _dilate(lines, int(math.ceil(0.5 * line_px)))  # with their blurred flanks
            share = _defect_share(v, broad, lines, pk)
        field = np.where(lines, broad, v)
        above = (field >= level) & region_of & ~claimed
        joined = (v >= JOIN_FRACTION * pk) & region_of & ~claimed
        jl = label8(joined)  # only compared with the label at the top
        # the strongest place: the pixel of the piece at the robust peak's level nearest the maximum
        top = np.argmax(np.where(above, broad if is_broad else v, -np.inf))
        anchor = jl.flat[top]
        if anchor == 0 or not above.flat[top]:
            continue
        dome = dome_of(broad, jl == anchor, top, dip_k=SADDLE_DIP * pk, line_px=line_px)
        cl = label8(above & dome)
        core = _fill_holes(cl == cl.flat[top]) & ~claimed
        # the extent itself: on the members, the anomaly's own share of their contrast decides (the
        # members-removed contrast above carries a defect's plateau onto a member at its edge)
        extent = core
        if lines.any():
            ol = label8((np.where(lines, share, v) >= level) & region_of & ~claimed & dome)
            if ol.flat[top]:
                extent = _fill_holes(ol == ol.flat[top]) & ~claimed
        out = (is_broad, pk, level, region_of, lines, share, broad, core, extent)
        if int(core.sum()) >= min_area_px:
            return out
    return out


def extract_component(*, comp, k, sl, sign, fine, noise, labels, regions, min_area_px, min_contrast_k, k_hi, line_px,
             extent_fraction, split_plateaus, valid, members) -> None:
    """Anomalies of one grown component: the strongest first, then separate plateaus and pieces.

    Each piece is worked on within its bounding box, widened by the reach of every dilation below
    (the widest edge band, and a member's width for the grey opening).
    """
    m, n = comp.shape
    pad = 8
    r0, r1 = max(0, sl[0].start - pad), min(m, sl[0].stop + pad)
    c0, c1 = max(0, sl[1].start - pad), min(n, sl[1].stop + pad)
    crop = (slice(r0, r1), slice(c0, c1))
    member = comp[crop] == k
    near_all = _dilate(member, 2) & valid[crop]
    claimed_all = np.zeros_like(member)  # taken anomalies and their edge bands, and rejected tails
    taken_all = np.zeros(member.shape, np.int32)  # local anomaly ids
    peaks: dict[int, float] = {}
    rims: dict[int, int] = {}
    narrow: dict[int, bool] = {}
    queue: list[np.ndarray] = [member]
    passes = 0
    rough_all = sign * fine(2.0)[crop]
    margin = int(math.ceil(2.5 * math.hypot(1.0, FINE_SCALES[-1]))) + 8 + int(math.ceil(line_px))
    while queue and passes < _MAX_PASSES:
        passes += 1
        piece_all = queue.pop(0)
        if int(piece_all.sum()) < min_area_px:
            continue  # too small to hold an anomaly: left as it is
        box = _box(piece_all, margin)
        oy, ox = box[0].start, box[1].start
        piece, near, claimed, taken = piece_all[box], near_all[box], claimed_all[box], taken_all[box]
        rough = rough_all[box]
        p_rough = _pct(rough[piece], PEAK_PERCENTILE)
        if p_rough <= 0.5 * min_contrast_k:
            continue  # nothing that could reach the smallest contrast reported
        s_f = _steady_edge_scale(rough, piece, p_rough, noise, _choose_fine(p_rough, noise, FINE_NOISE_FRACTION))
        sig_f = noise * gaussian_noise_factor(s_f)
        v = sign * fine(s_f)[crop][box]
        # the peak: the maximum where the noise is at most 1 % of it, with the window kept well inside
        # the piece (a quarter of its equivalent radius), so neither noise nor smoothing moves it much
        s_p = min(_choose_fine(p_rough, noise, PEAK_NOISE_FRACTION),
                  max(s_f, 0.25 * math.sqrt(float(piece.sum()) / math.pi)))
        s_p = max([s for s in FINE_SCALES if s <= s_p] or [FINE_SCALES[0]])  # on the bank (fields are cached)
        vp = sign * fine(s_p)[crop][box]
        peak = float(vp[piece].max())
        read = _read_piece(v=v, vp=vp, piece=piece, near=near, claimed=claimed, peak=peak, sig_f=sig_f,
                           line_px=line_px, min_contrast_k=min_contrast_k, k_hi=k_hi, min_area_px=min_area_px,
                           extent_fraction=extent_fraction)
        if read is None:
            continue
        _, peak, level, region_of, lines, share, broad, core, extent = read
        touching = bool((_dilate(core, 1) & claimed).any())
        rim_px = int(math.ceil(2.5 * math.hypot(1.0, s_f))) + 1
        band = _dilate(core, rim_px)
        accept = int(core.sum()) >= min_area_px
        split_from = 0
        if accept and touching:
            # a remainder next to a taken anomaly: its own defect only with its own plateau or its own
            # dome (its contrast falls toward the taken one: a saddle between them), and only beside it
            # (a halo wrapping round more than half of its outline, or weaker than a quarter of its
            # peak, is its tail)
            nb = taken[_dilate(core, rim_px + 2) & (taken > 0)]
            split_from = int(np.bincount(nb).argmax()) if nb.size else 0
            rim = core & _dilate(claimed, 1)
            dome = rim.any() and float(v[rim].max()) <= (1.0 - SADDLE_DIP) * float(v[core].max())
            # beside a narrow member (a stud or joist, taken first as the strongest place) a broad remainder is
            # a defect of its own (a line has no broad tail: its flanks fade within its blur) and a narrow one
            # is its flank (two members side by side are one: a doubled stud)
            beside_line = bool(split_from) and narrow.get(split_from, False)
            stub = _is_narrow(core, line_px) and not long_lines(core, line_px).any()
            if beside_line and _is_narrow(core, line_px) or split_from and stub:
                # ... and a short narrow stub (shorter than three members' widths) touching a broad anomaly
                # is the stretch of a member the anomaly makes colder (a joist beyond a partial fill): its tail
                accept = False
            else:
                accept = split_plateaus and (dome or beside_line or _pct(v[core], 50.0) >= PLATEAU_RATIO * peak)
            if accept and split_from:
                # the other anomaly's whole outline, on the component's crop
                a_band = _dilate(taken_all == split_from, rims[split_from])
                outline = _dilate(a_band, 1) & ~a_band
                mine = np.zeros_like(member)
                mine[box] = _dilate(core, rim_px + 4)
                wrap = float((outline & mine).sum()) / max(float(outline.sum()), 1.0)
                accept = wrap <= WRAP_MAX and peak >= JOIN_FRACTION * peaks[split_from]
            if accept and split_from:
                # the step between two plateaus is shared at its midpoint
                mid = 0.5 * (peaks[split_from] + peak)
                gap = _dilate(core, rim_px + 2) & claimed & (taken == 0) & (v >= level) & (v < mid)
                core |= gap
                extent |= gap
        if accept:
            # the members' own contrast (their total minus the anomaly's share) is theirs, not the broad
            # anomaly's heat: recorded so that it is left out of its measurement
            own = lines & region_of & ~claimed
            members[crop][box][own] = sign * np.clip(v - share, 0.0, None)[own]
            core = extent
            band = _dilate(core, rim_px) | band
            lab = len(regions) + 1
            sub = labels[crop][box]
            fresh = core & (sub == 0)
            sub[fresh] = lab
            taken[core] = lab
            peaks[lab] = peak
            rims[lab] = rim_px
            narrow[lab] = _is_narrow(core, line_px)
            rr, cc = np.nonzero(core)
            edge = bool(rr.min() + r0 + oy == 0 or cc.min() + c0 + ox == 0 or rr.max() + r0 + oy == m - 1
                        or cc.max() + c0 + ox == n - 1)
            regions.append(RegionInfo(lab, sign, sign * peak, sign * level, int(fresh.sum()), s_f, edge, split_from,
                                      sign * k))
        claimed |= band if accept else _dilate(core, 1)
        if not accept and (touching or int(core.sum()) < min_area_px):
            # a tail falling away from a taken anomaly, or a small isolated peak: its edge band is
            # not a defect either (what lies beyond is looked at again, and touches it)
            claimed |= band
        rest = piece & ~claimed
        rl, nr = ndimage.label(rest, structure=_SQUARE)
        for i in range(1, nr + 1):
            nxt = np.zeros_like(member)
            nxt[box] = rl == i
            queue.append(nxt)
