"""Regions from an Ambrosio–Tortorelli edge field.

1. The jump set is ``v < threshold`` on valid pixels, extended by hysteresis
   (as in Canny 1986) to the valley pixels of ``v < weak_threshold`` connected to
   it: a contour whose phase field dips only to 0.6 at one noisy spot is still
   closed, while isolated shallow dips from noise are ignored.
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
_BLOCK_ROWS = 256  # rows per block where a whole-frame temporary is not needed


def _region_means(u: np.ndarray, labels: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    flat = labels.ravel()
    counts = np.bincount(flat, minlength=n + 1).astype(np.float64)
    sums = np.bincount(flat, weights=u.ravel().astype(np.float64), minlength=n + 1)
    means = np.divide(sums, counts, out=np.zeros_like(sums), where=counts > 0)
    return means, counts


def _assign_unlabelled(u: np.ndarray, labels: np.ndarray, todo: np.ndarray, *, max_sweeps: int = 4) -> None:
    """Give the ``todo`` pixels (jump pixels) a neighbouring label, in place.

    Every labelled pixel carries a reference value: its own ``u`` on a region's core,
    the reference of the neighbour it took its label from on jump pixels. The cores
    grow into the band ring by ring, each pixel taking the 4-neighbour whose reference
    is closest to its own ``u``; then a few sweeps let a jump pixel switch to a
    neighbouring region whose reference fits it better, so the split follows the
    jump of ``u`` where two fronts meet. Local references (rather than region means)
    keep the split right on regions with a temperature gradient.
    """
    m, n = labels.shape
    band = np.flatnonzero(todo)
    if band.size == 0:
        return
    lab_flat = labels.reshape(-1)
    sentinel = m * n  # index of an extra "no label" cell
    lab_ext = np.concatenate([lab_flat, np.zeros(1, lab_flat.dtype)])
    u_flat = u.reshape(-1)
    # u on labelled pixels, 0 elsewhere, in u's own dtype: it only ever holds copies of u's values,
    # so float32 storage loses nothing and costs are still formed in float64 (memory, issue 15)
    ref_ext = np.zeros(m * n + 1, u_flat.dtype if u_flat.dtype == np.float32 else np.float64)
    np.copyto(ref_ext[:-1], u_flat, where=lab_flat > 0)
    row, col = np.divmod(band, n)
    nb = np.stack(
        [
            np.where(row > 0, band - n, sentinel),
            np.where(row < m - 1, band + n, sentinel),
            np.where(col > 0, band - 1, sentinel),
            np.where(col < n - 1, band + 1, sentinel),
        ]
    )
    uu = u_flat[band].astype(np.float64)

    def best_of(nbs: np.ndarray, uvals: np.ndarray, exclude: np.ndarray | None):
        best_lab = np.zeros(uvals.size, lab_ext.dtype)
        best_ref = np.zeros(uvals.size)
        best_cost = np.full(uvals.size, np.inf)
        for d in range(4):
            lab = lab_ext[nbs[d]]
            ref = ref_ext[nbs[d]].astype(np.float64)
            cost = np.abs(ref - uvals)
            ok = lab > 0 if exclude is None else (lab > 0) & (lab != exclude)
            better = ok & (cost < best_cost)
            best_cost = np.where(better, cost, best_cost)
            best_lab = np.where(better, lab, best_lab)
            best_ref = np.where(better, ref, best_ref)
        return best_lab, best_ref, best_cost

    # rings: unlabelled pixels next to labelled ones take the best-fitting neighbour
    pending = np.arange(band.size)
    while pending.size:
        bl, br, _ = best_of(nb[:, pending], uu[pending], None)
        got = bl > 0
        if not got.any():
            break
        idx = band[pending[got]]
        lab_ext[idx] = bl[got]
        ref_ext[idx] = br[got]
        pending = pending[~got]
    # sweeps: a jump pixel switches to a neighbouring region whose reference fits it better
    done = np.setdiff1d(np.arange(band.size), pending, assume_unique=True)
    nb_d, u_d, idx_d = nb[:, done], uu[done], band[done]
    for sweep in range(max_sweeps):
        own = lab_ext[idx_d]
        own_cost = np.abs(ref_ext[idx_d] - u_d)
        bl, br, bc = best_of(nb_d, u_d, own)
        switch = bc < own_cost
        if not switch.any():
            break
        lab_ext[idx_d[switch]] = bl[switch]
        ref_ext[idx_d[switch]] = br[switch]
        if sweep == 0:
            # later sweeps only revisit pixels on a front between two regions
            front = np.isfinite(bc)
            nb_d, u_d, idx_d = nb_d[:, front], u_d[front], idx_d[front]
    lab_flat[band] = lab_ext[band]
    todo.reshape(-1)[band[lab_ext[band] > 0]] = False


def _adjacent_pairs(labels: np.ndarray, involved: np.ndarray) -> np.ndarray:
    """Unique unordered pairs (a, b), a < b, of distinct positive 4-adjacent labels, one of them ``involved``.

    Gathered a block of rows at a time (no frame-sized pair arrays; memory, issue 15).
    """
    m = labels.shape[0]
    base = int(labels.max()) + 1
    keys = []
    for r0 in range(0, m, _BLOCK_ROWS):
        r1, hi_row = min(m, r0 + _BLOCK_ROWS), min(m - 1, r0 + _BLOCK_ROWS)
        a = np.concatenate([labels[r0:r1, :-1].ravel(), labels[r0:hi_row, :].ravel()])
        b = np.concatenate([labels[r0:r1, 1:].ravel(), labels[r0 + 1 : hi_row + 1, :].ravel()])
        keep = (a != b) & (a > 0) & (b > 0) & (involved[a] | involved[b])
        a, b = a[keep], b[keep]
        keys.append(np.unique(np.minimum(a, b).astype(np.int64) * base + np.maximum(a, b).astype(np.int64)))
    key = np.unique(np.concatenate(keys)) if keys else np.empty(0, np.int64)
    if key.size == 0:
        return np.empty((0, 2), dtype=np.int64)
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
    survives = np.zeros(n + 1, dtype=bool)
    for a in range(0, lo.shape[0], _BLOCK_ROWS):  # a block at a time: no frame-sized index array
        lo_b, hi_b = lo[a : a + _BLOCK_ROWS], hi[a : a + _BLOCK_ROWS]
        inside = (lo_b == hi_b) & (lo_b > 0)
        survives[lo_b[inside].astype(np.int64)] = True
    thin = ~survives
    thin[0] = False
    return thin


def _merge_thin(u: np.ndarray, labels: np.ndarray, n: int, side: int) -> np.ndarray:
    """Merge thin regions into the neighbour of closest mean; returns the label map ``old -> new``."""
    thin = _thin_labels(labels, n, side)
    parent = np.arange(n + 1)
    if not thin[1:].any():
        return parent.astype(np.int32)
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
    return np.array([find(i) for i in range(n + 1)], dtype=np.int32)


_VALLEY_CURVATURE = 0.06  # second difference of v marking the bottom of a valley (calibrated, docs)


def _valley(v: np.ndarray) -> np.ndarray:
    """Bottom of a valley of ``v``: second difference >= 0.06 along one of the 4 grid directions.

    The phase field around a jump is ``1 - exp(-d / 2 eps)``: concave on the flanks and
    sharply convex only at the bottom, so this picks the centre line of a band (also
    where it is too shallow to pass ``threshold``), not its flanks or a plateau.
    """
    m, n = v.shape
    out = np.zeros(v.shape, dtype=bool)
    for r0 in range(0, m, _BLOCK_ROWS):  # a block of rows at a time (same values, small temporaries)
        r1 = min(m, r0 + _BLOCK_ROWS)
        p = np.pad(v[max(0, r0 - 1) : r1 + 1], ((int(r0 == 0), int(r1 == m)), (1, 1)), mode="edge")
        k = r1 - r0
        c2 = 2.0 * p[1:-1, 1:-1]
        block = out[r0:r1]
        for (a0, a1), (b0, b1) in (((1, 0), (1, 2)), ((0, 1), (2, 1)), ((0, 0), (2, 2)), ((0, 2), (2, 0))):
            block |= (p[a0 : a0 + k, a1 : a1 + n] + p[b0 : b0 + k, b1 : b1 + n] - c2) >= _VALLEY_CURVATURE
    return out


def _hysteresis(v: np.ndarray, valid: np.ndarray, strong: float, weak: float) -> np.ndarray:
    """Jump set: ``v < strong``, plus valley pixels of ``v < weak`` 8-connected to it.

    The valley condition keeps the added pixels on the ridge line of the phase field
    (a gap in a contour), not on the flanks of the band or inside narrow features.
    """
    core = (v < strong) & valid
    if weak <= strong:
        return core
    cand = ((v < weak) & valid & _valley(v)) | core
    # its 8-connected components (those of scipy.ndimage.label; only which hold a core pixel matters)
    n, lab = cv2.connectedComponents(cand.view(np.uint8), connectivity=8, ltype=cv2.CV_32S)
    n -= 1
    if n == 0:
        return core
    keep = np.zeros(n + 1, dtype=bool)
    keep[lab[core]] = True
    keep[0] = False
    return keep[lab]


def extract_regions(
    u: np.ndarray,
    v: np.ndarray,
    mask: np.ndarray | None,
    *,
    threshold: float,
    weak_threshold: float,
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
    threshold, weak_threshold : float
        Jump set: pixels with ``v < weak_threshold`` connected to one with ``v < threshold``.
    min_feature_px : float
        Regions narrower than this (pixels) are merged into a neighbour.

    Returns
    -------
    edges : (M, N) bool ndarray
    labels : (M, N) int16 ndarray, int32 above 32 767 regions
        1..n on valid pixels, 0 on masked pixels.
    n_regions : int
    """
    valid = np.ones(u.shape, dtype=bool) if mask is None else ~mask
    edges = _hysteresis(v, valid, threshold, weak_threshold)
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
    k = int(present.sum())
    # int16 when the regions fit (half the memory of int32 through the analysis; issue 15), else int32
    lut = np.cumsum(present).astype(np.int16 if k <= np.iinfo(np.int16).max else np.int32)
    lut[0] = 0
    return edges, lut[labels], k
