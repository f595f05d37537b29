"""A robust, local model of the sound surface: what the wall would look like without its anomalies.

The sound surface of a thermogram is not a plane. Inside air is stratified (not
always linearly), surfaces cool toward external corners and floor junctions, an
outside face sees more sky at the top than at the bottom, and the camera itself
adds a smooth radial shading from the centre of the frame to its corners (of the
order of 1 K on uncooled cameras). All of these vary smoothly over a length of
tens of centimetres or more, or are tied to the frame. Anomalies are what departs
from that smooth field, so the model must follow the smooth field *and* ignore
the anomalies while it is fitted, even one that covers a quarter of the frame.

Model (fitted on a coarse grid of block means, ``block_px`` pixels a side)::

    S(x, y) = P(x, y) + ℓ(x, y)

- ``P``: a global part tied to the frame: a quadratic in the normalised frame
  coordinates ``x, y ∈ [−1, 1]`` (plane, curvature, twist; ``x² + y²`` is the
  ``r²`` shading term) plus ``r⁴`` about the frame centre, so the radial shading
  of the lens, which grows fastest at the corners, is absorbed there too, where
  a local model has neighbours on one side only; optionally (``edge_length_px``)
  a decay ``exp(−d/λ)`` from each of the four frame edges, the shape of the
  cooling toward a corner or a floor/ceiling junction that runs along an edge;
- ``ℓ``: a local correction, the robust first-order *normalized convolution*
  (Knutsson & Westin 1993) of what ``P`` leaves: at every block a plane fitted
  to the residuals in a Gaussian window of std ``length_px``, each block
  weighted by its robust weight. It follows stratification that is not linear
  and sky-view gradients at that length and no shorter, up to the frame edge.
  Where the weights vanish over a large area (inside a big anomaly) the plane's
  offset is shrunk toward zero and its slopes toward flat, so the global part
  bridges the gap instead of an extrapolation from one side.

Robustness: a least-trimmed-squares start of the global part (robust
to up to 45 % of the frame being anomalous), then iteratively reweighted least squares with Tukey's biweight
``w = (1 − (r/c·s)²)²`` for ``|r| < c·s``, else 0, ``c = 4.685`` (95 % efficiency
under Gaussian errors; Holland & Welsch 1977, from memory), on the residual of
each block mean. The scale ``s`` is the normalised median absolute deviation of
the block residuals about their median (1.4826·MAD), floored at the noise of a
block mean; the median is taken over *all* valid blocks, so it stays in the sound
population while anomalies cover less than half of the frame. ``P`` and ``ℓ`` are
updated in turn (backfitting), the local window shrinking from 4 to 2 to 1 sound
lengths, so a large anomaly is excluded by the stiff fits before a flexible one
could follow it. Blocks whose weight falls to zero are excluded:
those are the anomaly candidates, and the surface passes under them.

Soft tails: an anomaly's contrast fades into the noise over a tail (lateral
conduction) whose blocks keep most of their weight and pull the frame-tied terms
toward it (two cold fills in opposite quarters look like a twist). So the fit
ends with a refit at the final sound length on the confidently sound blocks: the
rejected blocks, every block connected to them whose residual has their sign and
exceeds one scale, and a margin of a quarter of the sound length around them are
held out of it (``HOLD_K``, ``HOLD_MARGIN``), as long as a fifth of the blocks
stays (``HOLD_MAX``). A fit started from this one holds them out from its first
pass; its caller leaves the anomalies themselves out, so there the blocks bordering
the left-out area that exceed one scale seed the tails. An edge decay that the held-out blocks leave
unconfirmed is switched off before the refit (the confirmation counts sound data
only). Only the surface changes: the robust scale and the weights returned are those
of every block (what the detector measures the noise on), so the tails are left out
of the fit without being declared anomalous.

Scale choice: the sound length is a physical length (``length_px`` comes from
``sound_length_m`` and the pixel footprint when the geometry is known, else a
fraction of the frame), so the same surface is modelled the same way at any
resolution; the block size follows the frame (about 80 blocks on the long side)
but never exceeds a quarter of the sound length.

References
----------
H. Knutsson, C.-F. Westin, "Normalized and differential convolution", Proc. IEEE
CVPR 1993, 515-523 (from memory).
P. W. Holland, R. E. Welsch, "Robust regression using iteratively reweighted
least-squares", Communications in Statistics - Theory and Methods 6(9), 1977
(from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np
from scipy import ndimage


__all__ = ["SoundSurface", "fit_sound_surface", "TUKEY_C", "EDGE_CONFIRM"]

#: Tukey biweight tuning constant (95 % Gaussian efficiency).
TUKEY_C = 4.685
#: 1/Φ⁻¹(3/4): the MAD of a Gaussian sample times this estimates its standard deviation.
_BLOCKS_LONG_SIDE = 80  # coarse grid: about this many blocks on the long side
_MIN_FILL = 0.25  # a block needs this fraction of valid pixels
_SUPPORT_EPS = 0.05  # shrink the local correction where the weighted support is below ~5 % of full
_SLOPE_RIDGE = 0.05  # and its slopes, likewise (in units of the window's second moment)
_GAP_SLOPE_RIDGE = 1.0  # ... and by the support an excluded area takes away
_LENGTH_STEPS = (4.0, 2.0, 1.0)  # local window, in sound lengths, stiff to flexible
_PER_STEP = 2  # passes per local window
_LTS_BLOCKS = 600  # sub-grid size of the robust start
_LTS_COVERAGE = 0.55
_LTS_STARTS = 40
_LTS_CSTEPS = 3
_LTS_SEED = 20240611
_MEDIAN_HALF_NORMAL = 0.6744897501960817  # Φ⁻¹(0.75) [C]
EDGE_CONFIRM = 0.5  # an edge decay needs half of its energy on blocks kept as sound
HOLD_K = 1.0  # an anomaly's soft tail: blocks connected to it whose residual of its sign exceeds this many scales
HOLD_MARGIN = 0.25  # ... and a margin of this many sound lengths (0.05 m) around it, held out of the refit
HOLD_MAX = 0.8  # at most this share of the fitted blocks is held out (the frame-tied terms need sound data)
EDGE_REACH = 3.0  # an edge decay's reach, decay lengths (exp(-3): 5 % of it left; common practice)


@dataclass(frozen=True)
class SoundSurface:
    """A fitted sound surface.

    Attributes
    ----------
    surface : (M, N) float ndarray
        The sound surface, same units as the input (°C).
    weight : (M, N) float ndarray
        Final robust weight of each pixel's block (0: excluded as anomalous, 1: sound), by the
        residual of every block (the held-out blocks, ``held``, are not zeroed here).
    scale_k : float
        Robust scale of the block residuals, K (the Tukey scale ``s``).
    block_px : int
        Block size of the coarse grid, px.
    length_px : float
        Sound length (standard deviation of the local Gaussian window), px.
    coefficients : (7,) or (11,) ndarray
        Global part: ``1, x, y, x², xy, y², r⁴`` in normalised frame coordinates, then
        the edge decays (left, right, top, bottom) when they are modelled.
    held : (mb, nb) bool ndarray or None
        Blocks held out of the last pass (anomalies, their soft tails and a margin); a fit
        started from this one holds them out of its first pass too.
    """

    surface: np.ndarray
    weight: np.ndarray
    scale_k: float
    block_px: int
    length_px: float
    coefficients: np.ndarray
    held: np.ndarray | None = None


def _block_means(t: np.ndarray, valid: np.ndarray, b: int) -> tuple[np.ndarray, np.ndarray, tuple[int, int]]:
    """Means over b×b blocks of the valid pixels and the valid fraction (padding counts as invalid)."""
    m, n = t.shape
    mb, nb = -(-m // b), -(-n // b)
    tv = np.zeros((mb * b, nb * b))
    vv = np.zeros((mb * b, nb * b))
    tv[:m, :n] = np.where(valid, t, 0.0)
    vv[:m, :n] = valid
    s = tv.reshape(mb, b, nb, b).sum(axis=(1, 3))
    c = vv.reshape(mb, b, nb, b).sum(axis=(1, 3))
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(c > 0, s / np.maximum(c, 1), 0.0)
    return mean, c / (b * b), (mb, nb)


def _frame_coords(m: int, n: int) -> tuple[float, float, float, float]:
    """(centre row, half height, centre col, half width) of the frame, px."""
    return (m - 1) / 2.0, max((m - 1) / 2.0, 0.5), (n - 1) / 2.0, max((n - 1) / 2.0, 0.5)


def _edge_terms(c: np.ndarray, size: int, lam: float | None) -> list[np.ndarray]:
    """``exp(−d/λ)`` from both ends of one frame axis (``c``: pixel coordinates), or nothing."""
    if lam is None:
        return []
    return [np.exp(-(c + 0.5) / lam), np.exp(-(size - 0.5 - c) / lam)]


def _design(yn: np.ndarray, xn: np.ndarray, yp: np.ndarray, xp: np.ndarray, m: int, n: int,
            lam: float | None) -> np.ndarray:
    """Global design matrix: 1, x, y, x², xy, y², r⁴ and the four edge decays (when ``lam`` is set)."""
    r2 = 0.5 * (xn**2 + yn**2)
    cols = [np.ones_like(xn), xn, yn, xn**2, xn * yn, yn**2, r2**2]
    cols += _edge_terms(xp, n, lam) + _edge_terms(yp, m, lam)
    return np.stack(cols, axis=-1)


def _evaluate_global(beta: np.ndarray, m: int, n: int, lam: float | None) -> np.ndarray:
    """The global part on the full frame, as one rank-4 product (rows) @ (columns)."""
    cy, hy, cx, hx = _frame_coords(m, n)
    yp, xp = np.arange(m, dtype=float), np.arange(n, dtype=float)
    y = (yp - cy) / hy
    x = (xp - cx) / hx
    # r⁴ = ((x² + y²)/2)² = (x⁴ + 2x²y² + y⁴)/4
    f = beta[0] + beta[2] * y + beta[5] * y**2 + 0.25 * beta[6] * y**4
    g = beta[1] * x + beta[3] * x**2 + 0.25 * beta[6] * x**4
    if lam is not None:
        ex, ey = _edge_terms(xp, n, lam), _edge_terms(yp, m, lam)
        g = g + beta[7] * ex[0] + beta[8] * ex[1]
        f = f + beta[9] * ey[0] + beta[10] * ey[1]
    u = np.stack([f, np.ones(m), y, y**2], axis=1)
    v = np.stack([np.ones(n), g, beta[4] * x, 0.5 * beta[6] * x**2], axis=0)
    return u @ v


def _wls(x: np.ndarray, y: np.ndarray, w: np.ndarray | None = None, ridge: np.ndarray | None = None) -> np.ndarray:
    """Weighted least squares by the normal equations (a tiny ridge keeps them regular; ``ridge``
    adds a penalty per coefficient)."""
    xw = x if w is None else x * w[:, None]
    a = xw.T @ x
    a[np.diag_indices_from(a)] += 1e-9 * max(float(np.trace(a)), 1e-12)
    if ridge is not None:
        a[np.diag_indices_from(a)] += ridge
    return np.linalg.solve(a, xw.T @ y)


def _tukey(r: np.ndarray, c: float) -> np.ndarray:
    u = r / c
    return np.where(np.abs(u) < 1.0, (1.0 - u**2) ** 2, 0.0)


def _blur(a: np.ndarray, sigma: float) -> np.ndarray:
    """Gaussian blur with zero padding (what normalized convolution needs at the frame edge)."""
    a32 = a.astype(np.float32)
    k = int(2 * np.ceil(3.0 * sigma) + 1)
    return cv2.GaussianBlur(a32, (k, k), sigmaX=sigma, sigmaY=sigma, borderType=cv2.BORDER_CONSTANT).astype(float)


def _local_linear(e: np.ndarray, w: np.ndarray, base: np.ndarray, length: float, gy: np.ndarray,
                  gx: np.ndarray) -> np.ndarray:
    """First-order robust normalized convolution: a Gaussian-windowed weighted plane fit at every block.

    Minimises ``Σ g(x_j − x_i)·w_j·(e_j − a − b·(x_j − x_i) − c·(y_j − y_i))²`` per block ``i`` and returns
    ``a``. A plane (not a mean) follows a gradient up to the frame edge and across a gap; the
    intercept is shrunk toward zero and the slopes toward flat where the weighted support is
    small (a large excluded area), so the global part bridges it.
    """
    blur = lambda a: _blur(a, length)  # noqa: E731
    w_x, w_y = w * gx, w * gy
    g0, gxs, gys = blur(w), blur(w_x), blur(w_y)
    gxx, gxy, gyy = blur(w_x * gx), blur(w_x * gy), blur(w_y * gy)
    e0, ex, ey = blur(w * e), blur(w_x * e), blur(w_y * e)
    full = np.maximum(blur(base), 1e-12)  # the support a fully sound neighbourhood would give
    m00 = g0 + _SUPPORT_EPS * full
    m10 = gxs - gx * g0
    m01 = gys - gy * g0
    # slopes are shrunk by a small ridge everywhere and by the missing support: beside an excluded
    # anomaly inside the frame a plane fitted on one side would be extrapolated across it (at the frame
    # edge the support is one-sided for every fit, so nothing is missing there)
    ridge = (_SLOPE_RIDGE * full + _GAP_SLOPE_RIDGE * np.maximum(full - g0, 0.0)) * length**2
    m20 = gxx - 2 * gx * gxs + gx**2 * g0 + ridge
    m11 = gxy - gx * gys - gy * gxs + gx * gy * g0
    m02 = gyy - 2 * gy * gys + gy**2 * g0 + ridge
    r0 = e0
    r1 = ex - gx * e0
    r2 = ey - gy * e0
    a = np.stack([np.stack([m00, m10, m01], -1), np.stack([m10, m20, m11], -1), np.stack([m01, m11, m02], -1)], -2)
    rhs = np.stack([r0, r1, r2], -1)[..., None]
    return np.linalg.solve(a, rhs)[..., 0, 0]


def _lts_start(xd: np.ndarray, yv: np.ndarray, shape: tuple[int, int], ok: np.ndarray, base: np.ndarray) -> np.ndarray:
    """Starting weights (0/1 per block) from a least-trimmed-squares fit of the global part.

    FAST-LTS (Rousseeuw & Van Driessen 2006, from memory): elemental starts drawn with a fixed
    seed, each improved by concentration steps (refit on the ``h`` blocks of smallest residual),
    the best by trimmed sum of squares kept. Coverage ``h`` = 55 % of the blocks, so up to 45 % of
    the frame may be anomalous. Runs on a sub-grid of at most ``_LTS_BLOCKS`` blocks.
    """
    idx = np.flatnonzero(ok.ravel())
    step = max(1, int(np.ceil(idx.size / _LTS_BLOCKS)))
    sub = np.arange(0, idx.size, step)
    xs, ys = xd[sub], yv[sub]
    p = xs.shape[1]
    h = max(p + 1, int(_LTS_COVERAGE * sub.size))
    if sub.size <= 2 * p:
        return np.ones(shape)
    rng = np.random.default_rng(_LTS_SEED)
    best, best_obj = None, np.inf
    for _ in range(_LTS_STARTS):
        pick = rng.choice(sub.size, size=p, replace=False)
        beta = _wls(xs[pick], ys[pick])
        for _ in range(_LTS_CSTEPS):
            r2 = (ys - xs @ beta) ** 2
            keep = np.argpartition(r2, h - 1)[:h]
            beta = _wls(xs[keep], ys[keep])
        obj = float(np.partition((ys - xs @ beta) ** 2, h - 1)[:h].sum())
        if obj < best_obj:
            best, best_obj = beta, obj
    r = yv - xd @ best
    keep = np.zeros(idx.size, bool)
    keep[np.argpartition(r**2, int(_LTS_COVERAGE * idx.size) - 1)[: int(_LTS_COVERAGE * idx.size)]] = True
    w = np.zeros(shape)
    w.ravel()[idx[keep]] = 1.0
    return w


def _half_sample_mode(r: np.ndarray) -> float:
    """Half-sample mode: the centre of the densest half of the values, recursively (Bickel &
    Frühwirth 2006, from memory); it stays on the sound population when the anomalies pull the median."""
    v = np.sort(r)
    while v.size > 3:
        h = (v.size + 1) // 2
        widths = v[h - 1:] - v[: v.size - h + 1]
        i = int(np.argmin(widths))
        v = v[i:i + h]
    return float(np.mean(v))


def _one_sided_scale(r: np.ndarray) -> float:
    """Robust scale of block residuals of which a large part may be anomalous, mostly on one side.

    About the half-sample mode, the median deviation of each side over 0.6745 (the median of
    the half-normal, Φ⁻¹(0.75) [C]) is a Gaussian population's σ; the smaller of the two is kept,
    the side the anomalies do not fill. Cold defects seen from inside and warm ones from outside
    mostly share one sign, and their soft halos can hold half the frame, where a two-sided median
    absolute deviation would take them for sound variation.
    """
    centre = _half_sample_mode(r)
    up, down = r[r > centre] - centre, centre - r[r < centre]
    sides = [float(np.median(x)) / _MEDIAN_HALF_NORMAL for x in (up, down) if x.size >= 16]
    return min(sides) if sides else float(np.median(np.abs(r - centre))) / _MEDIAN_HALF_NORMAL


def _backfit(*, x_design: np.ndarray, y: np.ndarray, ok: np.ndarray, base: np.ndarray, lengths: list[float],
             gy: np.ndarray, gx: np.ndarray, floor: float, w0: np.ndarray,
             ridge: np.ndarray, keep: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Backfitting of the global and the local part with Tukey reweighting: ``(beta, local, weights, scale)``.

    ``keep`` (0/1 per block) holds blocks out of every fit whatever their residual."""
    yv = y[ok]
    w = w0
    local = np.zeros_like(y)
    glob = np.zeros_like(y)
    scale = floor
    beta = np.zeros(x_design.shape[1])
    for length in lengths:
        beta = _wls(x_design, yv - local[ok], w[ok], ridge)
        glob[ok] = x_design @ beta
        local = _local_linear(np.where(ok, y - glob, 0.0), w, base, length, gy, gx)
        r = (y - glob - local)[ok]
        scale = max(_one_sided_scale(r), floor)
        w = np.zeros_like(y)
        w[ok] = base[ok] * _tukey(r, TUKEY_C * scale)
        if keep is not None:
            w *= keep
    return beta, local, w, scale


def _unconfirmed(x_design: np.ndarray, w: np.ndarray, base: np.ndarray, ok: np.ndarray, beta: np.ndarray,
                 scale: float) -> np.ndarray:
    """Edge decays (bool per edge) with less than :data:`EDGE_CONFIRM` of their energy on the blocks weighted
    ``w`` and a coefficient beyond the biweight's cut: fitted from the far tail, an extrapolation."""
    energy = x_design[:, 7:] ** 2
    support = (w[ok][:, None] * energy).sum(axis=0) / np.maximum((base[ok][:, None] * energy).sum(axis=0), 1e-12)
    return (support < EDGE_CONFIRM) & (np.abs(beta[7:]) > TUKEY_C * scale)


def _edge_reach(beta: np.ndarray, scale: float, yp: np.ndarray, xp: np.ndarray, m: int, n: int,
                lam: float | None) -> np.ndarray:
    """Blocks within :data:`EDGE_REACH` decay lengths of an edge whose decay is in use (past the biweight cut)."""
    reach = np.zeros(yp.shape, bool)
    if lam is None:
        return reach
    terms = _edge_terms(xp, n, lam) + _edge_terms(yp, m, lam)  # left, right, top, bottom (as in the design)
    for term, coef in zip(terms, beta[7:]):
        if abs(coef) > TUKEY_C * scale:
            reach |= term >= np.exp(-EDGE_REACH)
    return reach


def _held_out(resid: np.ndarray, w: np.ndarray, ok: np.ndarray, scale: float, margin_blocks: float) -> np.ndarray:
    """Blocks held out of a refit: the anomalies, their soft tails and a margin around them.

    An anomaly's contrast does not stop where the biweight rejects it (``w`` = 0): lateral conduction
    spreads it into a soft tail that fades into the noise, and tail blocks that keep their weight pull
    the surface toward the anomaly. The tail is every block connected (8-neighbours) to a rejected
    block whose residual has that block's sign and exceeds :data:`HOLD_K` scales; a margin of
    ``margin_blocks`` around the whole covers the part of the tail below that.
    """
    conn = np.ones((3, 3), bool)
    held = np.zeros(ok.shape, bool)
    big = ok & (np.abs(resid) > HOLD_K * scale)
    for sgn in (-1.0, 1.0):
        seed = ok & (w <= 0) & (sgn * resid > 0)
        if seed.any():
            held |= ndimage.binary_propagation(seed, structure=conn, mask=seed | (big & (sgn * resid > 0)))
    if margin_blocks >= 0.5 and held.any():
        held |= ndimage.distance_transform_edt(~held) <= margin_blocks
    return held & ok


def fit_sound_surface(
    temperature_c: np.ndarray,
    invalid: np.ndarray | None = None,
    *,
    length_px: float,
    noise_k: float,
    block_px: int | None = None,
    edge_length_px: float | None = None,
    start: SoundSurface | None = None,
) -> SoundSurface:
    """Fit the robust local sound surface of one thermogram.

    Parameters
    ----------
    temperature_c : (M, N) float ndarray
        Surface temperature, °C.
    invalid : (M, N) bool ndarray, optional
        True on pixels to ignore (dead, saturated, outside the element).
    length_px : float
        Sound length, px: the standard deviation of the local Gaussian window.
        Variations on this length or longer are followed; shorter ones are not.
    noise_k : float
        Per-pixel noise standard deviation, K (floors the robust scale).
    block_px : int, optional
        Block size of the coarse grid (default: about 80 blocks on the long side,
        at most a quarter of ``length_px``).
    edge_length_px : float, optional
        Decay length of the cooling (or warming) toward a junction or corner at a
        frame edge, px: adds ``exp(−d/λ)`` from each of the four frame edges to
        the global part. None leaves them out.
    start : SoundSurface, optional
        A surface fitted before to the same frame (fewer pixels excluded): its weights start the
        reweighting instead of the robust start, and only the final sound length is iterated.

    Returns
    -------
    SoundSurface
    """
    t = np.asarray(temperature_c, dtype=float)
    m, n = t.shape
    valid = np.isfinite(t) if invalid is None else (~np.asarray(invalid, bool) & np.isfinite(t))
    if block_px is None:
        block_px = int(max(1, min(round(max(m, n) / _BLOCKS_LONG_SIDE), np.floor(length_px / 4.0))))
    b = int(block_px)
    y, fill, (mb, nb) = _block_means(t, valid, b)
    base = np.where(fill >= _MIN_FILL, fill, 0.0)
    ok = base > 0
    cy, hy, cx, hx = _frame_coords(m, n)
    # block centres in frame pixels, then normalised (padding blocks lie partly outside; they carry less weight)
    rows = (np.arange(mb) * b + (b - 1) / 2.0 - cy) / hy
    cols = (np.arange(nb) * b + (b - 1) / 2.0 - cx) / hx
    yn, xn = np.meshgrid(rows, cols, indexing="ij")
    yp, xp = np.meshgrid(np.arange(mb) * b + (b - 1) / 2.0, np.arange(nb) * b + (b - 1) / 2.0, indexing="ij")
    x_design = _design(yn, xn, yp, xp, m, n, edge_length_px)[ok]
    yv = y[ok]
    floor = max(float(noise_k) / b, 1e-6)  # noise of a block mean
    lb = max(float(length_px) / b, 0.5)  # sound length in blocks

    gy, gx = np.meshgrid(np.arange(mb, dtype=float) - mb / 2.0, np.arange(nb, dtype=float) - nb / 2.0, indexing="ij")
    if start is not None and start.block_px == b and start.weight.shape == t.shape:
        w0 = base * _block_means(start.weight, np.ones(t.shape, bool), b)[0]
        if start.held is not None and start.held.shape == w0.shape:
            w0 = w0 * ~start.held
    else:
        w0 = base * _lts_start(x_design[:, :7], yv, y.shape, ok, base)  # the frame-tied part alone
    w = w0
    # graduated: from the robust start, the local part at 4, 2 and 1 sound lengths, so a large anomaly
    # is excluded by the stiff fits before a flexible one could follow it
    steps = _LENGTH_STEPS[-1:] if start is not None else _LENGTH_STEPS
    # the last pass at the final length is the refit below, with the anomalies' tails held out
    lengths = [f * lb for f in steps for _ in range(_PER_STEP)][:-1]
    fit = dict(x_design=x_design, y=y, ok=ok, base=base, lengths=lengths, gy=gy, gx=gx, floor=floor)
    ridge = np.zeros(x_design.shape[1])
    beta, local, w, scale = _backfit(w0=w, ridge=ridge, **fit)
    if edge_length_px is not None:
        # an edge decay must be confirmed by sound data at its own edge: one fitted from the far tail
        # while the blocks along the edge are excluded (an anomaly lying along that edge) is an
        # extrapolation; it is switched off and the surface refitted
        off = _unconfirmed(x_design, w, base, ok, beta, scale)
        if off.any():
            ridge[7:][off] = 1e9 * max(float(base.sum()), 1.0)
            beta, local, w, scale = _backfit(w0=w0, ridge=ridge, **fit)

    # the anomalies with their soft tails and a margin held out, the surface refitted at the final length
    resid = np.zeros_like(y)
    resid[ok] = yv - x_design @ beta - local[ok]
    seeds = w
    if start is not None:
        # a fit started from another: its caller leaves the anomalies found there out (no blocks here), so
        # the blocks bordering them that stand out by the tail's measure seed the tails as rejected blocks
        # would, in the reach of an edge decay in use (else a halo running to that edge comes back into the
        # fit and the decay follows it); not elsewhere: every framing member's rim stands out by one scale
        border = ok & ndimage.binary_dilation(~ok, structure=np.ones((3, 3), bool)) & (np.abs(resid) > HOLD_K * scale)
        border &= _edge_reach(beta, scale, yp, xp, m, n, edge_length_px)
        seeds = np.where(border, 0.0, w)
    held = _held_out(resid, seeds, ok, scale, HOLD_MARGIN * lb)
    keep = (~held).astype(float) if held.any() and (ok & ~held).sum() >= (1.0 - HOLD_MAX) * ok.sum() else None
    if edge_length_px is not None and keep is not None:
        # the held-out blocks are no sound data either: an edge decay they leave unconfirmed is switched off
        ridge[7:][_unconfirmed(x_design, w * keep, base, ok, beta, scale)] = 1e9 * max(float(base.sum()), 1.0)
    beta, local, w, scale_held = _backfit(w0=w if keep is None else w * keep, ridge=ridge, keep=keep,
                                          **dict(fit, lengths=[steps[-1] * lb]))
    if keep is None:
        scale = scale_held
    else:
        # the surface is the held-out fit's; the scale and the weights stay those of every block (what the
        # detector measures the noise on): the tails are held out of the fit, not declared anomalous
        w = np.zeros_like(y)
        w[ok] = base[ok] * _tukey(yv - x_design @ beta - local[ok], TUKEY_C * scale)

    # back to full resolution: the global part exactly, the local part bilinear between block centres
    surf = _evaluate_global(beta, m, n, edge_length_px)
    up = cv2.resize(local.astype(np.float32), (nb * b, mb * b), interpolation=cv2.INTER_LINEAR)[:m, :n]
    surf = surf + up.astype(float)
    wfull = np.repeat(np.repeat(np.where(ok, w / np.maximum(base, 1e-12), 0.0), b, axis=0), b, axis=1)[:m, :n]
    return SoundSurface(surf, wfull, float(scale), b, float(length_px), beta, None if keep is None else held)
