"""Registration of the reference thermogram onto the pressurised one.

The two shots of a pair are taken minutes apart; the tripod may be moved or knocked in
between (tens of pixels, a few degrees, a small zoom), and the surface itself changes: the
leaks cool it locally and the whole wall drifts by a few tenths of a kelvin. The method:

1. **Structure images.** Each thermogram minus its Gaussian blur at 12 px (a band-pass):
   the edges of studs, frames, corners and defects stay, the smooth drift goes.
2. **Coarse shift.** Phase correlation (Kuglin & Hines 1975) of the structure images at a
   quarter of the size, Hann-windowed, gives the start.
3. **Affine refinement.** The enhanced correlation coefficient (ECC, Evangelidis & Psarakis
   2008, ``cv2.findTransformECC``) at a quarter, then half the size; ECC is invariant to a
   gain and offset of the intensities, so a uniform drift does not bias it.
4. **Robust pass.** Pixels whose temperature changed beyond 4 robust standard deviations
   (the leaks, dilated) are masked out, and ECC runs again at full size from the estimate.
5. **Quality.** Overlap (fraction of the pressurised frame the reference covers), the ECC
   correlation, and a residual in pixels: the registered structure images are cut into
   tiles and the shift still left in each tile is measured by phase correlation; ``rms_px``
   is their root mean square.

The pair fails (:class:`irseg.errors.InputError`) when the views do not overlap by
:data:`MIN_OVERLAP`, when the correlation stays below :data:`MIN_CORRELATION`, when the
residual exceeds :data:`MAX_RESIDUAL_PX`, or when the transform is not that of the same view
(scale outside 0.9-1.1, rotation beyond 15°, or a map that stretches one direction more than
the other by over 4 %: a camera moved on its tripod before a plane wall changes shift, turn and zoom,
not the aspect).
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ._types import Registration

__all__ = ["register", "MIN_OVERLAP", "MIN_CORRELATION", "MAX_RESIDUAL_PX", "warp_reference"]

#: Smallest fraction of the pressurised frame the reference must cover.
MIN_OVERLAP = 0.5
#: Smallest ECC correlation of the registered structure images: below it the views differ (two shots
#: of one view correlate by 0.95-0.99 at a usual NETD; another wall with a window in the same place by
#: about 0.7).
MIN_CORRELATION = 0.8
#: Largest residual misregistration, pixels, tile by tile: beyond it the views do not agree.
MAX_RESIDUAL_PX = 1.0
_BAND_PX = 12.0
_TILE_SHIFT_NOISE_PX = 0.05
_MAX_ROTATION_DEG = 15.0
#: Zoom between the shots a re-placed tripod gives (a few per cent; common practice): a larger one is
#: another shot of the wall, or another wall of the same construction that happens to correlate.
_SCALE_RANGE = (0.9, 1.1)
#: Largest ratio of the map's two principal stretches (singular values): a moved camera before a plane
#: wall gives a near-similarity (perspective of a few degrees of turn stretches well under 1 %).
_MAX_ANISOTROPY = 1.04


def _structure(t: np.ndarray) -> np.ndarray:
    """The band-pass structure image: the thermogram minus its blur, float32."""
    import cv2

    t32 = np.asarray(t, dtype=np.float32)
    t32 = t32 - np.float32(np.median(t32))
    return t32 - cv2.GaussianBlur(t32, (0, 0), _BAND_PX)


def _down(img: np.ndarray, factor: int) -> np.ndarray:
    import cv2

    if factor == 1:
        return img
    rows, cols = img.shape
    return cv2.resize(img, (max(8, cols // factor), max(8, rows // factor)), interpolation=cv2.INTER_AREA)


def _coarse_shift(a: np.ndarray, b: np.ndarray) -> tuple[float, float]:
    """(dx, dy) such that ``a(x) ≈ b(x + d)``: phase correlation with a Hann window."""
    import cv2

    window = cv2.createHanningWindow((a.shape[1], a.shape[0]), cv2.CV_32F)
    (dx, dy), _ = cv2.phaseCorrelate(a.astype(np.float32), b.astype(np.float32), window)
    return float(dx), float(dy)


def _ecc(template: np.ndarray, moving: np.ndarray, warp: np.ndarray, mask: np.ndarray | None,
         iterations: int) -> tuple[float, np.ndarray]:
    import cv2

    criteria = (cv2.TERM_CRITERIA_EPS | cv2.TERM_CRITERIA_COUNT, iterations, 1e-5)
    cc, out = cv2.findTransformECC(template, moving, warp.astype(np.float32), cv2.MOTION_AFFINE, criteria,
                                   mask, 3)
    return float(cc), out.astype(np.float64)


def warp_reference(reference: np.ndarray, matrix: np.ndarray, shape: tuple[int, int],
                   *, nearest: bool = False) -> np.ndarray:
    """The reference resampled onto the pressurised image's pixels (NaN outside the reference)."""
    import cv2

    flags = (cv2.INTER_NEAREST if nearest else cv2.INTER_LINEAR) | cv2.WARP_INVERSE_MAP
    src = np.asarray(reference, dtype=np.float32)
    return cv2.warpAffine(src, np.asarray(matrix, dtype=np.float64), (shape[1], shape[0]), flags=flags,
                          borderMode=cv2.BORDER_CONSTANT, borderValue=float("nan"))


def _covered(matrix: np.ndarray, shape_pressed: tuple[int, int], shape_ref: tuple[int, int]) -> np.ndarray:
    """Pixels of the pressurised image whose surface point lies inside the reference frame."""
    rows, cols = np.mgrid[0:shape_pressed[0], 0:shape_pressed[1]]
    x = matrix[0, 0] * cols + matrix[0, 1] * rows + matrix[0, 2]
    y = matrix[1, 0] * cols + matrix[1, 1] * rows + matrix[1, 2]
    return (x >= 0) & (x <= shape_ref[1] - 1) & (y >= 0) & (y <= shape_ref[0] - 1)


def _similarity(matrix: np.ndarray, shape: tuple[int, int]) -> tuple[tuple[float, float], float, float]:
    """Shift of the centre (row, col), rotation (deg) and scale of the map reference -> pressurised."""
    full = np.vstack([matrix, [0.0, 0.0, 1.0]])
    forward = np.linalg.inv(full)  # reference (col, row) -> pressurised (col, row)
    a = forward[:2, :2]
    scale = math.sqrt(abs(float(np.linalg.det(a))))
    rotation = math.degrees(math.atan2(a[1, 0] - a[0, 1], a[0, 0] + a[1, 1]))
    centre = np.array([(shape[1] - 1) / 2.0, (shape[0] - 1) / 2.0, 1.0])
    moved = forward @ centre
    return (float(moved[1] - centre[1]), float(moved[0] - centre[0])), rotation, scale


def _tile_residual(pressed_s: np.ndarray, ref_s: np.ndarray, valid: np.ndarray, noise: float) -> float | None:
    """Root mean square of the shifts left between the registered structure images, tile by tile.

    Each tile's (64 px, smaller in small images) shift is one Lucas-Kanade step (Lucas & Kanade
    1981): the least-squares solution of ``∇a · d = b − a`` over the tile, whose noise has the
    covariance ``σ_d² (∑ ∇a ∇aᵀ)⁻¹``. A tile is used when that noise stays under 0.05 px in every
    direction (``σ_d`` = 0.4 × the image noise: both images after the band-pass and the 1 px blur);
    a tile whose structure runs one way only cannot tell a shift along it and is left out.
    """
    import cv2

    a = cv2.GaussianBlur(pressed_s.astype(np.float32), (0, 0), 1.0)
    b = cv2.GaussianBlur(ref_s.astype(np.float32), (0, 0), 1.0)
    g_r, g_c = np.gradient(0.5 * (a + b))
    rows, cols = a.shape
    size = int(max(32, min(64, rows // 4, cols // 4)))
    shifts = []
    for r0 in range(0, rows - size + 1, size):
        for c0 in range(0, cols - size + 1, size):
            tile = (slice(r0, r0 + size), slice(c0, c0 + size))
            if valid[tile].mean() < 0.98:
                continue
            gc, gr, diff = g_c[tile].ravel(), g_r[tile].ravel(), (b[tile] - a[tile]).ravel()
            normal = np.array([[gc @ gc, gc @ gr], [gc @ gr, gr @ gr]], dtype=np.float64)
            evals = np.linalg.eigvalsh(normal)
            if evals[0] < 0.02 * evals[1] or evals[0] < (0.4 * noise / _TILE_SHIFT_NOISE_PX) ** 2:
                continue  # the tile's shift would carry more than 0.05 px of noise in some direction
            d = np.linalg.solve(normal, -np.array([gc @ diff, gr @ diff], dtype=np.float64))
            shifts.append(float(d @ d))
    if len(shifts) < 3:
        return None
    return float(math.sqrt(float(np.median(shifts))))


def register(reference_c: np.ndarray, pressed_c: np.ndarray, *, noise_k: float,
             names: tuple[str, str] = ("reference", "pressurised image")) -> Registration:
    """Register the reference thermogram onto the pressurised one (see the module notes).

    Parameters
    ----------
    reference_c, pressed_c : (M, N) float ndarray
        Surface temperatures, °C, of the two shots (their sizes may differ; masked pixels
        already filled, as in :class:`irseg.types.ThermalFrame`).
    noise_k : float
        Per-pixel noise of the pressurised image, K (which tiles hold structure).
    names : (str, str)
        The two images' names, for messages.

    Returns
    -------
    Registration

    Raises
    ------
    InputError
        The views do not overlap enough or do not match (a clear message naming both images).
    """
    import cv2

    ref_name, pressed_name = names
    fail = (f"{pressed_name}: cannot register its reference {ref_name} onto it: ")
    fix = ("take both shots of the same view from the same place (a moved tripod is fine, a different "
           "view is not), or name the right reference in [pressure] reference")
    if np.shape(pressed_c) != np.shape(reference_c):
        raise InputError(fail + f"the images differ in size ({np.shape(pressed_c)} and {np.shape(reference_c)}); "
                         "take both shots with the same camera at the same resolution")
    a_full = _structure(pressed_c)
    b_full = _structure(reference_c)
    a4, b4 = _down(a_full, 4), _down(b_full, 4)
    dx, dy = _coarse_shift(a4, b4)
    warp = np.array([[1.0, 0.0, dx], [0.0, 1.0, dy]])  # pressed -> reference, quarter size
    try:
        for factor, iterations in ((4, 60), (2, 40)):
            if factor == 2:
                warp[:, 2] *= 2.0
            _, warp = _ecc(_down(a_full, factor), _down(b_full, factor), warp, None, iterations)
        warp[:, 2] *= 2.0
        registered = warp_reference(np.asarray(reference_c, np.float32), warp, pressed_c.shape)
        change = np.asarray(pressed_c, np.float32) - registered
        inside = np.isfinite(change)
        if inside.mean() < 0.2:
            raise InputError(fail + f"the views overlap by {inside.mean():.0%}, less than {MIN_OVERLAP:.0%}; " + fix)
        centred = change[inside] - np.median(change[inside])
        spread = 1.4826 * float(np.median(np.abs(centred))) + 1e-6
        changed = np.zeros(change.shape, np.uint8)
        changed[inside] = (np.abs(centred) > 4.0 * spread).astype(np.uint8)
        changed = cv2.dilate(changed, np.ones((9, 9), np.uint8))
        keep_ref = (warp_reference(1.0 - changed.astype(np.float32), np.linalg.inv(
            np.vstack([warp, [0, 0, 1]]))[:2], reference_c.shape) > 0.5).astype(np.uint8)
        cc, warp = _ecc(a_full, b_full, warp, keep_ref if keep_ref.mean() > 0.3 else None, 30)
    except cv2.error:
        raise InputError(fail + "no transform brings the two views together (the registration does not converge); "
                         + fix) from None
    covered = _covered(warp, pressed_c.shape, reference_c.shape)
    overlap = float(covered.mean())
    shift, rotation, scale = _similarity(warp, pressed_c.shape)
    if overlap < MIN_OVERLAP:
        raise InputError(fail + f"the views overlap by {overlap:.0%}, less than {MIN_OVERLAP:.0%}; " + fix)
    stretch = np.linalg.svd(warp[:, :2], compute_uv=False)
    anisotropy = float(stretch[0] / stretch[1]) if stretch[1] > 0 else math.inf
    if cc < MIN_CORRELATION or not (_SCALE_RANGE[0] <= scale <= _SCALE_RANGE[1]) \
            or abs(rotation) > _MAX_ROTATION_DEG or anisotropy > _MAX_ANISOTROPY:
        raise InputError(
            fail + f"the best match correlates by {cc:.2f} (at least {MIN_CORRELATION} expected) with scale "
            f"{scale:.3f} (0.9-1.1 expected), rotation {rotation:.1f}° and a stretch of one direction against "
            f"the other of {anisotropy:.3f} (at most {_MAX_ANISOTROPY} expected): the images do not show the "
            "same view; " + fix)
    ref_s = warp_reference(b_full, warp, pressed_c.shape)
    valid = covered & np.isfinite(ref_s)
    rms = _tile_residual(a_full, np.nan_to_num(ref_s), valid, float(noise_k))
    if rms is not None and rms > MAX_RESIDUAL_PX:
        raise InputError(fail + f"after the best match the views still differ by {rms:.1f} px tile by tile (at most "
                         f"{MAX_RESIDUAL_PX:g} px expected): the images do not show the same view; " + fix)
    return Registration(matrix=warp, shift_px=shift, rotation_deg=float(rotation), scale=float(scale),
                        rms_px=rms, overlap=overlap, correlation=float(cc))
