"""The difference map of a registered pair, its common drift removed, and its noise.

ΔT = pressurised − registered reference. Between the two shots the whole sound surface
moves together by a few tenths of a kelvin (the room air, the sky, the heating cycle); that
common drift is a plane ``a + b·col + c·row`` fitted to ΔT by iteratively reweighted least
squares with Tukey's biweight (Beaton & Tukey 1974; weights zero beyond 4.685 robust
standard deviations), so the leaks, a minority of the pixels, do not pull it. The noise of
ΔT is that of both images (each by :func:`irseg.segmentation.estimate_noise_k`) added in
quadrature.
"""

from __future__ import annotations

import math

import numpy as np

from .._shared import robust_sigma

__all__ = ["remove_drift", "smooth_nan", "smoothed_noise", "smoothing_px", "SMOOTH_PX"]

#: Gaussian smoothing of ΔT before detection, pixels (σ): the least, for a camera of usual noise.
SMOOTH_PX = 1.0
#: Smoothed noise aimed at, K: a noisier pair is smoothed more (up to :data:`MAX_SMOOTH_PX`), so that
#: noise bumps on the fading tail of a jet do not stand out as leaks of their own.
TARGET_NOISE_K = 0.03
MAX_SMOOTH_PX = 3.0
_TUKEY_C = 4.685


def remove_drift(change_k: np.ndarray) -> tuple[np.ndarray, float]:
    """``change_k`` minus its robust plane; the plane's value at the image centre.

    Parameters
    ----------
    change_k : (M, N) float ndarray
        Pressurised minus registered reference, K; NaN where unknown.

    Returns
    -------
    difference_k : (M, N) float32 ndarray
        NaN where ``change_k`` is NaN.
    drift_k : float
        The common drift removed, at the image centre, K.
    """
    rows, cols = change_k.shape
    step = max(1, int(math.sqrt(rows * cols / 40_000)))
    sub = change_k[::step, ::step]
    rr, cc = np.mgrid[0:rows:step, 0:cols:step]
    ok = np.isfinite(sub)
    if ok.sum() < 10:
        return change_k.astype(np.float32), 0.0
    y = sub[ok].astype(np.float64)
    cr, cc0 = (rows - 1) / 2.0, (cols - 1) / 2.0
    design = np.column_stack([np.ones_like(y), (cc[ok] - cc0) / cols, (rr[ok] - cr) / rows])
    weights = np.ones_like(y)
    coef = np.zeros(3)
    for _ in range(8):
        w = np.sqrt(weights)
        coef = np.linalg.lstsq(design * w[:, None], y * w, rcond=None)[0]
        resid = y - design @ coef
        scale = robust_sigma(resid[weights > 0]) or 1e-6
        u = resid / (_TUKEY_C * scale)
        weights = np.where(np.abs(u) < 1.0, (1.0 - u * u) ** 2, 0.0)
    full_r, full_c = np.mgrid[0:rows, 0:cols]
    plane = coef[0] + coef[1] * (full_c - cc0) / cols + coef[2] * (full_r - cr) / rows
    return (change_k - plane).astype(np.float32), float(coef[0])


def smooth_nan(values: np.ndarray, sigma_px: float = SMOOTH_PX) -> np.ndarray:
    """Gaussian smoothing that ignores NaN (normalised convolution); NaN stays NaN."""
    import cv2

    ok = np.isfinite(values)
    filled = np.where(ok, values, 0.0).astype(np.float32)
    num = cv2.GaussianBlur(filled, (0, 0), sigma_px)
    den = cv2.GaussianBlur(ok.astype(np.float32), (0, 0), sigma_px)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = num / den
    out[~ok] = np.nan
    return out


def smoothed_noise(noise_k: float, sigma_px: float = SMOOTH_PX) -> float:
    """Standard deviation of white noise ``noise_k`` after a 2-D Gaussian of ``sigma_px``: σ / (2 √π s)."""
    return float(noise_k) / (2.0 * math.sqrt(math.pi) * float(sigma_px))


def smoothing_px(noise_k: float) -> float:
    """The Gaussian's σ for ΔT of per-pixel noise ``noise_k``: the one that leaves :data:`TARGET_NOISE_K`,
    between :data:`SMOOTH_PX` and :data:`MAX_SMOOTH_PX` (1 px for NETD up to about 0.07 K per image)."""
    wanted = float(noise_k) / (2.0 * math.sqrt(math.pi) * TARGET_NOISE_K)
    return float(min(MAX_SMOOTH_PX, max(SMOOTH_PX, wanted)))
