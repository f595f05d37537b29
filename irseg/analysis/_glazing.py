"""Glazing: a framed pane told from a void by where its contrast is strongest.

A void, a missing board or an empty bay is strongest in its middle: the sound construction
around it conducts heat sideways and weakens its rim, so its contrast rises from the outline
toward the centre and stays there. A window is the other way round: its frame and the glass edge
over the spacer lose more heat than the middle of the glass (seen from inside they are colder),
and seen from outside the glass (emissivity about 0.84) reflects more of the cold sky than the
frame, so its middle looks less warm. Either way the contrast of a framed pane peaks in a rim a
few centimetres inside its outline and falls toward its middle.

:func:`pane_profile` measures the loss-signed contrast in rings one pixel wide at a distance of
:data:`RIM_M` from the outline and over the middle (at least :data:`CENTRE_M` inside);
:func:`is_framed_pane` applies the rule: a straight-edged rectangle (fill of its rectangle at
least :data:`PANE_FILL`) whose rim peak is at least :data:`RIM_RATIO` × its middle and
:data:`RIM_STEP_K` above it.

**The lintel over a pane's head** (:func:`head_lintel`). A lintel carries the wall over an
opening and bears on the wall beyond both jambs (commonly at least 100-150 mm each side [CP]);
a frame ends at its jambs. So a lintel is a straight band along the head that runs on beyond both
jambs, with its own contrast against the wall above it and, beyond the jambs, against the wall
below it. Directly on a window's head its band joins the window's much stronger rim, and the
detection leaves it to the window as the tail of its contrast; it is therefore looked for from the
pane: in the two *flanks* (the wall just beyond each jamb, clear of the window's blur) the
vertical profile must show a band of the heat-loss sign within :data:`HEAD_REACH_M` of the head,
peaking at least :data:`HEAD_MIN_K` and five times the profile's noise above the straight line
between the wall far above and far below it; both flanks at the same height; over the pane the same
rows at least half as strong against the wall above. Its length runs outward from the jambs as far
as the band keeps half of its contrast. Its ψ is the flanks' whole cross-profile against the plane
wall (:func:`._bridges.straight_band_loss`, read where the wall lies on both sides) per pixel of
length, times its length.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy import ndimage

from .._shared import robust_sigma
from ._bridges import LINEAR_CAUSE, linear_figures, straight_band_loss
from ._confidence import BandInputs, confidence_bands
from ._measure import FRSI_PERCENTILE, annual_energy_kwh, excess_heat_w, temperature_factor
from ._shape import Shape
from ._types import Anomaly, severity_score

__all__ = ["RIM_M", "CENTRE_M", "RIM_RATIO", "RIM_STEP_K", "PANE_FILL", "pane_profile", "is_framed_pane",
           "mark_panes", "head_lintel", "HeadBand", "HEAD_REACH_M", "HEAD_MIN_K", "LINTEL_REASON"]

RIM_M = (0.02, 0.20)  # a frame (50-100 mm) and the glass edge (about 50 mm) lie this far inside the outline
CENTRE_M = 0.25  # the middle of the glass: at least this far inside
RIM_RATIO = 1.25
RIM_STEP_K = 0.3
PANE_FILL = 0.85
HEAD_REACH_M = 0.40  # a lintel's band peaks this close above the pane's outline (lintels 150-300 mm deep [CP])
HEAD_MIN_K = 0.10  # ... by at least this much (the detection's smallest contrast)
HEAD_SNR = 5.0  # ... and this many times the noise of its profile
_FLANK_M = (0.02, 0.10)  # the flank: this far beyond the jamb (clear of its blur) ... to this far
_READ_M = (0.60, 0.40)  # the profile is read this far above and below the head
_FAR_M = 0.06  # the wall far above and far below: the mean over this many metres at each end
_STRIP_M = 0.10  # the along-scan compares the band with strips of wall this tall above and below
LINTEL_REASON = ("lintel over an opening: straight band along the head of likely glazing, running on beyond "
                 "both jambs (a frame ends at its jambs)")


def pane_profile(rows: np.ndarray, cols: np.ndarray, loss_k: np.ndarray, pixel_m: float) -> tuple[float, float] | None:
    """``(rim peak, middle)`` of the loss-signed contrast (K) of one area; None when it has no middle.

    ``rows, cols`` are the area's pixels, ``loss_k`` the loss-signed contrast there.
    """
    if rows.size == 0 or pixel_m <= 0:
        return None
    r0, c0 = int(rows.min()), int(cols.min())
    mask = np.zeros((int(rows.max()) - r0 + 3, int(cols.max()) - c0 + 3), bool)
    mask[rows - r0 + 1, cols - c0 + 1] = True
    val = np.zeros(mask.shape)
    val[rows - r0 + 1, cols - c0 + 1] = loss_k
    d = ndimage.distance_transform_edt(mask)[rows - r0 + 1, cols - c0 + 1] * pixel_m
    middle = d >= CENTRE_M
    if middle.sum() < 9:
        return None
    ring = np.floor(d / pixel_m).astype(int)
    lo, hi = int(np.ceil(RIM_M[0] / pixel_m)), int(np.floor(RIM_M[1] / pixel_m))
    means = [float(loss_k[ring == k].mean()) for k in range(lo, hi + 1) if (ring == k).any()]
    if not means:
        return None
    return max(means), float(loss_k[middle].mean())


def is_framed_pane(profile: tuple[float, float] | None, *, rect_fill: float) -> bool:
    """The glazing rule (module docstring) on :func:`pane_profile`'s result."""
    if profile is None or rect_fill < PANE_FILL:
        return False
    rim, middle = profile
    return rim >= RIM_RATIO * max(middle, 0.0) and rim - middle >= RIM_STEP_K


def mark_panes(anomalies: list, labels: np.ndarray, temperature_c: np.ndarray, reference_c: np.ndarray, *,
               pixel_m: float | None, view: str, reason: str, ctx=None) -> list:
    """Anomalies that together make a framed pane, marked ``unclassified`` with ``reason``.

    A window's frame and glass often come out as several touching anomalies of the heat-loss sign
    (the frame bars as narrow bands, the glass as what is left). Touching anomalies of that sign
    (within 2 px) are taken together; when their union fills its bounding box (at least
    :data:`PANE_FILL`) and its contrast profile is a framed pane's (:func:`pane_profile`,
    :func:`is_framed_pane`), each of them becomes ``unclassified`` with ``reason`` and loses its heat,
    length and ψ figures (the heat of a window is not a defect's) and its mould-risk flag (the
    f_Rsi limit is for opaque elements). Anomalies already unclassified
    keep their reason.

    With ``ctx`` (the image's :class:`._records.ImageContext`) the lintel over each pane's head
    (:func:`head_lintel`) is added as a ``thermal_bridge`` with its length and ψ; ``labels`` and
    ``reference_c`` are then written in place over it and the ids renumbered in raster order.
    """
    marked_list = _mark(anomalies, labels, temperature_c, reference_c, pixel_m=pixel_m, view=view, reason=reason)
    if ctx is None or pixel_m is None or view == "roof":
        return marked_list
    return _with_lintels(marked_list, labels, reference_c, ctx=ctx, reason=reason)


def _mark(anomalies: list, labels: np.ndarray, temperature_c: np.ndarray, reference_c: np.ndarray, *,
          pixel_m: float | None, view: str, reason: str) -> list:
    """:func:`mark_panes` without the lintels."""
    if pixel_m is None or view == "roof" or not anomalies:
        return list(anomalies)
    kind = "cold" if view == "interior" else "warm"
    sign = -1.0 if view == "interior" else 1.0
    ids = [a.anomaly for a in anomalies if a.kind == kind and a.cause != "unclassified"]
    if not ids:
        return list(anomalies)
    own = np.isin(labels, ids)
    groups, n = ndimage.label(ndimage.binary_dilation(own, iterations=2))
    marked: dict[int, str] = {}
    for g in range(1, n + 1):
        union = own & (groups == g)
        members = sorted(int(i) for i in np.unique(labels[union]))
        rows, cols = np.nonzero(union)
        box = (rows.max() - rows.min() + 1) * (cols.max() - cols.min() + 1)
        if rows.size / box < PANE_FILL:
            continue
        loss = sign * (temperature_c[rows, cols] - reference_c[rows, cols])
        ok = np.isfinite(loss)
        profile = pane_profile(rows[ok], cols[ok], loss[ok], pixel_m)
        if is_framed_pane(profile, rect_fill=rows.size / box):
            text = (f"{reason}; {len(members)} touching area(s) making a straight-edged rectangle whose rim (frame, "
                    f"glass edge) shows {profile[0]:.1f} K against {profile[1]:.1f} K in its middle: a framed pane "
                    "(a void is strongest in its middle); its heat is that of the window, not counted as a defect's")
            marked.update(dict.fromkeys(members, text))
    return [replace(a, cause="unclassified", reason=marked[a.anomaly], excess_w=None, excess_low_w=None,
                    excess_high_w=None, excess_kwh_year=None, length_m=None, psi_w_mk=None, psi_low_w_mk=None,
                    psi_high_w_mk=None, mould_risk=None, severity_score=1e-6 * min(a.area_px, 9.99e5))
            if a.anomaly in marked else a for a in anomalies]


@dataclass(frozen=True)
class HeadBand:
    """A lintel's band over a pane's head: first and last row and column, its loss-signed contrast (K),
    and the flanks' column spans (first, last) where the wall lies on both of its sides."""

    rows: tuple[int, int]
    cols: tuple[int, int]
    amp_k: float
    flanks: tuple[tuple[int, int], ...]


def _flank_band(block: np.ndarray, head: int, pixel_m: float) -> tuple[int, int, float] | None:
    """``(first row, last row, contrast)`` of a band in a flank's loss-signed block (rows from the read's
    top; ``head``: the pane's top row there), or None.

    The profile (median over the flank's columns) against the straight line between its far ends
    (:data:`_FAR_M` each): the band peaks within :data:`HEAD_REACH_M` above the head, by at least
    :data:`HEAD_MIN_K` and :data:`HEAD_SNR` times the profile's noise, and falls to half of that on
    both sides before the far ends (wall above it and below it).
    """
    p = np.median(block, axis=1)
    far = max(2, int(round(_FAR_M / pixel_m)))
    if p.size < 2 * far + 6:
        return None
    x_a, x_b = 0.5 * (far - 1), p.size - 1 - 0.5 * (far - 1)
    a, b = float(p[:far].mean()), float(p[-far:].mean())
    q = p - (a + (b - a) * (np.arange(p.size) - x_a) / (x_b - x_a))
    noise = robust_sigma(np.diff(p)) / math.sqrt(2.0)
    q = ndimage.median_filter(q, size=3, mode="nearest")
    lo, hi = max(far, head - int(round(HEAD_REACH_M / pixel_m))), min(p.size - far, head + 2)
    if hi <= lo:
        return None
    k = lo + int(np.argmax(q[lo:hi]))
    amp = float(q[k])
    if amp < max(HEAD_MIN_K, HEAD_SNR * noise):
        return None
    top, bot = k, k
    while top > 0 and q[top - 1] >= 0.5 * amp:
        top -= 1
    while bot < p.size - 1 and q[bot + 1] >= 0.5 * amp:
        bot += 1
    if top < far or bot >= p.size - far or bot - top < 1:
        return None
    return top, bot, amp


def _strips(top: int, bot: int, n_rows: int, pixel_m: float) -> tuple[tuple[int, int], tuple[int, int]]:
    """Rows ``[first, stop)`` of the wall strips above and below a band (a quarter of its height clear of
    it, :data:`_STRIP_M` tall), clipped to the frame."""
    strip, gap = max(2, int(round(_STRIP_M / pixel_m))), max(2, (bot - top + 1) // 4)
    return (max(0, top - gap - strip), max(0, top - gap)), (min(n_rows, bot + 1 + gap), min(n_rows, bot + 1 + gap + strip))


def head_lintel(temperature_c: np.ndarray, box: tuple[int, int, int, int], *, loss_sign: float,
                pixel_m: float) -> HeadBand | None:
    """The lintel's band over the head of the pane in ``box`` (first row, last row, first column, last
    column), or None (module docstring). ``loss_sign`` is +1 when heat loss makes the surface warmer
    (seen from outside), −1 from inside."""
    t = temperature_c
    m, n = t.shape
    r0, _, c0, c1 = box
    g = max(3, int(math.ceil(_FLANK_M[0] / pixel_m)))
    w = max(3, int(round((_FLANK_M[1] - _FLANK_M[0]) / pixel_m)))
    ra, rb = max(0, r0 - int(round(_READ_M[0] / pixel_m))), min(m, r0 + int(round(_READ_M[1] / pixel_m)) + 1)
    flanks = ((c0 - g - w, c0 - g - 1), (c1 + 1 + g, c1 + g + w))
    if flanks[0][0] < 0 or flanks[1][1] >= n:
        return None
    found = [_flank_band(loss_sign * np.asarray(t[ra:rb, a:b + 1], float), r0 - ra, pixel_m) for a, b in flanks]
    if found[0] is None or found[1] is None:
        return None
    (ta, ba, amp_a), (tb, bb, amp_b) = found
    if abs(0.5 * (ta + ba) - 0.5 * (tb + bb)) > max(2.0, 0.5 * max(ba - ta, bb - tb)):
        return None  # not one band at one height
    top, bot = ra + int(round(0.5 * (ta + tb))), ra + int(round(0.5 * (ba + bb)))
    amp = min(amp_a, amp_b)
    above, below = _strips(top, bot, m, pixel_m)
    if above[1] - above[0] < 3 or below[1] - below[0] < 3 or min(bot, r0 - 1) < top:
        return None
    inner = slice(c0 + g, c1 + 1 - g)
    over = loss_sign * (float(np.median(t[top:min(bot, r0 - 1) + 1, inner])) - float(np.median(t[above[0]:above[1], inner])))
    if over < 0.5 * amp:
        return None  # over the pane the band is not there: the flanks' bands are something else
    band = loss_sign * np.asarray(t[top:bot + 1], float).mean(axis=0)
    wall = loss_sign * 0.5 * (np.asarray(t[above[0]:above[1]], float).mean(axis=0)
                              + np.asarray(t[below[0]:below[1]], float).mean(axis=0))
    con = ndimage.median_filter(band - wall, size=5, mode="nearest")
    left, right = flanks[0][1], flanks[1][0]
    while left > 0 and con[left - 1] >= 0.5 * amp:
        left -= 1
    while right < n - 1 and con[right + 1] >= 0.5 * amp:
        right += 1
    if left > flanks[0][0] or right < flanks[1][1]:
        return None  # it does not run on over the flanks: not a band bearing beyond both jambs
    return HeadBand((top, bot), (left, right), amp, ((left, flanks[0][1]), (flanks[1][0], right)))


def _band_shape(rows: tuple[int, int], cols: tuple[int, int], area_px: int) -> Shape:
    """The shape of a horizontal band's rectangle (what :mod:`._bridges` reads of it)."""
    length, width = float(cols[1] - cols[0] + 1), float(rows[1] - rows[0] + 1)
    return Shape(area_px=area_px, perimeter_px=int(2 * (length + width)), length_px=length, width_px=width,
                 elongation=length / width, rect_fill=area_px / (length * width), solidity=area_px / (length * width),
                 orientation_deg=0.0, centroid_row=0.5 * (rows[0] + rows[1]), centroid_col=0.5 * (cols[0] + cols[1]),
                 transition_px=0.0, nonuniformity=0.0, taper=1.0)


def _lintel_record(band: HeadBand, own: np.ndarray, reference_c: np.ndarray, pane_cols: tuple[int, int], *,
                   ctx, anomaly_id: int) -> Anomaly:
    """The band's :class:`Anomaly` (``thermal_bridge``); writes its reference into ``reference_c``."""
    meta = ctx.meta
    cam, surf, air, an = meta.camera, meta.surface, meta.air, meta.analysis
    t = ctx.temperature_c
    sign = -1.0 if surf.view == "interior" else 1.0
    (top, bot), (left, right) = band.rows, band.cols
    (a0, a1), (b0, b1) = _strips(top, bot, t.shape[0], ctx.pixel_m)
    above = np.asarray(t[a0:a1], float).mean(axis=0)
    below = np.asarray(t[b0:b1], float).mean(axis=0)
    cols = np.arange(t.shape[1])
    on_pane = (cols >= pane_cols[0]) & (cols <= pane_cols[1])
    wall = np.where(on_pane, above, 0.5 * (above + below))  # over the pane the wall lies above it only
    rows, cc = np.nonzero(own)
    vals = np.asarray(t[rows, cc], float)
    refs = wall[cc]
    reference_c[rows, cc] = refs
    shape = _band_shape(band.rows, band.cols, int(vals.size))
    # the flanks' whole cross-profile per pixel of length, over the band's length
    loss, n_read = 0.0, 0
    for a, b in band.flanks:
        got = straight_band_loss(t, shape, (a, b), loss_sign=-sign, pixel_m=ctx.pixel_m)
        if got is not None and got > 0:
            loss, n_read = loss + got, n_read + b - a + 1
    loss_sum = loss / n_read * shape.length_px if n_read else float(sign * (vals - refs).sum())
    mean_c, reference = float(vals.mean()), float(refs.mean())
    area_m2 = vals.size * ctx.pixel_area_m2 if ctx.pixel_area_m2 is not None else None
    excess_w = None if ctx.pixel_area_m2 is None else excess_heat_w(
        h_w_m2k=ctx.h_w_m2k, loss_sum_kpx=loss_sum, pixel_area_m2=ctx.pixel_area_m2)
    kwh = annual_energy_kwh(excess_w, inside_c=air.inside_c, outside_c=air.outside_c, degree_days=an.degree_days)
    f_rsi = mould = None
    if surf.view == "interior":
        f_rsi = temperature_factor(float(np.percentile(vals, FRSI_PERCENTILE)), inside_c=air.inside_c, outside_c=air.outside_c)
        mould = None if f_rsi is None else bool(f_rsi < an.frsi_limit)
    bands = BandInputs(
        area_px=int(vals.size), perimeter_px=shape.perimeter_px, loss_sum_kpx=loss_sum,
        thermal_area_px=int(vals.size), pixel_area_m2=ctx.pixel_area_m2, h_convective_w_m2k=ctx.h_convective_w_m2k,
        h_radiative_w_m2k=ctx.h_radiative_w_m2k, emissivity=surf.emissivity,
        emissivity_uncertainty_abs=surf.emissivity_uncertainty_abs, distance_uncertainty_rel=an.distance_uncertainty_rel,
        h_uncertainty_rel=an.h_uncertainty_rel, netd_k=cam.netd_k,
        reference_sigma_k=float(robust_sigma((np.asarray(t[a0:a1, left:right + 1], float) - above[left:right + 1]).ravel())),
    )
    a_lo, a_hi, w_lo, w_hi = confidence_bands(bands, seed=an.seed, anomaly_id=anomaly_id, area_m2=area_m2,
                                              excess_w=excess_w)
    length, psi, psi_lo, psi_hi = linear_figures(
        [[shape]], cause=LINEAR_CAUSE, pixel_m=ctx.pixel_m, tilt_deg=cam.tilt_deg, excess_w=excess_w,
        delta_air_k=ctx.delta_air_k, bands=bands, seed=an.seed, anomaly_id=anomaly_id)
    bearing = min(pane_cols[0] - left, right - pane_cols[1]) * ctx.pixel_m
    reason = (f"{LINTEL_REASON}; {sign * (mean_c - reference):+.2f} K against the wall above, "
              f"running on at least {bearing:.2f} m beyond the jambs")
    return Anomaly(
        anomaly=anomaly_id, kind="warm" if mean_c >= reference else "cold", cause=LINEAR_CAUSE, reason=reason,
        area_px=int(vals.size), area_m2=area_m2, area_low_m2=a_lo, area_high_m2=a_hi, mean_c=mean_c,
        min_c=float(vals.min()), max_c=float(vals.max()), reference_c=reference, delta_k=mean_c - reference,
        excess_w=excess_w, excess_low_w=w_lo, excess_high_w=w_hi, excess_kwh_year=kwh, f_rsi=f_rsi,
        mould_risk=mould, centroid_row=float(rows.mean()), centroid_col=float(cc.mean()),
        bbox_row0=int(rows.min()), bbox_col0=int(cc.min()), bbox_row1=int(rows.max()) + 1,
        bbox_col1=int(cc.max()) + 1, severity=0,
        severity_score=severity_score(mould_risk=mould, excess_kwh_year=kwh, excess_w=excess_w, area_px=int(vals.size)),
        length_m=length, psi_w_mk=psi, psi_low_w_mk=psi_lo, psi_high_w_mk=psi_hi,
    )


def _with_lintels(anomalies: list, labels: np.ndarray, reference_c: np.ndarray, *, ctx, reason: str) -> list:
    """``anomalies`` and the lintels over the panes' heads, ids renumbered in raster order (``labels`` in place)."""
    panes = [a.anomaly for a in anomalies if a.cause == "unclassified" and a.reason.startswith(reason)]
    if not panes:
        return anomalies
    sign = -1.0 if ctx.meta.surface.view == "interior" else 1.0
    bridges = [a.anomaly for a in anomalies if a.cause == LINEAR_CAUSE]
    glass = np.isin(labels, panes)
    groups, n = ndimage.label(ndimage.binary_dilation(glass, iterations=2))
    found: list[tuple[HeadBand, np.ndarray, tuple[int, int]]] = []
    for g in range(1, n + 1):
        rows, cols = np.nonzero(glass & (groups == g))
        box = (int(rows.min()), int(rows.max()), int(cols.min()), int(cols.max()))
        band = head_lintel(ctx.temperature_c, box, loss_sign=sign, pixel_m=ctx.pixel_m)
        if band is None:
            continue
        rect = np.zeros(labels.shape, bool)
        rect[band.rows[0]:band.rows[1] + 1, band.cols[0]:band.cols[1] + 1] = True
        if np.isin(labels[rect], bridges).mean() >= 0.3:
            continue  # found already
        own = rect & (labels == 0)
        if int(own.sum()) >= 9:
            found.append((band, own, (box[2], box[3])))
    if not found:
        return anomalies
    # ids in raster order of the top-left corner, the lintels' records made with their final ids (the
    # bands' Monte Carlo draws are seeded by the id)
    items = [(a.bbox_row0, a.bbox_col0, a.anomaly, a) for a in anomalies]
    for band, own, pane_cols in found:
        rr, cc = np.nonzero(own)
        items.append((int(rr.min()), int(cc.min()), 1 << 30, (band, own, pane_cols)))
    items.sort(key=lambda it: it[:3])
    old_to_new = np.zeros(int(labels.max()) + 1, np.int32)
    out = []
    for new_id, (*_, item) in enumerate(items, start=1):
        if isinstance(item, Anomaly):
            old_to_new[item.anomaly] = new_id
            out.append(replace(item, anomaly=new_id))
    relabelled = old_to_new[labels]
    for new_id, (*_, item) in enumerate(items, start=1):
        if not isinstance(item, Anomaly):
            band, own, pane_cols = item
            relabelled[own] = new_id
            out.append(_lintel_record(band, own, reference_c, pane_cols, ctx=ctx, anomaly_id=new_id))
    labels[...] = relabelled
    return sorted(out, key=lambda a: a.anomaly)
