"""Heat emitters seen from inside: radiators, pipes, lamps, appliances.

A surface warmer than the inside air cannot be heated by the room: in a heating season every
part of an outer wall or ceiling seen from inside is colder than the air, so a surface warmer
than the air by :data:`EMITTER_MARGIN_K` is a heat source. Such pixels are found before the
analysis (areas above the air by the margin, of at least ``MIN_SPOT_PX`` pixels, grown by
:data:`EMITTER_GROW_PX` for the camera's blur) and reported as ``unclassified`` anomalies with the
reason :data:`EMITTER_REASON`. For the analysis of everything else their temperatures (and the
segmentation's smooth field) are replaced by the harmonic fill of the wall around them
(:func:`fill_emitters`: Laplace's equation with the surrounding pixels as boundary values): they
carry no value of their own, so they can neither pull the sound surface nor join a defect, and
the sound surface stays continuous (a large hole would weaken it around the emitter); the filled
pixels are therefore never left out of the second sound surface either (a fill taking the warmth of
the plume above it is significant, yet no measurement). Their
reference is reported as NaN. The fainter warm plume above a radiator is not filled: the analysis
finds it as a warm area seen from inside, which is never a heat-loss defect, and keeps it out of
the sound reference as it does every significant area.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np
from scipy import ndimage, sparse
from scipy.sparse.linalg import spsolve

from ._geometry import MIN_SPOT_PX
from ._types import Anomaly, severity_score

__all__ = ["EMITTER_MARGIN_K", "EMITTER_GROW_PX", "EMITTER_MAX_FRACTION", "EMITTER_REASON", "emitter_mask",
           "emitter_warning", "emitter_records",
           "merge_records", "fill_emitters", "FilledSegmentation", "with_emitters"]

EMITTER_MARGIN_K = 3.0  # warmer than the inside air by this much: a heat source
EMITTER_GROW_PX = 3  # the camera's blur around a hot surface
EMITTER_MAX_FRACTION = 0.25  # warmer than the air over more of the frame: the inside air is wrong, not emitters
EMITTER_REASON = "heat source"
_RING_PX = 8  # width of the ring whose median is an emitter's reference
_BAND_ROWS = 256  # rows compared at a time in float64 (memory, issue 15)


def emitter_mask(t: np.ndarray, valid: np.ndarray, *, view: str, inside_c: float | None) -> np.ndarray:
    """Pixels of heat emitters and their warm surroundings (interior views with a known inside air)."""
    out = np.zeros(t.shape, bool)
    if view != "interior" or inside_c is None:
        return out
    core = _warmer(t, float(inside_c) + EMITTER_MARGIN_K)
    core &= valid
    if not core.any():
        return out
    lab, n = ndimage.label(core)
    sizes = np.bincount(lab.ravel(), minlength=n + 1)
    keep = sizes >= MIN_SPOT_PX
    keep[0] = False
    core = keep[lab]
    if not core.any():
        return out
    return ndimage.binary_dilation(core, iterations=EMITTER_GROW_PX) & valid


def _warmer(t: np.ndarray, limit_c: float) -> np.ndarray:
    """``t > limit_c`` compared in float64, a band of rows at a time (no float64 copy of the frame)."""
    out = np.empty(t.shape, bool)
    for r0 in range(0, t.shape[0], _BAND_ROWS):
        np.greater(np.asarray(t[r0 : r0 + _BAND_ROWS], dtype=float), limit_c, out=out[r0 : r0 + _BAND_ROWS])
    return out


def emitter_warning(emitters: np.ndarray, valid: np.ndarray, *, inside_c: float) -> str | None:
    """A warning when the emitters would cover more than :data:`EMITTER_MAX_FRACTION` of the frame.

    In a heating season a wall seen from inside is colder than the air; warmer over a large part of
    the frame means the inside air temperature is wrong (or the sun shines on it): nothing is then
    taken as an emitter.
    """
    n = int(valid.sum())
    if n == 0 or emitters.sum() <= EMITTER_MAX_FRACTION * n:
        return None
    return (f"the surface is warmer than [air] inside_c = {inside_c:.1f} °C + {EMITTER_MARGIN_K:.0f} K over "
            f"{100 * emitters.sum() / n:.0f} % of the frame: check the inside air temperature (a wall seen from "
            "inside is colder than the room in the heating season); no area was taken as a heat source")


def fill_emitters(field: np.ndarray, emitters: np.ndarray) -> np.ndarray:
    """``field`` with the ``emitters`` pixels replaced by the harmonic fill of their surroundings.

    Solves the 5-point Laplace equation on the emitter pixels with the other pixels as boundary
    values (an emitter touching the frame's edge has a zero-gradient edge there).
    """
    out = np.array(field, dtype=float, copy=True)
    idx = np.flatnonzero(emitters.ravel())
    if idx.size == 0:
        return out
    m, n = field.shape
    number = np.full(m * n, -1, np.int64)
    number[idx] = np.arange(idx.size)
    r, c = np.divmod(idx, n)
    rows, cols, vals = [], [], []
    rhs = np.zeros(idx.size)
    diag = np.zeros(idx.size)
    flat = out.ravel()
    for dr, dc in ((-1, 0), (1, 0), (0, -1), (0, 1)):
        rr, cc = r + dr, c + dc
        inside = (rr >= 0) & (rr < m) & (cc >= 0) & (cc < n)
        diag += inside
        nb = np.where(inside, rr * n + cc, 0)
        unknown = inside & (number[nb] >= 0)
        rows.append(np.flatnonzero(unknown))
        cols.append(number[nb[unknown]])
        vals.append(np.full(int(unknown.sum()), -1.0))
        known = inside & ~unknown
        rhs[known] += flat[nb[known]]
    a = sparse.csr_matrix((np.concatenate(vals + [diag]),
                           (np.concatenate(rows + [np.arange(idx.size)]), np.concatenate(cols + [np.arange(idx.size)]))),
                          shape=(idx.size, idx.size))
    flat[idx] = spsolve(a.tocsc(), rhs)
    return out


@dataclass(frozen=True)
class FilledSegmentation:
    """A segmentation whose smooth field is filled over the emitters (what ``analyse`` reads)."""

    u: np.ndarray
    edges: np.ndarray
    labels: np.ndarray
    params: Any = None
    filled: np.ndarray | None = None  # (M, N) bool: the emitters' pixels, filled rather than measured


def emitter_records(
    t: np.ndarray, emitters: np.ndarray, valid: np.ndarray, *, inside_c: float, pixel_area_m2: float | None,
) -> list[tuple[Anomaly, np.ndarray]]:
    """One ``unclassified`` anomaly per connected emitter area (id 0: set by :func:`merge_records`).

    Each comes with its pixel mask. Its reference is the median of the valid pixels in a ring
    around it; it carries no heat figure (a heat source is not a loss through the envelope).
    """
    lab, n = ndimage.label(emitters)
    out = []
    for i, sl in enumerate(ndimage.find_objects(lab), start=1):
        if sl is None:
            continue
        own = lab == i
        ring = ndimage.binary_dilation(own, iterations=_RING_PX) & ~emitters & valid
        vals = np.asarray(t[own], dtype=float)
        ref = float(np.median(np.asarray(t[ring], dtype=float))) if ring.any() else float(inside_c)
        rows, cols = np.nonzero(own)
        peak = float(vals.max())
        reason = (f"{EMITTER_REASON}: up to {peak:.1f} °C, warmer than the inside air ({inside_c:.1f} °C): radiator, "
                  "pipe, lamp, appliance or sun on the surface; not a heat-loss defect, and left out of "
                  "the sound reference")
        area_px = int(vals.size)
        out.append((Anomaly(
            anomaly=0, kind="warm", cause="unclassified", reason=reason, area_px=area_px,
            area_m2=None if pixel_area_m2 is None else area_px * pixel_area_m2, area_low_m2=None, area_high_m2=None,
            mean_c=float(vals.mean()), min_c=float(vals.min()), max_c=peak, reference_c=ref,
            delta_k=float(vals.mean()) - ref, excess_w=None, excess_low_w=None, excess_high_w=None,
            excess_kwh_year=None, f_rsi=None, mould_risk=None,
            centroid_row=float(rows.mean()), centroid_col=float(cols.mean()),
            bbox_row0=int(rows.min()), bbox_col0=int(cols.min()), bbox_row1=int(rows.max()) + 1,
            bbox_col1=int(cols.max()) + 1, severity=0,
            severity_score=severity_score(mould_risk=None, excess_kwh_year=None, excess_w=None, area_px=area_px),
        ), own))
    return out


def merge_records(anomalies: tuple[Anomaly, ...], labels: np.ndarray,
                  extra: list[tuple[Anomaly, np.ndarray]]) -> tuple[list[Anomaly], np.ndarray]:
    """The analysis' anomalies and ``extra`` ones, ids renumbered in raster order of their top-left corner.

    Returns the records (severity 0, to be ranked again) and the relabelled label image.
    """
    items = [(a, None) for a in anomalies] + list(extra)
    items.sort(key=lambda it: (it[0].bbox_row0, it[0].bbox_col0, it[0].anomaly if it[1] is None else 1 << 30))
    old_to_new = np.zeros(int(labels.max()) + 1 if labels.size else 1, np.int32)
    out_labels = np.zeros_like(labels)
    records = []
    for new_id, (a, own) in enumerate(items, start=1):
        if own is None:
            old_to_new[a.anomaly] = new_id
        records.append(replace(a, anomaly=new_id, severity=0))
    keep = labels > 0
    out_labels[keep] = old_to_new[labels[keep]]
    for new_id, (a, own) in enumerate(items, start=1):
        if own is not None:
            out_labels[own & (out_labels == 0)] = new_id
    return records, out_labels


def with_emitters(frame, seg, meta, run):
    """``run(frame, seg, meta)`` (the analysis) with the heat emitters taken care of.

    Interior views with a known inside air: the emitters are filled (temperature and the
    segmentation's smooth field, :func:`fill_emitters`) before ``run``, then reported
    (:func:`emitter_records`), ids renumbered (:func:`merge_records`), their reference NaN. When the
    would-be emitters cover more than :data:`EMITTER_MAX_FRACTION` of the frame, ``run`` sees the
    frame unchanged and the result carries :func:`emitter_warning`.
    """
    from ._records import rank_by_severity

    t = np.asarray(frame.temperature_c)
    if t.dtype.kind != "f":
        t = t.astype(float)
    if getattr(frame.mask, "shape", None) != t.shape:
        return run(frame, seg, meta)  # the analysis names the shape mismatch
    if meta.surface.view != "interior" or meta.air.inside_c is None:
        return run(frame, seg, meta)  # no emitter is looked for: no mask is held through the analysis
    # float32 temperatures stay float32 here: no float64 copy of the frame is held through the analysis
    # (the emitters are told in float64, band by band; memory, issue 15)
    ok = ~np.asarray(frame.mask, dtype=bool) & np.isfinite(t)
    emit = emitter_mask(t, ok, view=meta.surface.view, inside_c=meta.air.inside_c)
    if not emit.any():
        del ok, emit
        return run(frame, seg, meta)
    too_much = emitter_warning(emit, ok, inside_c=meta.air.inside_c)
    if too_much is not None:
        del ok, emit
        res = run(frame, seg, meta)
        return replace(res, warnings=res.warnings + (too_much,))
    del ok  # formed again for the records
    edges = getattr(seg, "edges", None)
    edges = np.zeros(t.shape, bool) if edges is None else np.asarray(edges, dtype=bool) & ~emit
    filled = FilledSegmentation(fill_emitters(getattr(seg, "u", t), emit), edges, np.asarray(seg.labels),
                                getattr(seg, "params", None), emit)
    res = run(replace(frame, temperature_c=fill_emitters(t, emit)), filled, meta)
    del filled
    ok = ~np.asarray(frame.mask, dtype=bool) & np.isfinite(t)
    extra = emitter_records(t, emit, ok, inside_c=float(meta.air.inside_c), pixel_area_m2=res.pixel_area_m2)
    records, labels = merge_records(res.anomalies, res.labels, extra)
    return replace(res, anomalies=rank_by_severity(records), labels=labels,
                   reference_c=np.where(emit, np.nan, res.reference_c))
