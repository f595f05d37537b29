"""Anomalies with or without a jump: significant contrast against the sound surface, at the defect's scale.

An anomaly is a patch of the surface whose temperature departs from the sound
surface (``irseg.analysis._sound_surface``) by more than the noise allows *at the
size of the patch*. Nothing here needs an edge: a soft, graded or diffuse defect
is found by its contrast and its area.

Steps of :func:`detect_regions`
-------------------------------
1. **Sound surface** ``S`` (robust, local, follows smooth variation and lens
   shading) and the residual ``R = T − S``.
2. **Noise** ``σ``: the per-pixel noise (given, or a robust estimate from the
   residual's second differences).
3. **Contrast at scale** (a bank of matched filters): ``R_s = G_s * R`` for
   Gaussian windows of standard deviation ``s`` from the smallest defect of
   interest up to half the sound length, spaced by √2. For white noise of
   standard deviation ``σ`` a linear filter with weights ``h`` leaves noise of
   standard deviation ``σ·√(Σh²)``; for a 2-D Gaussian of std ``s`` pixels
   (``∫g² = 1/(4πs²)``)::

       σ_s = σ / (2·√π·s)  ≈ 0.282·σ/s

   (the discrete sum is used, which differs from this for ``s`` below about one
   pixel). Camera frames are not white (fixed column patterns, low-frequency
   drift) and the sound surface is a model, so the σ used at each scale is the
   larger of the white-noise value and the measured robust spread (1.4826·MAD)
   of ``R_s`` over the sound pixels: significance is judged against what the
   sound surface actually does at that scale. Near the frame edge and masked
   pixels the window holds fewer samples and the smoothed noise is larger (up to
   2× in a corner): each pixel's threshold is raised by that factor
   ``√(Σg²v)/(Σg·v)`` relative to the frame's inside (``v``: valid pixels).
4. **Hysteresis**: seeds where ``|R_s| ≥ k_hi·σ_s`` at any scale, grown over
   pixels where ``|R_s| ≥ k_lo·σ_s`` at any scale (same sign). On white noise a
   pixel exceeds ``k_hi`` at one scale with probability ``2·(1 − Φ(k_hi))``
   (5.7·10⁻⁷ for 5σ).
5. **Extent — one documented rule**: an anomaly extends to where its contrast
   falls to ``extent_fraction`` (0.5) of its own robust peak contrast. The peak
   is the 99th percentile of the contrast over the grown component minus the
   bias a noise tail adds to it (2.33·σ_fine), measured on ``R`` smoothed at the
   smallest scale whose noise is at most 4 % of the peak (so the half-peak edge
   stands 12 σ clear of the noise). Pieces above half-peak that are joined
   through contrast of at least a quarter of the peak are one anomaly; so the
   rings of a graded wet area, the body of a cold-air fan and a ramp-edged damp
   zone come out as one region each. Holes are filled.
6. **Touching defects of different temperature**: after an anomaly is taken,
   its edge band (the blur ramp, ``rim_px``) is set aside and what remains of
   the grown component is looked at again with its own peak. A remainder whose
   half-peak core touches an anomaly already taken is a *separate* defect only
   if it has its own plateau (the median contrast of its core is at least
   ``plateau_ratio`` (0.85) of its peak); a graded tail has no plateau (its
   median sits near 0.75 of its peak) and is part of the anomaly it falls away
   from. A remainder that does not touch (joined only through weak contrast)
   is an anomaly of its own if it is significant and large enough.

Frame-edge cooling: the sound surface carries an ``exp(−d/λ)`` decay from each frame
edge (λ = 0.2 m), so the cooling toward a corner or a floor/ceiling junction along an
edge of the frame is sound, not an anomaly; an anomaly that reaches the frame edge
says so (``RegionInfo.touches_edge``: its area may be cut).

Parameters are physical (m, m², K) and converted with the pixel footprint when
it is known, else taken as fractions of the frame, so the same surface gives the
same anomalies at any resolution.

Smallest contrast found (white-noise limit)
-------------------------------------------
A disk of area ``A`` (radius ``ρ``) and contrast ``ΔT`` seen through a Gaussian of
std ``s`` peaks at ``ΔT·(1 − e^{−ρ²/2s²})``; against ``σ_s = σ/(2√π s)`` the ratio is
largest for ``ρ²/2s² = u*`` with ``2u*·e^{−u*} = 1 − e^{−u*}`` (u* ≈ 1.256), where
it equals ``ΔT·ρ·√(2π)·0.638/σ ≈ 0.902·ΔT·√(A/p²)/σ`` (``p``: pixel footprint, m).
A seed needs ``k_hi``, so::

    ΔT_min ≈ 1.11 · k_hi · NETD · p / √A

With k_hi = 5 and p = 3.9 mm (640 px across 2.5 m, a 45° lens at 3 m):

==========  ==========  ==========
NETD        A = 0.05 m² A = 0.5 m²
==========  ==========  ==========
0.05 K      0.0048 K    0.0015 K
0.10 K      0.0097 K    0.0031 K
==========  ==========  ==========

These are the limits set by the camera noise alone; in real frames the measured
σ_s (fixed pattern, the sound surface's own misfit, texture) is larger at large
scales and sets the practical limit, and ``min_contrast_k`` (default 0.1 K)
keeps contrasts below what a thermographer would report out. So the smallest
contrast found is ``max(min_contrast_k, ΔT_min)`` with ``σ_s`` as measured
(``info.sigma_k`` per scale).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import cv2
import numpy as np
from scipy import ndimage

from .._shared import MAD_TO_SIGMA
from ._components import EXTENT_FRACTION, JOIN_FRACTION, RegionInfo, extract_component
from ._scales import (
    K_HI,
    contrast_at_scales,
    gaussian_noise_factor,
    min_detectable_contrast_k,
    pixel_noise_k,
    scale_bank,
)
from ._sound_surface import fit_sound_surface

__all__ = ["detect_regions", "DetectionInfo", "RegionInfo", "gaussian_noise_factor", "scale_bank",
           "contrast_at_scales", "pixel_noise_k", "min_detectable_contrast_k", "JOIN_FRACTION", "MIN_CONTRAST_K",
           "MIN_AREA_M2"]

K_LO = 3.0
_SQUARE = ndimage.generate_binary_structure(2, 2)
MIN_AREA_M2 = 0.0025  # 50 × 50 mm: a fixing or a tie is the smallest thing worth reporting
MIN_AREA_FRACTION = 1e-3  # without geometry: 0.1 % of the frame
SOUND_LENGTH_M = 0.2
_BAND_PX = 256  # rows per band when frame-sized block sums are formed
WORK_MAX_SIDE_PX = 800  # larger frames are detected on block means (the lengths are physical)
LINE_WIDTH_M = 0.12  # members (studs, joists) up to 100 mm wide, blurred: never a ridge joining two defects
LINE_WIDTH_FRACTION = 0.05  # without geometry: of the frame's long side
EDGE_LENGTH_M = 0.2  # decay of the cooling toward a corner or junction at a frame edge
EDGE_LENGTH_FRACTION = 0.08
SOUND_LENGTH_FRACTION = 0.15  # without geometry: of the frame's long side
MIN_CONTRAST_K = 0.1
MAX_DEFECT_FRACTION = 0.3  # largest defect the scale bank is sized for
MAX_EXCLUDED_FRACTION = 0.5  # the second sound surface needs at least half of the frame


@dataclass(frozen=True)
class DetectionInfo:
    """What :func:`detect_regions` used and found."""

    noise_k: float
    pixel_m: float | None
    min_area_px: int
    sound_length_px: float
    scales_px: tuple[float, ...]
    sigma_k: tuple[float, ...]  # σ_s used at each scale
    sigma_white_k: tuple[float, ...]  # the white-noise value at each scale
    k_hi: float
    k_lo: float
    extent_fraction: float
    surface_scale_k: float
    regions: tuple[RegionInfo, ...]
    components: np.ndarray  # (M, N) int32: significant components, −k cold, +k warm, 0 none
    members_k: np.ndarray  # (M, N): the own contrast of narrow members in or beside broad anomalies, K (signed)
    line_px: float = 0.0  # the widest narrow member (stud, joist), px


def detect_regions(
    temperature_c: np.ndarray,
    mask: np.ndarray | None,
    *,
    noise_k: float | None,
    pixel_m: float | None = None,
    min_area_m2: float = MIN_AREA_M2,
    sound_length_m: float = SOUND_LENGTH_M,
    min_contrast_k: float = MIN_CONTRAST_K,
    k_hi: float = K_HI,
    k_lo: float = K_LO,
    extent_fraction: float = EXTENT_FRACTION,
    split_plateaus: bool = True,
    filled: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, DetectionInfo]:
    """Find anomalies as significant contrast against a robust local sound surface.

    Parameters
    ----------
    temperature_c : (M, N) float ndarray
        Surface temperature, °C.
    mask : (M, N) bool ndarray or None
        True on invalid pixels (as ``ThermalFrame.mask``).
    noise_k : float or None
        Per-pixel noise (NETD or the segmenter's estimate), K; None estimates it
        from the residual.
    pixel_m : float, optional
        Pixel footprint on the surface, m. Without it the physical settings fall
        back to fractions of the frame (``min_area`` 0.1 % of it, the sound length
        15 % of its long side).
    min_area_m2 : float
        Smallest anomaly kept, m².
    sound_length_m : float
        Length on which the sound surface may vary, m.
    min_contrast_k : float
        Smallest peak contrast reported, K.
    k_hi, k_lo : float
        Hysteresis thresholds in units of σ at each scale.
    extent_fraction : float
        The extent ends where the contrast falls to this fraction of the anomaly's peak.
    split_plateaus : bool
        Keep touching defects with their own plateaus apart.
    filled : (M, N) bool ndarray or None
        Pixels filled from their surroundings, not measured (heat emitters, :mod:`._emitters`): never
        left out of the second sound surface (that would open the hole their fill closes).

    Returns
    -------
    labels : (M, N) int32 ndarray
        0 background, 1..n anomalies.
    sound_surface : (M, N) float ndarray
    info : DetectionInfo
    """
    t = np.asarray(temperature_c)
    if t.dtype != np.float32:
        t = t.astype(float, copy=False)
    m, n = t.shape
    invalid = np.zeros((m, n), bool) if mask is None else np.asarray(mask, bool)
    valid = ~invalid & np.isfinite(t)
    f = int(math.ceil(max(m, n) / WORK_MAX_SIDE_PX))
    if f > 1:  # a float32 frame is summed into block means in float64, a band of rows at a time
        return _on_reduced(t, valid, f, noise_k=noise_k, pixel_m=pixel_m, min_area_m2=min_area_m2,
                           sound_length_m=sound_length_m, min_contrast_k=min_contrast_k, k_hi=k_hi, k_lo=k_lo,
                           extent_fraction=extent_fraction, split_plateaus=split_plateaus, filled=filled)
    t = t.astype(float, copy=False)
    t = np.where(valid, t, np.median(t[valid], overwrite_input=True) if valid.any() else 0.0)  # finite: no NaN
    if pixel_m is not None and pixel_m > 0:
        line_px = LINE_WIDTH_M / pixel_m
        min_area_px = max(9, int(round(min_area_m2 / pixel_m**2)))
        length_px = sound_length_m / pixel_m
        edge_px = EDGE_LENGTH_M / pixel_m
    else:
        line_px = LINE_WIDTH_FRACTION * max(m, n)
        edge_px = EDGE_LENGTH_FRACTION * max(m, n)
        min_area_px = max(9, int(round(MIN_AREA_FRACTION * m * n)))
        length_px = SOUND_LENGTH_FRACTION * max(m, n)
    length_px = float(min(max(length_px, 4.0), max(m, n)))

    noise = float(noise_k) if noise_k is not None and noise_k > 0 else pixel_noise_k(t, valid)
    noise = max(noise, 1e-6)
    scales = scale_bank(min_area_px, MAX_DEFECT_FRACTION * m * n, 0.5 * length_px)
    # two passes: the second sound surface leaves out every pixel the first pass found significant
    # (the whole grown component, tails included), so soft tails cannot pull the surface toward a defect
    exclude = np.zeros((m, n), bool)
    surf = None
    weights: dict = {}  # what depends on the valid pixels only: the same in both passes and for fine()
    for _ in range(2):
        surf = fit_sound_surface(t, invalid=~valid | exclude, length_px=length_px, noise_k=noise,
                                 edge_length_px=edge_px, start=surf)
        resid = t - surf.surface
        if noise_k is None or noise_k <= 0:
            noise = max(pixel_noise_k(resid, valid), 1e-6)
        gains: list[np.ndarray] = []
        pyramid: dict = {}  # the residual's reduced copies: the last pass's serve fine() below
        fields = contrast_at_scales(resid, valid, scales, gains, pyramid=pyramid, weights=weights)
        sound = valid & ~exclude & (surf.weight > 0.5)
        if sound.sum() < 0.1 * valid.sum():
            sound = valid
        sig, sig_w = _sigmas(fields, gains, scales, sound, noise)
        zs = [_ratio(f, sg * g) for f, sg, g in zip(fields, sig, gains)]
        grown = _hysteresis(zs, k_hi, k_lo, valid)
        found = (grown[-1][0] > 0) | (grown[1][0] > 0)
        found &= True if filled is None else ~np.asarray(filled, bool)  # a fill is no measurement: kept
        if not found.any() or exclude.any():
            break
        exclude = found
        if found[valid].mean() > MAX_EXCLUDED_FRACTION:
            # the most significant pixels first: the second surface keeps at least half of the frame
            zmax = np.abs(zs[0])
            for zz in zs[1:]:
                np.maximum(zmax, np.abs(zz), out=zmax)
            kept = zmax[valid]
            cut = float(np.quantile(kept[:: max(1, kept.size // 50_000)], 1.0 - MAX_EXCLUDED_FRACTION))
            exclude = found & (zmax > cut)

    fine_cache: dict[float, np.ndarray] = {}

    def fine(s: float) -> np.ndarray:
        if s not in fine_cache:
            fine_cache[s] = contrast_at_scales(resid, valid, (s,), pyramid=pyramid, weights=weights)[0]
        return fine_cache[s]

    labels = np.zeros((m, n), np.int32)
    components = np.zeros((m, n), np.int32)
    members = np.zeros((m, n))
    regions: list[RegionInfo] = []
    for sign in (-1, 1):
        comp, has_seed = grown[sign]
        components[comp > 0] = sign * comp[comp > 0]
        if not has_seed.any():
            continue
        for k, sl in enumerate(ndimage.find_objects(comp), start=1):
            if sl is None or not has_seed[k]:
                continue
            extract_component(
                comp=comp, k=k, sl=sl, sign=sign, fine=fine, noise=noise, labels=labels, regions=regions,
                min_area_px=min_area_px, min_contrast_k=min_contrast_k, k_hi=k_hi, line_px=line_px,
                extent_fraction=extent_fraction, members=members,
                split_plateaus=split_plateaus, valid=valid,
            )
    info = DetectionInfo(noise, pixel_m, min_area_px, length_px, scales, tuple(sig), tuple(sig_w), k_hi, k_lo,
                         extent_fraction, surf.scale_k, tuple(regions), components, members, float(line_px))
    return labels, surf.surface, info


def _on_reduced(t: np.ndarray, valid: np.ndarray, f: int, *, noise_k: float | None, pixel_m: float | None,
                **settings) -> tuple[np.ndarray, np.ndarray, DetectionInfo]:
    """Detection on ``f``×``f`` block means of the valid pixels, brought back to the frame.

    The detection's lengths are physical, so a frame finer than :data:`WORK_MAX_SIDE_PX` on its long
    side holds no more information at the scales it works on; the block means keep the noise of a
    pixel over ``f`` (white noise). Labels, components and members come back by block (nearest), the
    sound surface bilinearly; region areas are counted again on the frame.
    """
    m, n = t.shape
    mb, nb = -(-m // f), -(-n // f)
    cnt, sums = np.zeros((mb, nb)), np.zeros((mb, nb))
    band = max(1, _BAND_PX // f)  # block rows per band: float64 temporaries of one band only (issue 15)
    for b0 in range(0, mb, band):
        r0, r1 = b0 * f, min(m, (b0 + band) * f)
        k = -(-(r1 - r0) // f)
        tv = np.zeros((k * f, nb * f))
        vv = np.zeros((k * f, nb * f))
        tv[: r1 - r0, :n] = np.where(valid[r0:r1], t[r0:r1], 0.0)
        vv[: r1 - r0, :n] = valid[r0:r1]
        cnt[b0 : b0 + k] = vv.reshape(k, f, nb, f).sum(axis=(1, 3))
        sums[b0 : b0 + k] = tv.reshape(k, f, nb, f).sum(axis=(1, 3))
    small = sums / np.maximum(cnt, 1.0)
    small_invalid = cnt < 0.5 * f * f
    filled = settings.pop("filled", None)
    if filled is not None:  # a block mostly filled is filled
        fb = np.zeros((mb * f, nb * f))
        fb[:m, :n] = np.asarray(filled, bool) & valid
        filled = fb.reshape(mb, f, nb, f).sum(axis=(1, 3)) > 0.5 * np.maximum(cnt, 1.0)
    labels, surface, info = detect_regions(
        small, small_invalid, noise_k=None if noise_k is None else float(noise_k) / f,
        pixel_m=None if pixel_m is None else pixel_m * f, filled=filled, **settings)

    def up(a: np.ndarray) -> np.ndarray:
        return np.repeat(np.repeat(a, f, axis=0), f, axis=1)[:m, :n]

    big = up(_narrow(labels))
    big[~valid] = 0
    areas = np.bincount(big.ravel(), minlength=len(info.regions) + 1)
    surf = cv2.resize(surface.astype(np.float32), (nb * f, mb * f), interpolation=cv2.INTER_LINEAR)[:m, :n]
    regions = tuple(replace(r, area_px=int(areas[r.label]), fine_scale_px=r.fine_scale_px * f) for r in info.regions)
    info = replace(
        info, noise_k=info.noise_k * f, min_area_px=max(9, info.min_area_px * f * f),
        sound_length_px=info.sound_length_px * f, scales_px=tuple(s * f for s in info.scales_px), regions=regions,
        components=up(_narrow(info.components)), members_k=up(info.members_k.astype(np.float32)),
        line_px=info.line_px * f,
    )
    return big, surf, info  # float32 fields of the frame's size


def _narrow(a: np.ndarray) -> np.ndarray:
    """Integer labels as int16 when every value fits: half the memory of their frame-sized copy (issue 15)."""
    return a.astype(np.int16) if a.size == 0 or int(np.abs(a).max()) < 2**15 else a


def _sigmas(fields: list[np.ndarray], gains: list[np.ndarray], scales: tuple[float, ...], sound: np.ndarray,
            noise: float) -> tuple[list[float], list[float]]:
    """σ_s used at each scale (the larger of the white-noise value and the robust spread of ``R_s`` over a regular
    subsample of the sound pixels, at most about 40 000) and the white-noise values."""
    step = max(1, int(sound.sum() // 40_000))
    flat = np.flatnonzero(sound)[::step]  # raster order
    sr, sc = np.divmod(flat, sound.shape[1])

    def at(a: np.ndarray) -> np.ndarray:
        return np.take(a.reshape(-1), flat) if a.flags.c_contiguous else a[sr, sc]

    sig, sig_w = [], []
    for s, f, g in zip(scales, fields, gains):
        sw = noise * gaussian_noise_factor(s)
        vals = at(f) / at(g)  # g > 0 on valid pixels; 0 deep inside a masked area
        emp = MAD_TO_SIGMA * float(np.median(np.abs(vals - np.median(vals))))
        sig.append(max(sw, emp))
        sig_w.append(sw)
    return sig, sig_w


def _hysteresis(zs: list[np.ndarray], k_hi: float, k_lo: float, valid: np.ndarray) -> dict:
    """:func:`_grown` of each sign (−1, +1) from the highest and lowest ``z`` over the scales (a pixel passes a
    threshold at some scale when its extreme does)."""
    z_hi, z_lo = zs[0].copy(), zs[0].copy()
    for zz in zs[1:]:
        np.fmax(z_hi, zz, out=z_hi)
        np.fmin(z_lo, zz, out=z_lo)
    return {-1: _grown(z_lo <= -k_hi, z_lo <= -k_lo, valid), 1: _grown(z_hi >= k_hi, z_hi >= k_lo, valid)}


def _grown(seed: np.ndarray, grow: np.ndarray, valid: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Hysteresis of one sign over all scales of ``z = R_s/σ_s``, given where ``z`` reaches ``k_hi`` (``seed``) and
    ``k_lo`` (``grow``) at some scale: (component labels, components with a seed)."""
    seed &= valid
    grow &= valid
    comp, nc = ndimage.label(grow, structure=_SQUARE)
    has_seed = np.zeros(nc + 1, bool)
    if nc:
        has_seed[comp[seed]] = True
    has_seed[0] = False
    np.multiply(comp, np.take(has_seed, comp), out=comp)  # components without a seed set to 0
    return comp, has_seed


def _ratio(f: np.ndarray, g: np.ndarray) -> np.ndarray:
    """``f / g``, 0 where ``g`` is 0 (pixels deep inside a masked area that no valid pixel reaches)."""
    if g.min() > 0:  # no such pixel: the plain division gives the same values
        return f / g
    out = np.zeros_like(f)
    np.divide(f, g, out=out, where=g > 0)
    return out
