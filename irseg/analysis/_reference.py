"""Sound surface and local sound reference.

Two steps:

1. *Which regions are sound.* The region holding the area-weighted median
   temperature level seeds the sound set (a thermogram of an envelope element is
   framed so that most of it is sound surface). A robust plane ``a + b·row + c·col``
   is fitted to the sound pixels (in the segmentation's smooth field ``u``); every
   region whose mean lies within the significance threshold of that trend joins
   the sound set, and the trend is refitted, until nothing changes. All other
   regions are *candidates*.
2. *Local reference of a candidate.* A ring of sound pixels around the region,
   leaving a gap over the jump band, excluding masked pixels, jump-set pixels and
   every non-sound region, is fitted with a robust plane in ``u``; the plane
   evaluated over the region is the local sound reference. A plane follows the
   linear part of stratification, corner and sky-view gradients, which a median
   of the ring would not. Where the ring surrounds the region on both axes and
   the local sound surface follows the ring's shape clearly better than a plane
   (a ring running down into the lens shading of the frame's corners), the
   reference is the sound surface itself: it carries the shading and passes
   under the region between sound data on all sides, with the anomalies' soft
   tails held out, which the ring, just beyond the soft rim, is not.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._shared import MAD_TO_SIGMA, robust_sigma

__all__ = [
    "FieldWrites",
    "Plane",
    "RingReference",
    "SurfaceReference",
    "fit_plane",
    "find_sound_regions",
    "ring_reference",
    "rim_extent_px",
]

_MAX_TREND_SAMPLES = 8_000
_MAX_RING_SAMPLES = 4_000
_MIN_RING_PX = 24
_BAND_ROWS = 256  # rows of a mask searched at a time for sample pixels
SURFACE_PREFERENCE = 0.8  # the sound surface is a ring's reference when the ring's spread about it is this much smaller


@dataclass(frozen=True)
class Plane:
    """``z = a + b·(row − row0) + c·(col − col0)``; ``sigma`` is the robust residual spread."""

    a: float
    b: float
    c: float
    row0: float
    col0: float
    sigma: float
    n: int

    def evaluate(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        return self.a + self.b * (rows - self.row0) + self.c * (cols - self.col0)


@dataclass(frozen=True)
class SurfaceReference:
    """The local sound surface (:mod:`._sound_surface`) as the reference of last resort.

    Evaluated like a :class:`Plane` (image rows and columns, broadcast), it is the surface's
    value at the nearest pixel; ``sigma`` is the robust spread of the temperature about it.
    """

    surface_c: np.ndarray
    sigma: float
    n: int

    def evaluate(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        m, n = self.surface_c.shape
        r = np.clip(np.rint(rows).astype(int), 0, m - 1)
        c = np.clip(np.rint(cols).astype(int), 0, n - 1)
        return self.surface_c[r, c]


@dataclass(frozen=True)
class RingReference:
    """Local reference of one candidate region (plane in image coordinates)."""

    plane: Plane | SurfaceReference
    sigma_k: float  # robust spread of the measured temperature about the plane in the ring
    n_ring: int
    source: str  # "ring", "wide ring", "surface" (last resort) or "detected" (a detected anomaly)


class FieldWrites:
    """Writes into a frame-sized field that is only written until it is formed (memory, issue 15).

    Stands in for an (M, N) array that the measuring steps write into and never read:
    ``f[rows, cols] = values`` and ``f.flat[index] = values``. Each write keeps its flat indices
    and its values cast to the field's dtype (as an assignment casts them); :meth:`apply`
    replays them in order onto the formed field, which then holds what direct writes would have
    left. The reference field of an image is formed this way after the measurements, so it is
    not held beside the detector's fields while they are used. Reading is refused (TypeError).
    """

    def __init__(self, shape: tuple[int, int], dtype: np.dtype) -> None:
        self.shape = (int(shape[0]), int(shape[1]))
        self.dtype = np.dtype(dtype)
        self._index_dtype = np.int32 if self.shape[0] * self.shape[1] < 2**31 else np.intp
        self._writes: list[tuple[np.ndarray, np.ndarray]] = []
        self.flat = _FlatWrites(self)

    def __setitem__(self, key: tuple[np.ndarray, np.ndarray], values) -> None:
        rows, cols = key
        self._keep(np.ravel_multi_index((np.asarray(rows), np.asarray(cols)), self.shape), values)

    def _keep(self, index, values) -> None:
        index = np.asarray(index)
        if index.dtype == bool or index.ndim != 1:
            raise TypeError("FieldWrites takes 1-D integer indices (rows and columns, or flat indices)")
        self._writes.append((index.astype(self._index_dtype), np.array(values, dtype=self.dtype)))

    def apply(self, field: np.ndarray) -> np.ndarray:
        """``field`` with every write replayed in order (in place); the writes are dropped."""
        for index, values in self._writes:
            field.flat[index] = values
        self._writes.clear()
        return field


class _FlatWrites:
    """``FieldWrites.flat``: ``flat[index] = values``."""

    def __init__(self, owner: FieldWrites) -> None:
        self._owner = owner

    def __setitem__(self, index, values) -> None:
        self._owner._keep(index, values)


def fit_plane(
    rows: np.ndarray, cols: np.ndarray, z: np.ndarray, *, iterations: int = 3, axes: tuple[bool, bool] = (True, True)
) -> Plane:
    """Robust least-squares plane (Tukey bisquare reweighting).

    ``axes`` switches the row and column slopes on or off (a slope is only
    trustworthy where the samples straddle the place it is evaluated). Falls back
    to a constant (the median) when fewer than 6 samples are given; a slope whose
    samples span less than one pixel is dropped.
    """
    rows = np.asarray(rows, dtype=float)
    cols = np.asarray(cols, dtype=float)
    z = np.asarray(z, dtype=float)
    n = int(z.size)
    if n == 0:
        return Plane(float("nan"), 0.0, 0.0, 0.0, 0.0, float("nan"), 0)
    r0, c0 = float(rows.mean()), float(cols.mean())
    dr, dc = rows - r0, cols - c0
    med = float(np.median(z))
    use_r = axes[0] and n >= 6 and np.ptp(dr) >= 1.0
    use_c = axes[1] and n >= 6 and np.ptp(dc) >= 1.0
    if not (use_r or use_c):
        return Plane(med, 0.0, 0.0, r0, c0, robust_sigma(z - med), n)
    cols_used = [np.ones(n)] + ([dr] if use_r else []) + ([dc] if use_c else [])
    design = np.column_stack(cols_used)
    w = np.ones(n)
    coef = np.zeros(design.shape[1])
    coef[0] = med
    for _ in range(max(1, iterations)):
        sw = np.sqrt(w)
        coef, *_ = np.linalg.lstsq(design * sw[:, None], z * sw, rcond=None)
        res = z - design @ coef
        s = MAD_TO_SIGMA * float(np.median(np.abs(res)))  # residuals of a fit with an intercept: centre ≈ 0
        if s <= 1e-12:
            break
        u = res / (4.685 * s)
        w = np.where(np.abs(u) < 1.0, (1.0 - u * u) ** 2, 0.0)
        if w.sum() < 6:
            break
    res = z - design @ coef
    b = float(coef[1]) if use_r else 0.0
    c = float(coef[1 + int(use_r)]) if use_c else 0.0
    return Plane(float(coef[0]), b, c, r0, c0, robust_sigma(res), n)


def rim_extent_px(
    *, u_crop: np.ndarray, dist_crop: np.ndarray, allowed_crop: np.ndarray, region_mean_u: float,
    noise_k: float, min_px: float, max_px: float, width_px: float,
) -> float:
    """Distance from the region at which its soft rim has faded, px.

    Means of ``u`` over 1-px distance shells of sound pixels are compared with the
    mean of the outer ``width_px`` shells; the rim ends at the first shell whose
    remaining contrast is at most 5 % of the anomaly's contrast (or the noise of
    the shell mean), searched between ``min_px`` and ``max_px``.
    """
    k = np.ceil(dist_crop[allowed_crop]).astype(np.int64)
    vals = u_crop[allowed_crop]
    kmax = int(math.ceil(max_px + width_px))
    keep = (k >= 1) & (k <= kmax)
    if not keep.any():
        return float(min_px)
    cnt = np.bincount(k[keep], minlength=kmax + 1).astype(float)
    tot = np.bincount(k[keep], weights=vals[keep], minlength=kmax + 1)
    far = slice(int(max_px) + 1, kmax + 1)
    if cnt[far].sum() < 1:
        return float(min_px)
    level = tot[far].sum() / cnt[far].sum()
    contrast_k = region_mean_u - level
    sign = 1.0 if contrast_k >= 0 else -1.0
    for d in range(int(math.ceil(min_px)), int(max_px) + 1):
        if cnt[d] < 1:
            continue
        rest = sign * (tot[d] / cnt[d] - level)
        if rest <= max(0.05 * abs(contrast_k), 2.0 * noise_k / math.sqrt(cnt[d])):
            return float(d)
    return float(max_px)


def _sample_pixels(mask: np.ndarray, max_samples: int = _MAX_TREND_SAMPLES) -> tuple[np.ndarray, np.ndarray]:
    """Rows and columns of every ``step``-th pixel of ``mask`` in raster order, at most about ``max_samples``.

    The flat indices are formed a band of rows at a time: no frame-sized int64 index array
    (8 B/px; memory, issue 15); the same pixels as ``np.flatnonzero(mask)[::step]``.
    """
    m, n = mask.shape
    step = max(1, int(np.count_nonzero(mask)) // max_samples)
    rows, cols = [np.zeros(0, np.intp)], [np.zeros(0, np.intp)]
    seen = 0
    for r0 in range(0, m, _BAND_ROWS):
        idx = np.flatnonzero(mask[r0 : r0 + _BAND_ROWS])
        take = idx[(-seen) % step :: step]  # the next sampled rank falls this far into the band
        seen += idx.size
        r, c = np.divmod(take, n)
        rows.append(r + r0)
        cols.append(c)
    return np.concatenate(rows), np.concatenate(cols)


def find_sound_regions(
    *,
    u: np.ndarray,
    labels: np.ndarray,
    usable: np.ndarray,
    areas: np.ndarray,
    means_u: np.ndarray,
    threshold_k: float,
    min_area_px: int,
    slices: list | None = None,
    max_rounds: int = 6,
) -> tuple[np.ndarray, Plane]:
    """Split regions into sound (True) and candidates (False).

    Parameters
    ----------
    u : (M, N) ndarray
        Smooth temperature field, °C.
    labels : (M, N) int ndarray
        Region labels 1..n, 0 = masked.
    usable : (M, N) bool ndarray
        Valid pixels off the jump set (used for the trend fit).
    areas, means_u : (n + 1,) ndarray
        Pixel count and mean of ``u`` per label (index 0 unused).
    threshold_k : float
        A region within this of the sound trend is sound.
    min_area_px : int
        Regions smaller than this never seed the sound set.
    slices : list of slice pairs, optional
        ``scipy.ndimage.find_objects(labels)``. When given, a region whose mean
        misses the trend is judged again by its median residual, so that a sound
        region whose mean is pulled by a neighbour's soft rim stays sound.

    Returns
    -------
    sound : (n + 1,) bool ndarray
        Index 0 is False.
    trend : Plane
        Robust plane through the sound pixels.
    """
    n = areas.size - 1
    sound = np.zeros(n + 1, dtype=bool)
    present = np.flatnonzero(areas > 0)
    present = present[present > 0]
    if present.size == 0:
        return sound, Plane(float("nan"), 0.0, 0.0, 0.0, 0.0, float("nan"), 0)
    big = present[areas[present] >= min_area_px]
    pool = big if big.size else present
    order = np.argsort(means_u[pool], kind="stable")
    cum = np.cumsum(areas[pool][order])
    seed = pool[order[np.searchsorted(cum, 0.5 * cum[-1])]]
    sound[seed] = True
    # mean of the trend over a region = trend at the region's centroid (the plane is linear);
    # centroids from every second row and column are ample for a smooth trend
    sub = labels[::2, ::2]
    m2, n2 = sub.shape
    flat = sub.ravel()
    cnt = np.bincount(flat, minlength=n + 1).astype(float)
    r_mean = 2.0 * np.bincount(flat, weights=np.repeat(np.arange(m2, dtype=float), n2), minlength=n + 1)
    c_mean = 2.0 * np.bincount(flat, weights=np.tile(np.arange(n2, dtype=float), m2), minlength=n + 1)
    missing = cnt == 0
    r_mean = np.where(missing, 0.0, r_mean / np.maximum(cnt, 1.0))
    c_mean = np.where(missing, 0.0, c_mean / np.maximum(cnt, 1.0))
    if slices is not None:
        for k in np.flatnonzero(missing[1:] & (areas[1:] > 0)) + 1:  # tiny regions: bounding-box centre
            sl = slices[k - 1]
            r_mean[k] = 0.5 * (sl[0].start + sl[0].stop - 1)
            c_mean[k] = 0.5 * (sl[1].start + sl[1].stop - 1)
    # one fixed sample of usable pixels; each round keeps the samples on sound regions
    s_rr, s_cc = _sample_pixels(usable, 4 * _MAX_TREND_SAMPLES)
    s_lab = labels[s_rr, s_cc]
    trend = None
    for _ in range(max_rounds):
        keep = sound[s_lab]
        if keep.sum() >= 200:
            rr, cc = s_rr[keep], s_cc[keep]
            step = max(1, rr.size // _MAX_TREND_SAMPLES)
            rr, cc = rr[::step], cc[::step]
        else:
            pix = usable & sound[labels]
            if not pix.any():
                pix = sound[labels]
            rr, cc = _sample_pixels(pix)
        trend = fit_plane(rr, cc, u[rr, cc])
        resid = means_u - trend.evaluate(r_mean, c_mean)
        if slices is not None:
            for k in present[(np.abs(resid[present]) >= threshold_k) & (areas[present] >= min_area_px)]:
                sl = slices[k - 1]
                sub = labels[sl] == k
                rr_k, cc_k = np.nonzero(sub)
                step = max(1, rr_k.size // 5000)
                rr_k, cc_k = rr_k[::step], cc_k[::step]
                vals = u[sl][rr_k, cc_k] - trend.evaluate(rr_k + float(sl[0].start), cc_k + float(sl[1].start))
                med = float(np.median(vals))
                if abs(med) < abs(resid[k]):
                    resid[k] = med
        new = np.zeros_like(sound)
        new[present] = np.abs(resid[present]) < threshold_k
        new[seed] = True
        if np.array_equal(new, sound):
            break
        sound = new
    return sound, trend


def _straddled_axes(rr: np.ndarray, cc: np.ndarray, extent: tuple[int, int, int, int]) -> tuple[bool, bool]:
    """Use a slope only along an axis where the ring covers the region's extent.

    ``extent`` is the region's (row_min, col_min, row_max, col_max) in the crop. A
    one-sided ring (region at the image edge, neighbours excluded) would
    extrapolate its slope across the region; a constant is safer there.
    """
    out = []
    for ring_ax, lo, hi in ((rr, float(extent[0]), float(extent[2])), (cc, float(extent[1]), float(extent[3]))):
        tol = 0.1 * (hi - lo) + 1.0
        out.append(bool(ring_ax.min() <= lo + tol and ring_ax.max() >= hi - tol))
    return out[0], out[1]


def ring_reference(
    *,
    u_crop: np.ndarray,
    t_crop: np.ndarray,
    dist_crop: np.ndarray,
    allowed_crop: np.ndarray,
    row_offset: int,
    col_offset: int,
    gap_px: float,
    width_px: float,
    trend: Plane | SurfaceReference,
    extent: tuple[int, int, int, int],
    widen: bool = False,
) -> RingReference:
    """Local sound reference from a ring around one region.

    Parameters
    ----------
    u_crop, t_crop : (m, n) ndarray
        Smooth field and measured temperature in a crop around the region, °C.
    dist_crop : (m, n) ndarray
        Euclidean distance of each crop pixel to the region, px (0 inside).
    allowed_crop : (m, n) bool ndarray
        Pixels that may serve as reference (sound, valid, off the jump set).
    row_offset, col_offset : int
        Position of the crop in the image.
    gap_px, width_px : float
        The ring spans ``gap < distance <= gap + width``.
    widen : bool
        Try 2× and 4× the width (the crop must be large enough) instead of 1×;
        the caller widens when the first ring has fewer than 24 usable pixels.
    trend : Plane or SurfaceReference
        The reference of last resort (the local sound surface).
    """
    steps = ((2.0, "wide ring"), (4.0, "wide ring")) if widen else ((1.0, "ring"),)
    for factor, source in steps:
        ring = allowed_crop & (dist_crop > gap_px) & (dist_crop <= gap_px + factor * width_px)
        n_ring = int(ring.sum())
        if n_ring >= _MIN_RING_PX:
            rr, cc = np.nonzero(ring)
            step = max(1, n_ring // _MAX_RING_SAMPLES)
            rr, cc = rr[::step], cc[::step]
            axes = _straddled_axes(rr, cc, extent)
            frf, fcf = rr.astype(float), cc.astype(float)
            local = fit_plane(frf, fcf, u_crop[rr, cc], axes=axes)
            if isinstance(trend, SurfaceReference) and all(axes):
                s_ring = trend.surface_c[rr + row_offset, cc + col_offset]
                if fit_plane(frf, fcf, u_crop[rr, cc] - s_ring, axes=(False, False)).sigma < \
                        SURFACE_PREFERENCE * local.sigma:
                    # the local sound surface follows the ring's shape clearly better than a plane
                    sigma = robust_sigma(t_crop[rr, cc] - s_ring)
                    return RingReference(SurfaceReference(trend.surface_c, sigma, n_ring), sigma, n_ring, source)
            plane = Plane(
                local.a, local.b, local.c, local.row0 + row_offset, local.col0 + col_offset, local.sigma, local.n
            )
            resid_t = t_crop[rr, cc] - local.evaluate(frf, fcf)
            return RingReference(plane, robust_sigma(resid_t), n_ring, source)
    return RingReference(trend, float(trend.sigma), int(trend.n), "surface")
