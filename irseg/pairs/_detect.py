"""Leaks in the difference map: significance, one anomaly per leak, its extent and measures.

Significance. ΔT is smoothed by a Gaussian (:func:`~._difference.smoothing_px`: 1 px, more for a
noisy pair); the "extra"
change is ``-ΔT`` for an inside view (leakage cools) and ``+ΔT`` for an outside view (leakage
warms). Its standard deviation at each pixel combines the noise of both images and the
residual misregistration times the local gradient of the reference (a step seen 0.3 px off
looks like a change): ``σ² = σ_noise² + (rms_px · |∇T_ref|)²``.

One anomaly per leak. Candidate peaks are the local maxima of the extra change (15 px
window) that are significant (:data:`SEED_Z` σ and at least :data:`MIN_PEAK_K`), taken from
the strongest down. A peak is a leak of its own unless it is a shoulder of a stronger one:
when the pixels above ``peak − h`` (``h = max(3 σ, half the peak)``) around it reach a leak
already found, it is skipped: two leaks are two when the cooling between them falls below half
the weaker one's peak (a noise bump on a jet's fading tail does not).

Extent rule (one rule, every leak). The pixels connected to the peak whose smoothed extra
change is at least :data:`EXTENT_FRACTION` (30 %) of the peak's, not already part of a
stronger leak, and significant at :data:`GROW_Z` σ. Thirty per cent rather than the half
maximum: a jet of cold air fades slowly along the wall, and the half-maximum contour keeps
only the part next to its entry point (the apex of a fan), not the area it cools.
"""

from __future__ import annotations

import math

import numpy as np

from ._types import PairAnomaly

__all__ = ["detect_leaks", "SEED_Z", "GROW_Z", "MIN_PEAK_K", "EXTENT_FRACTION"]

SEED_Z = 5.0
GROW_Z = 2.0
#: Smallest peak of extra cooling (warming) that counts as a leak, K.
MIN_PEAK_K = 0.3
#: The extent's level as a fraction of the leak's peak extra cooling.
EXTENT_FRACTION = 0.3
_MIN_AREA_PX = 9
_PEAK_WINDOW_PX = 15
_JET_ELONGATION = 1.8
#: A peak is a leak of its own only when it stands this fraction of its value above the saddle to a stronger one.
_SHOULDER = 0.5


def _components(binary: np.ndarray) -> np.ndarray:
    import cv2

    return cv2.connectedComponents(binary.astype(np.uint8), connectivity=8)[1]


def _pattern(rows: np.ndarray, cols: np.ndarray, peak: tuple[int, int]) -> tuple[str, str]:
    """``("jet", direction)`` for an elongated extent, ``("spot", "")`` otherwise."""
    if rows.size < 3:
        return "spot", ""
    cov = np.cov(np.vstack([rows, cols]).astype(float))
    evals = np.linalg.eigvalsh(cov)
    if evals[0] <= 0 or math.sqrt(evals[1] / evals[0]) < _JET_ELONGATION:
        return "spot", ""
    d_row = float(rows.mean()) - peak[0]
    d_col = float(cols.mean()) - peak[1]
    if abs(d_row) >= abs(d_col):
        direction = "falling down the wall" if d_row > 0 else "rising up the wall"
    else:
        direction = "spreading sideways along the wall"
    return "jet", direction


def _reason(pattern: str, direction: str, sign: int, pressure_pa: float, minutes: float | None,
            mean_k: float, peak_k: float) -> str:
    change = "cooled" if sign > 0 else "warmed"
    what = (f"a stream {direction} from its entry point" if pattern == "jet"
            else "a spot around one entry point")
    when = f" after {minutes:g} min" if minutes is not None else ""
    return (f"the surface {change} under a {pressure_pa:g} Pa pressure difference{when}: {what}, "
            f"{abs(mean_k):.1f} K on average, {abs(peak_k):.1f} K at most, against the shot at ambient pressure")


def detect_leaks(difference_k: np.ndarray, smooth_k: np.ndarray, sigma_k: np.ndarray, *, sign: int,
                 pressed_c: np.ndarray, reference_c: np.ndarray, first_id: int, pressure_pa: float,
                 minutes: float | None, pixel_area_m2: float | None,
                 own_labels: np.ndarray | None = None) -> tuple[np.ndarray, tuple[PairAnomaly, ...]]:
    """The leaks of one pair: a label image and one record each (see the module notes).

    Parameters
    ----------
    difference_k, smooth_k : (M, N) float ndarray
        ΔT with the drift removed, and its smoothed version, K (NaN outside the overlap).
    sigma_k : (M, N) float ndarray
        Standard deviation of ``smooth_k`` at each pixel, K.
    sign : {1, -1}
        1 when leakage cools the surface (inside view), -1 when it warms it.
    pressed_c, reference_c : (M, N) float ndarray
        The pressurised image and the registered reference, °C.
    first_id : int
        The first anomaly id (after the image's single-image anomalies).
    pressure_pa, minutes, pixel_area_m2
        For the records.
    own_labels : (M, N) int ndarray, optional
        The pressurised image's own anomaly ids: a leak that covers some of them names them in its reason.

    Returns
    -------
    labels : (M, N) int32 ndarray
    anomalies : tuple of PairAnomaly
    """
    from scipy import ndimage

    extra = np.where(np.isfinite(smooth_k), -sign * smooth_k, -np.inf).astype(np.float32)
    z = extra / np.maximum(sigma_k, 1e-6)
    grow = z >= GROW_Z
    local_max = (extra == ndimage.maximum_filter(extra, size=_PEAK_WINDOW_PX)) & (z >= SEED_Z) & (extra >= MIN_PEAK_K)
    peaks = sorted(zip(*np.nonzero(local_max)), key=lambda p: -float(extra[p]))
    labels = np.zeros(extra.shape, np.int32)
    out: list[PairAnomaly] = []
    for peak in peaks:
        if labels[peak]:
            continue
        value = float(extra[peak])
        h = max(3.0 * float(sigma_k[peak]), _SHOULDER * value)
        shoulder = _components(extra >= value - h)
        if np.any(labels[shoulder == shoulder[peak]] > 0):
            continue  # a shoulder of a stronger leak
        comp = _components((extra >= EXTENT_FRACTION * value) & grow & (labels == 0))
        if comp[peak] == 0:
            continue
        region = comp == comp[peak]
        if int(region.sum()) < _MIN_AREA_PX:
            continue
        ident = first_id + len(out)
        labels[region] = ident
        record = _measure(region, ident, peak, value, difference_k, sign, pressed_c, reference_c, pressure_pa,
                          minutes, pixel_area_m2)
        if own_labels is not None:
            record = _cross_reference(record, region, own_labels)
        out.append(record)
    return labels, tuple(out)


def _cross_reference(record: PairAnomaly, region: np.ndarray, own_labels: np.ndarray) -> PairAnomaly:
    """The leak's reason naming the image's own anomalies it covers (one place, two findings)."""
    from dataclasses import replace

    ids = [int(i) for i in np.unique(own_labels[region]) if i]
    if not ids:
        return record
    names = ", ".join(str(i) for i in ids)
    return replace(record, reason=f"{record.reason}; the image alone shows this place as anomal"
                                  f"{'y' if len(ids) == 1 else 'ies'} {names}")


def _measure(region: np.ndarray, ident: int, peak: tuple[int, int], peak_k: float, difference_k: np.ndarray,
             sign: int, pressed_c: np.ndarray, reference_c: np.ndarray, pressure_pa: float,
             minutes: float | None, pixel_area_m2: float | None) -> PairAnomaly:
    rows, cols = np.nonzero(region)
    diff = difference_k[region].astype(np.float64)
    cooling = float(np.nanmean(-diff))  # negative when the surface warmed (outside view)
    pattern, direction = _pattern(rows, cols, (int(peak[0]), int(peak[1])))
    t = pressed_c[region].astype(np.float64)
    area_px = int(rows.size)
    return PairAnomaly(
        anomaly=int(ident),
        cause="air_leakage",
        kind="cold" if sign > 0 else "warm",
        reason=_reason(pattern, direction, sign, pressure_pa, minutes, cooling, peak_k),
        pattern=pattern,
        area_px=area_px,
        area_m2=None if pixel_area_m2 is None else float(area_px * pixel_area_m2),
        cooling_k=cooling,
        cooling_max_k=float(sign * peak_k),
        mean_c=float(t.mean()),
        min_c=float(t.min()),
        max_c=float(t.max()),
        reference_c=float(np.nanmean(reference_c[region])),
        delta_k=float(np.nanmean(diff)),
        centroid_row=float(rows.mean()),
        centroid_col=float(cols.mean()),
        bbox_row0=int(rows.min()),
        bbox_col0=int(cols.min()),
        bbox_row1=int(rows.max()) + 1,
        bbox_col1=int(cols.max()) + 1,
        pressure_pa=float(pressure_pa),
    )
