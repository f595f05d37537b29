"""Regions from an Ambrosio–Tortorelli edge field.

1. The jump set is ``v < threshold`` on valid pixels.
2. Regions are the 4-connected components of the remaining pixels. The
   discretisation gives every difference to the pixel at its start, so a jump
   between two 4-neighbours always marks one of them: removing the jump set
   leaves no 4-connected path across a jump, and two regions of different
   temperature that touch along one edge stay apart.
3. Jump pixels join the adjacent region whose local value of ``u`` is closest
   to the pixel's own ``u`` (grown one pixel ring at a time, then relaxed).
4. Regions narrower than ``min_feature_px`` (they vanish under an opening with a
   square of that side) are merged into the adjacent region of closest mean.

Masked pixels never carry an edge. Thin masked structures (isolated dead pixels,
dead rows or columns, at most 2 px wide) connect the regions around them; thick
masked blobs (saturation, missing data) act as barriers, so two regions are not
merged through an area without data. Masked pixels get label 0.
"""

from __future__ import annotations

import math

import cv2
import numpy as np
from scipy import ndimage as ndi

__all__ = ["extract_regions"]

_CROSS = ndi.generate_binary_structure(2, 1)


def _region_means(u: np.ndarray, labels: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    flat = labels.ravel()
    counts = np.bincount(flat, minlength=n + 1).astype(np.float64)
    sums = np.bincount(flat, weights=u.ravel().astype(np.float64), minlength=n + 1)
    means = np.divide(sums, counts, out=np.zeros_like(sums), where=counts > 0)
    return means, counts


_SHIFTS = ((-1, 0), (1, 0), (0, -1), (0, 1))


def _neighbour_values(
    rows: np.ndarray, cols: np.ndarray, shape: tuple[int, int], dr: int, dc: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    rr = rows + dr
    cc = cols + dc
    inside = (rr >= 0) & (rr < shape[0]) & (cc >= 0) & (cc < shape[1])
    return inside, np.where(inside, rr, 0), np.where(inside, cc, 0)


def _assign_unlabelled(u: np.ndarray, labels: np.ndarray, todo: np.ndarray, *, sweeps: int = 4) -> None:
    """Give the ``todo`` pixels (jump pixels) a neighbouring label, in place.

    Every region pixel carries a reference value: its own ``u`` on the region's
    core, the reference of the neighbour it was grown from on jump pixels. Rings
    of jump pixels are grown from the cores choosing the neighbour whose reference
    is closest to the pixel's ``u``; then a few relaxation sweeps let a jump pixel
    switch to a neighbour's region when that region's reference fits it better.
    Using local references rather than region means keeps the split right on
    regions with a temperature gradient.
    """
    shape = labels.shape
    u64 = u.astype(np.float64)
    ref = np.where(labels > 0, u64, np.nan)
    band_r, band_c = np.nonzero(todo)
    if band_r.size == 0:
        return
    pending = np.ones(band_r.size, dtype=bool)
    while pending.any():
        rows, cols = band_r[pending], band_c[pending]
        best_lab = np.zeros(rows.size, dtype=labels.dtype)
        best_ref = np.zeros(rows.size)
        best_cost = np.full(rows.size, np.inf)
        uu = u64[rows, cols]
        for dr, dc in _SHIFTS:
            inside, rr, cc = _neighbour_values(rows, cols, shape, dr, dc)
            lab = np.where(inside, labels[rr, cc], 0)
            r_nb = ref[rr, cc]
            cost = np.where(lab > 0, np.abs(uu - r_nb), np.inf)
            better = cost < best_cost
            best_cost[better] = cost[better]
            best_lab[better] = lab[better]
            best_ref[better] = r_nb[better]
        got = best_lab > 0
        if not got.any():
            break
        labels[rows[got], cols[got]] = best_lab[got]
        ref[rows[got], cols[got]] = best_ref[got]
        idx = np.flatnonzero(pending)
        pending[idx[got]] = False
    done = ~pending
    rows, cols = band_r[done], band_c[done]
    uu = u64[rows, cols]
    for _ in range(sweeps):
        own_lab = labels[rows, cols]
        best_lab = own_lab.copy()
        best_ref = ref[rows, cols]
        best_cost = np.abs(uu - best_ref)
        for dr, dc in _SHIFTS:
            inside, rr, cc = _neighbour_values(rows, cols, shape, dr, dc)
            lab = np.where(inside, labels[rr, cc], 0)
            r_nb = ref[rr, cc]
            cost = np.where((lab > 0) & (lab != own_lab), np.abs(uu - r_nb), np.inf)
            better = cost < best_cost
            best_cost[better] = cost[better]
            best_lab[better] = lab[better]
            best_ref[better] = r_nb[better]
        changed = best_lab != own_lab
        if not changed.any():
            break
        labels[rows[changed], cols[changed]] = best_lab[changed]
        ref[rows[changed], cols[changed]] = best_ref[changed]
    todo[rows, cols] = False


def _adjacent_pairs(labels: np.ndarray, involved: np.ndarray) -> np.ndarray:
    """Unique unordered pairs (a, b), a < b, of distinct positive 4-adjacent labels, one of them ``involved``."""
    a = np.concatenate([labels[:, :-1].ravel(), labels[:-1, :].ravel()])
    b = np.concatenate([labels[:, 1:].ravel(), labels[1:, :].ravel()])
    keep = (a != b) & (a > 0) & (b > 0) & (involved[a] | involved[b])
    a, b = a[keep], b[keep]
    lo = np.minimum(a, b).astype(np.int64)
    hi = np.maximum(a, b).astype(np.int64)
    if lo.size == 0:
        return np.empty((0, 2), dtype=np.int64)
    key = np.unique(lo * (int(labels.max()) + 1) + hi)
    base = int(labels.max()) + 1
    return np.stack([key // base, key % base], axis=1)


def _thin_labels(labels: np.ndarray, n: int, side: int) -> np.ndarray:
    """Boolean per label (index 0 unused): True when the region vanishes under a ``side`` x ``side`` opening."""
    if side <= 1:
        return np.zeros(n + 1, dtype=bool)
    if n < 2**24:  # labels are exact in float32: OpenCV's fast min/max filters
        lab = labels.astype(np.float32)
        kernel = np.ones((side, side), np.uint8)
        lo = cv2.erode(lab, kernel, borderType=cv2.BORDER_REPLICATE)
        hi = cv2.dilate(lab, kernel, borderType=cv2.BORDER_REPLICATE)
    else:
        lo = ndi.minimum_filter(labels, size=side, mode="nearest")
        hi = ndi.maximum_filter(labels, size=side, mode="nearest")
    inside = (lo == hi) & (lo > 0)
    survives = np.zeros(n + 1, dtype=bool)
    survives[lo[inside].astype(np.int64)] = True
    thin = ~survives
    thin[0] = False
    return thin


def _merge_thin(u: np.ndarray, labels: np.ndarray, n: int, side: int) -> np.ndarray:
    """Merge thin regions into the neighbour of closest mean; returns the label map ``old -> new``."""
    thin = _thin_labels(labels, n, side)
    parent = np.arange(n + 1)
    if not thin[1:].any():
        return parent
    means, counts = _region_means(u, labels, n)
    pairs = _adjacent_pairs(labels, thin)
    neighbours: dict[int, set[int]] = {}
    for a, b in pairs.tolist():
        neighbours.setdefault(a, set()).add(b)
        neighbours.setdefault(b, set()).add(a)

    def find(x: int) -> int:
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = int(parent[x])
        return x

    # smallest first, ties by label: deterministic
    order = sorted(np.flatnonzero(thin).tolist(), key=lambda k: (counts[k], k))
    for k in order:
        rk = find(k)
        cands = {find(j) for j in neighbours.get(k, ())} - {rk}
        if not cands:
            continue
        target = min(cands, key=lambda j: (abs(means[j] - means[rk]), j))
        total = counts[target] + counts[rk]
        means[target] = (means[target] * counts[target] + means[rk] * counts[rk]) / total
        counts[target] = total
        parent[rk] = target
        neighbours.setdefault(target, set()).update(neighbours.get(rk, set()))
    return np.array([find(i) for i in range(n + 1)])


def extract_regions(
    u: np.ndarray,
    v: np.ndarray,
    mask: np.ndarray | None,
    *,
    threshold: float,
    min_feature_px: float,
) -> tuple[np.ndarray, np.ndarray, int]:
    """Jump set and region labels from the AT fields.

    Parameters
    ----------
    u : (M, N) ndarray
        Smooth field.
    v : (M, N) ndarray
        Edge field in [0, 1].
    mask : (M, N) bool ndarray or None
        True on invalid pixels.
    threshold : float
        Jump set is ``v < threshold``.
    min_feature_px : float
        Regions narrower than this (pixels) are merged into a neighbour.

    Returns
    -------
    edges : (M, N) bool ndarray
    labels : (M, N) int32 ndarray
        1..n on valid pixels, 0 on masked pixels.
    n_regions : int
    """
    valid = np.ones(u.shape, dtype=bool) if mask is None else ~mask
    edges = (v < threshold) & valid
    if mask is not None and mask.any():
        thick = ndi.binary_opening(mask, structure=np.ones((3, 3), bool))
        connector = mask & ~thick
    else:
        connector = np.zeros(u.shape, dtype=bool)
    core = (valid & ~edges) | connector
    labels, n = ndi.label(core, structure=_CROSS)
    labels = labels.astype(np.int32, copy=False)
    todo = valid & (labels == 0)
    if todo.any():
        if n > 0:
            labels[~valid] = 0  # connectors carry no reference value
            _assign_unlabelled(u, labels, todo)
        if todo.any():
            # valid pixels cut off from every region (e.g. all edge): their own components
            extra, n_extra = ndi.label(todo, structure=_CROSS)
            labels[todo] = extra[todo] + n
            n += n_extra
    labels[~valid] = 0
    side = int(math.ceil(min_feature_px - 1e-9))
    mapping = _merge_thin(u, labels, n, side)
    labels = mapping[labels]
    labels[~valid] = 0
    # consecutive 1..k, keeping the order of the surviving labels (deterministic)
    present = np.bincount(labels.ravel(), minlength=n + 1) > 0
    present[0] = False
    lut = np.cumsum(present).astype(np.int32)
    lut[0] = 0
    labels = lut[labels]
    return edges, labels.astype(np.int32, copy=False), int(present.sum())
