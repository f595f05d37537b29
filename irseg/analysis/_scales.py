"""Multi-scale contrast of a residual field against its noise: Gaussian scales, noise at each scale.

Helpers of :mod:`._significance`: the white-noise gain of a Gaussian smoothing kernel, the
√2-spaced bank of scales sized from the defect areas of interest, the residual smoothed at each
scale with its measured spread, and the smallest contrast a given area and NETD allow.
"""

from __future__ import annotations

import functools
import math

import cv2
import numpy as np
from scipy import ndimage

from .._shared import MAD_TO_SIGMA

__all__ = ["gaussian_noise_factor", "scale_bank", "contrast_at_scales", "pixel_noise_k",
           "min_detectable_contrast_k", "dome_of", "without_lines", "long_lines", "K_HI", "FULL_RES_MAX_S"]

K_HI = 5.0  # seeds: |contrast at scale| > K_HI·σ at that scale
FULL_RES_MAX_S = 3.0  # scales up to this many pixels are smoothed at full resolution

@functools.lru_cache(maxsize=256)
def gaussian_noise_factor(s_px: float) -> float:
    """√(Σh²) of irseg's discrete Gaussian of std ``s_px``: smoothed white noise σ_s = σ·factor.

    Tends to the continuum value ``1/(2√π·s)`` for ``s`` above about one pixel.
    """
    k = _ksize(s_px)
    g = cv2.getGaussianKernel(k, s_px, cv2.CV_64F).ravel()
    return float(np.sum(g**2))  # (Σg²)² of the separable 2-D kernel, square-rooted


def _dilate(a: np.ndarray, r: int) -> np.ndarray:
    """Binary dilation by a (2r+1)² square (r steps of the 8-neighbourhood)."""
    if r <= 0:
        return a.copy()
    k = np.ones((2 * r + 1, 2 * r + 1), np.uint8)
    return cv2.dilate(a.astype(np.uint8), k, borderType=cv2.BORDER_CONSTANT, borderValue=0).astype(bool)


def _fill_holes(a: np.ndarray) -> np.ndarray:
    """Fill the holes of a binary mask (background not 4-connected to the border)."""
    img = np.zeros((a.shape[0] + 2, a.shape[1] + 2), np.uint8)
    img[1:-1, 1:-1] = a
    cv2.floodFill(img, None, (0, 0), 2, flags=4)
    return (img[1:-1, 1:-1] != 2)


def _ksize(s: float) -> int:
    return int(2 * math.ceil(3.0 * s) + 1)


def _gblur(a: np.ndarray, s: float) -> np.ndarray:
    k = _ksize(s)
    return cv2.GaussianBlur(a, (k, k), sigmaX=s, sigmaY=s, borderType=cv2.BORDER_CONSTANT)


def _edge_gain(v: np.ndarray, s: float) -> np.ndarray:
    """Noise of the normalized convolution relative to the frame's inside: ``√(Σg²v)/(Σg v)`` over its value
    for ``v = 1``. Near the frame edge and invalid pixels fewer samples enter the window, so the
    smoothed noise is larger there (up to 2× in a corner); thresholds are raised by this factor.
    """
    k = _ksize(s)
    g = cv2.getGaussianKernel(k, s, cv2.CV_32F)
    num = cv2.sepFilter2D(v, -1, g * g, g * g, borderType=cv2.BORDER_CONSTANT)
    den = cv2.sepFilter2D(v, -1, g, g, borderType=cv2.BORDER_CONSTANT)
    inner = float(np.sum(g * g))  # √(Σg²)² of the separable kernel, for v = 1
    return np.sqrt(np.maximum(num, 0)) / np.maximum(den, 1e-6) / inner


def pixel_noise_k(residual: np.ndarray, valid: np.ndarray) -> float:
    """Robust per-pixel noise σ from the 4-neighbour Laplacian ``x − mean(4 neighbours)``.

    For white noise its standard deviation is σ·√(1 + 4/16) = 1.118·σ; the median absolute
    value (×1.4826) makes the estimate robust to edges.
    """
    r = np.asarray(residual, float)
    d = r[1:-1, 1:-1] - 0.25 * (r[:-2, 1:-1] + r[2:, 1:-1] + r[1:-1, :-2] + r[1:-1, 2:])
    ok = valid[1:-1, 1:-1] & valid[:-2, 1:-1] & valid[2:, 1:-1] & valid[1:-1, :-2] & valid[1:-1, 2:]
    v = np.abs(d[ok])
    if v.size == 0:
        return 0.0
    return float(MAD_TO_SIGMA * np.median(v) / math.sqrt(1.25))


def scale_bank(min_area_px: float, max_area_px: float, max_s_px: float) -> tuple[float, ...]:
    """Gaussian stds (px) matched to disks from ``min_area_px`` to ``max_area_px``, spaced by √2.

    The matched std of a disk of radius ρ is ρ/√(2u*) ≈ 0.63·ρ (see the module docstring).
    """
    lo = max(0.7, 0.63 * math.sqrt(min_area_px / math.pi))
    hi = max(lo, min(0.63 * math.sqrt(max_area_px / math.pi), max_s_px))
    n = int(math.floor(math.log(hi / lo) / math.log(math.sqrt(2.0)) + 1e-9)) + 1
    return tuple(float(lo * math.sqrt(2.0) ** i) for i in range(n))


def contrast_at_scales(
    residual: np.ndarray, valid: np.ndarray, scales_px: tuple[float, ...], gains: list | None = None,
    pyramid: dict | None = None, weights: dict | None = None,
) -> list[np.ndarray]:
    """``R_s`` for each scale (normalized convolution, so invalid pixels do not pull it to zero).

    Scales above 3 px are computed on a block-reduced copy (factor ``⌊s/2⌋`` rounded down to a
    power of two) and brought back bilinearly; the reduction adds ``f²/12`` px² of variance to
    the window, which is taken off the reduced std. ``pyramid`` (a dict the caller keeps for one
    residual) holds the reduced copies between calls; ``weights`` (a dict the caller keeps for one
    ``valid``) holds what depends on the valid pixels only (their reduced copies, the smoothed
    weights and the edge gains), so further residuals on the same pixels reuse it.
    """
    m, n = residual.shape
    if pyramid is None:
        pyramid = {}
    if weights is None:
        weights = {}
    if 1 not in weights:
        weights[1] = valid.astype(np.float32)
    if 1 not in pyramid:  # Σ r·v per block, as means (r is 0 off the valid pixels); kept for further scales
        pyramid[1] = np.where(valid, residual, 0.0).astype(np.float32)
    out = []

    def level(store: dict, f: int) -> np.ndarray:
        if f not in store:
            a = level(store, f // 2)
            if a.shape[0] % 2 or a.shape[1] % 2:  # an odd side: padded with a zero row or column
                aa = np.zeros((a.shape[0] + a.shape[0] % 2, a.shape[1] + a.shape[1] % 2), np.float32)
                aa[: a.shape[0], : a.shape[1]] = a
                a = aa
            # the mean of each 2×2 block, summed as (top pair) + (bottom pair)
            store[f] = 0.25 * ((a[0::2, 0::2] + a[0::2, 1::2]) + (a[1::2, 0::2] + a[1::2, 1::2]))
        return store[f]

    for s in scales_px:
        full = s <= FULL_RES_MAX_S
        f = 1 if full else 1 << max(0, int(math.floor(math.log2(s / 2.0))))
        sc = s if full else math.sqrt(max(s * s - f * f / 12.0, 0.25)) / f
        vv = level(weights, f)
        if ("den", s) not in weights:
            weights[("den", s)] = np.maximum(_gblur(vv, sc), 1e-6)
        field = _gblur(level(pyramid, f), sc) / weights[("den", s)]
        if not full:
            field = cv2.resize(field, (field.shape[1] * f, field.shape[0] * f), interpolation=cv2.INTER_LINEAR)[:m, :n]
        out.append(field)
        if gains is not None:
            if ("gain", s) not in weights:
                gs = _edge_gain(vv, sc)
                if not full:
                    gs = cv2.resize(gs, (gs.shape[1] * f, gs.shape[0] * f), interpolation=cv2.INTER_LINEAR)[:m, :n]
                weights[("gain", s)] = gs
            gains.append(weights[("gain", s)])
    return out


def min_detectable_contrast_k(*, area_m2: float, netd_k: float, pixel_m: float, k_hi: float = K_HI) -> float:
    """White-noise limit of the smallest contrast seeded: ``1.11·k_hi·NETD·p/√A`` (module docstring)."""
    u = 1.2564  # root of 2u·e^(−u) = 1 − e^(−u)
    gain = math.sqrt(2.0 * math.pi) * (1.0 - math.exp(-u)) / math.sqrt(u) / math.sqrt(math.pi)  # 0.902
    return k_hi * netd_k * pixel_m / (gain * math.sqrt(area_m2))


def _pct(v: np.ndarray, q: float) -> float:
    """Percentile of at most ~50 000 values (a regular subsample of larger sets)."""
    step = max(1, v.size // 50_000)
    return float(np.percentile(v[::step], q))


def _reduce(a: np.ndarray, f: int) -> np.ndarray:
    m, n = a.shape
    return cv2.resize(a.astype(np.float32), (max(1, n // f), max(1, m // f)), interpolation=cv2.INTER_AREA)


def _expand(a: np.ndarray, shape: tuple[int, int], interpolation: int) -> np.ndarray:
    """Back from a copy reduced by ``f`` to ``shape`` (the remainder rows/columns repeat the last)."""
    m, n = shape
    f_r, f_c = max(1, m // a.shape[0]), max(1, n // a.shape[1])
    up = cv2.resize(a, (a.shape[1] * f_c, a.shape[0] * f_r), interpolation=interpolation)
    out = np.empty((m, n), up.dtype)
    out[: up.shape[0], : up.shape[1]] = up[:m, :n]
    if up.shape[0] < m:
        out[up.shape[0]:, : up.shape[1]] = up[-1:, :n]
    if up.shape[1] < n:
        out[:, up.shape[1]:] = out[:, up.shape[1] - 1: up.shape[1]]
    return out


def without_lines(v: np.ndarray, line_px: float) -> np.ndarray:
    """``v`` with its narrow members taken out: a grey opening with a disk ``line_px`` across.

    A stud or joist (narrower than the disk) is removed, a broad anomaly keeps its level (its
    corners are rounded by the disk's radius). Computed on a copy reduced by ``⌊line_px/8⌋``
    (the disk keeps about 8 px across) and brought back bilinearly.
    """
    f = max(1, int(line_px // 8))
    if v.shape[0] // f < 3 or v.shape[1] // f < 3:
        return v.copy()
    small = _reduce(v, f)
    r = max(1, int(round(0.5 * line_px / f)))
    disk = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * r + 1, 2 * r + 1))
    opened = cv2.morphologyEx(small, cv2.MORPH_OPEN, disk, borderType=cv2.BORDER_REPLICATE)
    return np.minimum(_expand(opened, v.shape, cv2.INTER_LINEAR), v)


def long_lines(mask: np.ndarray, line_px: float) -> np.ndarray:
    """The parts of ``mask`` that are long lines: components at least three times ``line_px`` long
    (the opening also clips the corners of a broad anomaly, small pieces that are not members)."""
    k, lab, stats, _ = cv2.connectedComponentsWithStats(np.ascontiguousarray(mask, dtype=bool).view(np.uint8),
                                                        connectivity=4, ltype=cv2.CV_32S)
    if k <= 1:
        return mask
    # each 4-connected component's bounding box (the components scipy.ndimage.label finds)
    keep = np.maximum(stats[:, cv2.CC_STAT_WIDTH], stats[:, cv2.CC_STAT_HEIGHT]) >= 3.0 * line_px
    keep[0] = False
    return keep[lab]


_SQUARE_3 = np.ones((3, 3), np.uint8)


def label8(mask: np.ndarray) -> np.ndarray:
    """Labels of the 8-connected components of ``mask`` (0 off it), int32, numbered in no particular order:
    the components of ``scipy.ndimage.label(mask, structure=np.ones((3, 3)))``, for uses that only compare
    labels (OpenCV's labelling, several times faster)."""
    return cv2.connectedComponents(np.ascontiguousarray(mask, dtype=bool).view(np.uint8), connectivity=8,
                                   ltype=cv2.CV_32S)[1]


def _reconstruct(seed: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Grey reconstruction by dilation of ``seed`` under ``mask`` (``seed <= mask``), 8-neighbourhood.

    Geodesic dilations (a 3×3 dilation, then the minimum with ``mask``) repeated until nothing
    changes: the same fixed point as :func:`skimage.morphology.reconstruction` (``method="dilation"``),
    value for value (only maxima and minima of the given values are formed), and faster on the
    small reduced copies :func:`dome_of` works on. Checked for a change every fourth step (steps
    past the fixed point change nothing); non-finite values are left to scikit-image.
    """
    if not (np.isfinite(seed).all() and np.isfinite(mask).all()):
        from skimage.morphology import reconstruction

        return reconstruction(seed, mask, method="dilation")
    mask = np.ascontiguousarray(mask, dtype=np.float64)
    out = np.minimum(seed, mask)
    before, grown = np.empty_like(out), np.empty_like(out)
    while True:
        before[...] = out
        for _ in range(4):
            cv2.dilate(out, _SQUARE_3, dst=grown, borderType=cv2.BORDER_CONSTANT, borderValue=-np.inf)
            cv2.min(grown, mask, dst=out)
        if np.array_equal(out, before):
            return out


def _group_max(keys: np.ndarray, values: np.ndarray, n: int) -> np.ndarray:
    """The largest of ``values`` at each key ``0 .. n-1`` (−inf where a key has none): ``np.maximum.at`` on a
    −inf array, by one stable sort and a reduction per run of equal keys."""
    out = np.full(n, -np.inf)
    if keys.size:
        order = np.argsort(keys, kind="stable")
        k = keys[order]
        starts = np.flatnonzero(np.r_[True, k[1:] != k[:-1]])
        out[k[starts]] = np.maximum.reduceat(values[order], starts)
    return out


def dome_of(field: np.ndarray, region: np.ndarray, top: int, *, dip_k: float, line_px: float) -> np.ndarray:
    """The part of ``region`` in the same dome of ``field`` as the pixel ``top`` (flat index).

    Domes are the maxima of ``field`` standing at least ``dip_k`` above the saddle to any higher
    one (h-maxima, morphological reconstruction), separated by the watershed of ``−field``; the
    field is the contrast with its narrow members taken out (:func:`without_lines`), so a joist
    running between two defects is not a ridge joining them. Computed on a copy reduced by
    ``⌊line_px/4⌋`` (a member is about 4 px across there: domes are broad).
    """
    m, n = field.shape
    f = max(1, int(line_px // 4))
    if m // f < 3 or n // f < 3:
        return region
    inside = _reduce(region.astype(np.float32), f) >= 0.5
    small = np.where(inside, _reduce(np.where(region, field, 0.0), f), 0.0)
    if not inside.any():
        return region
    small = np.where(inside, small, float(small[inside].min()))
    # h-domes: f − reconstruction(f − h) is positive on every dome; a dome standing h above its
    # saddle reaches h (equal maxima joined above the saddle are one dome, not several markers)
    f64 = small.astype(np.float64)
    domes = f64 - _reconstruct(f64 - dip_k, f64)
    comp, k = ndimage.label(domes > 1e-9 * max(dip_k, 1e-12))
    if k <= 1:
        return region
    at = np.flatnonzero(comp)  # the highest point of each dome (scipy.ndimage.maximum of its labels)
    tall = np.flatnonzero(_group_max(comp.ravel()[at], domes.ravel()[at], k + 1)[1:] >= 0.999 * dip_k) + 1
    markers, k = ndimage.label(np.isin(comp, tall) & inside)
    if k <= 1:
        return region
    from skimage.segmentation import watershed  # only here: scikit-image is loaded when two domes are split

    basins = watershed(-small, markers, mask=inside)
    tr, tc = divmod(int(top), n)
    own = basins[min(tr // f, basins.shape[0] - 1), min(tc // f, basins.shape[1] - 1)]
    if own == 0:
        return region
    full = _expand(basins.astype(np.int32), (m, n), cv2.INTER_NEAREST)
    return region & ((full == own) | (full == 0))
