"""Public entry point: :func:`segment` and its result :class:`Segmentation`."""

from __future__ import annotations

import functools
import math
import numbers
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import cv2
import numpy as np
from threadpoolctl import ThreadpoolController

from ..errors import ConfigError, ConvergenceWarning, InputError, SolverError
from ._at import prolong, restrict, solve_level
from ._noise import noise_statistics
from ._params import STEP_MARGIN, SegmentParams, derive_params, robust_range
from ._regions import extract_regions

__all__ = ["Segmentation", "segment", "MIN_SIZE_PX"]

MIN_SIZE_PX = 8  # smallest accepted image side
_COARSEST_PX = 48  # no grid coarser than this (shorter side)
_MAX_LEVELS = 3
_COARSE_ALTERNATIONS = 8
_CG_RTOL = 2e-2
_CG_MAX_ITER = 12
_COARSE_V_TOL = 0.02  # coarse grids stop when max |dv| of an alternation is below this


@dataclass(frozen=True)
class Segmentation:
    """Result of :func:`segment`.

    Attributes
    ----------
    u : (M, N) float ndarray
        Piecewise-smooth temperature field, same units and float dtype as the input
        (float64 for integer input).
    v : (M, N) float ndarray
        Phase field in [0, 1]: about 0 on the jump set, about 1 elsewhere; 1 on masked pixels.
    edges : (M, N) bool ndarray
        Jump set, ``v < params.edge_threshold`` on valid pixels.
    labels : (M, N) int32 ndarray
        Regions 1..n_regions; every valid pixel (jump pixels included) belongs to one;
        masked pixels are 0.
    n_regions : int
        Number of regions.
    energy : tuple of float
        AT energy after each alternation at full resolution and final epsilon (non-increasing).
    iterations : int
        Alternations performed over all grids.
    converged : bool
        Whether the relative energy decrease fell below ``params.tol``.
    message : str
        Human-readable summary (grids, iterations, stopping reason, notes).
    params : SegmentParams
        Knobs and weights actually used.
    """

    u: np.ndarray
    v: np.ndarray
    edges: np.ndarray
    labels: np.ndarray
    n_regions: int
    energy: tuple[float, ...]
    iterations: int
    converged: bool
    message: str
    params: SegmentParams


def _check_number(name: str, value: object, *, low: float, low_open: bool, allow_none: bool = False) -> float | None:
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ConfigError(f"segment: {name} = {value!r} is not a number; give a finite real value")
    x = float(value)
    bad = not math.isfinite(x) or (x <= low if low_open else x < low)
    if bad:
        rel = ">" if low_open else ">="
        raise ConfigError(f"segment: {name} = {value!r} is out of range; it must be finite and {rel} {low:g}")
    return x


def _check_inputs(temperature: object, mask: object) -> tuple[np.ndarray, np.ndarray | None]:
    arr = np.asarray(temperature)
    if arr.dtype.kind not in "fiu":
        raise InputError(
            f"segment: temperature has dtype {arr.dtype}; pass a real-valued (float or integer) "
            "temperature array, e.g. np.asarray(t, dtype=np.float32)"
        )
    if arr.ndim != 2:
        raise InputError(
            f"segment: temperature must be a 2-D (M, N) array, got shape {arr.shape}; "
            "pass one single-channel frame at a time"
        )
    if min(arr.shape) < MIN_SIZE_PX:
        raise InputError(
            f"segment: temperature of shape {arr.shape} is too small; "
            f"the minimum is {MIN_SIZE_PX} x {MIN_SIZE_PX} pixels"
        )
    m = None
    if mask is not None:
        m = np.asarray(mask)
        if m.shape != arr.shape:
            raise InputError(f"segment: mask shape {m.shape} differs from temperature shape {arr.shape}")
        if m.dtype != bool:
            if m.dtype.kind in "iu" and np.isin(m, (0, 1)).all():
                m = m.astype(bool)
            else:
                raise InputError(f"segment: mask has dtype {m.dtype}; pass a bool array (True = invalid pixel)")
        if m.all():
            raise InputError("segment: every pixel is masked; there is nothing to segment")
    if arr.dtype.kind == "f":
        finite = np.isfinite(arr)
        bad = ~finite if m is None else (~finite & ~m)
        n_bad = int(np.count_nonzero(bad))
        if n_bad:
            where = "and no mask" if m is None else "outside the mask"
            raise InputError(
                f"segment: temperature has {n_bad} non-finite pixel(s) (NaN/inf) {where}; "
                "pass mask=~np.isfinite(temperature) to exclude them"
            )
    return arr, m


@functools.lru_cache(maxsize=1)
def _controller() -> ThreadpoolController:
    # inspecting the loaded BLAS/OpenMP libraries costs a few ms: do it once per process
    return ThreadpoolController()


@contextmanager
def _single_threaded() -> Iterator[None]:
    """Pin BLAS/OpenMP (threadpoolctl) and OpenCV to one thread for the solver loop.

    On a busy machine threaded dot products and filters of this size are slower than
    one thread; batch parallelism comes from running several images at once. OpenCV's
    thread count is restored afterwards.
    """
    n_cv = cv2.getNumThreads()
    cv2.setNumThreads(1)
    try:
        with _controller().limit(limits=1):
            yield
    finally:
        cv2.setNumThreads(n_cv)


def _fill_masked(g: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Masked values -> local mean of valid neighbours (5 x 5), else the nearest valid value.

    Only a finite starting value: masked pixels carry no data term.
    """
    w = (~mask).astype(np.float32)
    num = cv2.blur(np.where(mask, 0.0, g).astype(np.float32), (5, 5), borderType=cv2.BORDER_REPLICATE)
    den = cv2.blur(w, (5, 5), borderType=cv2.BORDER_REPLICATE)
    out = g.copy()
    near = mask & (den > 0)
    out[near] = num[near] / den[near]
    far = mask & ~near
    if far.any():
        from scipy import ndimage as ndi

        idx = ndi.distance_transform_edt(~(~mask | near), return_distances=False, return_indices=True)
        out[far] = out[tuple(i[far] for i in idx)]
    return out


def _n_levels(shape: tuple[int, int]) -> int:
    levels = 1
    side = min(shape)
    while levels < _MAX_LEVELS and side // 2 >= _COARSEST_PX:
        side //= 2
        levels += 1
    return levels


def segment(
    temperature: np.ndarray,
    *,
    mask: np.ndarray | None = None,
    noise_k: float | None = None,
    min_step_k: float = 0.5,
    min_feature_px: float = 4.0,
    max_num_iter: int = 40,
    tol: float = 2e-3,
) -> Segmentation:
    """Segment a thermogram with the Ambrosio–Tortorelli approximation of Mumford–Shah.

    Minimises ``beta (u - g)^2 + (v^2 + eta) |grad u|^2 + alpha (eps |grad v|^2 + (1 - v)^2 / (4 eps))``
    by alternating linear SPD solves (warm-started CG), coarse to fine, then extracts
    regions bounded by the jump set. See ``docs/method.md``.

    Parameters
    ----------
    temperature : (M, N) float or integer ndarray
        Temperatures (K or °C); M, N >= 8.
    mask : (M, N) bool ndarray, optional
        True on invalid pixels: they carry no data term, create no edges and get label 0.
    noise_k : float, optional
        Noise standard deviation, same units; estimated robustly when None.
    min_step_k : float
        Smallest temperature step that should make an edge.
    min_feature_px : float
        Smallest feature worth separating, pixels (>= 1).
    max_num_iter : int
        Cap on alternations at full resolution.
    tol : float
        Stop when one alternation lowers the energy by less than ``tol`` (relative).

    Returns
    -------
    Segmentation

    Raises
    ------
    InputError
        Not 2-D, smaller than 8 x 8, complex/bool/object dtype, NaN/inf outside the mask,
        or a mask of the wrong shape/dtype or covering everything.
    ConfigError
        A knob out of range.
    SolverError
        The solver produced non-finite values.

    Warns
    -----
    ConvergenceWarning
        ``max_num_iter`` reached before ``tol`` (the result is still usable; ``converged`` is False).

    References
    ----------
    L. Ambrosio, V. M. Tortorelli, Comm. Pure Appl. Math. 43:999-1036, 1990.
    D. Mumford, J. Shah, Comm. Pure Appl. Math. 42:577-685, 1989.
    B. Bourdin, ESAIM: M2AN 33(2):229-244, 1999 (finite elements and alternating
    minimisation for this functional; from memory).
    """
    arr, m = _check_inputs(temperature, mask)
    noise_in = _check_number("noise_k", noise_k, low=0.0, low_open=False, allow_none=True)
    step = _check_number("min_step_k", min_step_k, low=0.0, low_open=True)
    feature = _check_number("min_feature_px", min_feature_px, low=1.0, low_open=False)
    if isinstance(max_num_iter, bool) or not isinstance(max_num_iter, numbers.Integral) or max_num_iter < 1:
        raise ConfigError(f"segment: max_num_iter = {max_num_iter!r} must be an integer >= 1")
    tol_f = _check_number("tol", tol, low=0.0, low_open=False)

    out_dtype = arr.dtype if arr.dtype.kind == "f" and arr.dtype.itemsize >= 4 else np.dtype(np.float64)
    if arr.dtype.kind == "f" and arr.dtype.itemsize < 4:
        out_dtype = np.dtype(np.float32)
    has_mask = m is not None and bool(m.any())
    if has_mask:
        valid_vals = arr[~m]
        ref = float(np.mean(valid_vals, dtype=np.float64))
        # float32 relative to a representative value: 7 digits resolve mK on any scale
        g = np.subtract(np.where(m, ref, arr), ref, dtype=np.float32)
        g = _fill_masked(g, m)
    else:
        valid_vals = arr.ravel()
        ref = float(np.mean(valid_vals, dtype=np.float64))
        g = np.subtract(arr, ref, dtype=np.float32)
    if noise_in is None:
        noise, correlation = noise_statistics(g, mask=m if has_mask else None)
    else:
        noise, correlation = noise_in, 1.0
    levels = _n_levels(arr.shape)
    params = derive_params(
        noise_k=noise,
        noise_estimated=noise_in is None,
        min_step_k=step,
        min_feature_px=feature,
        value_range_k=robust_range(valid_vals),
        noise_correlation=correlation,
        levels=levels,
        max_num_iter=int(max_num_iter),
        tol=tol_f,
    )

    w = (~m).astype(np.float32) if has_mask else None
    pyramid = [(g, w)]
    for _ in range(levels - 1):
        pyramid.append(restrict(*pyramid[-1]))

    total = 0
    u = v = None
    with _single_threaded():
        for lev in range(levels - 1, -1, -1):
            gl, wl = pyramid[lev]
            h = float(2**lev)
            if u is None:
                u = gl.copy()
                v = np.ones_like(gl)
                schedule = [2.0 * params.epsilon, params.epsilon] if levels > 1 else [params.epsilon]
            else:
                u = prolong(u, gl.shape)
                v = prolong(v, gl.shape)
                schedule = [params.epsilon]
            for k, eps in enumerate(schedule):
                final = lev == 0 and k == len(schedule) - 1
                res = solve_level(
                    gl,
                    wl,
                    u,
                    v,
                    alpha=params.alpha * h,
                    beta=params.beta * h * h,
                    epsilon=eps,
                    eta=params.eta,
                    max_alternations=params.max_num_iter if final else _COARSE_ALTERNATIONS,
                    tol=tol_f,
                    cg_rtol=_CG_RTOL,
                    cg_max_iter=_CG_MAX_ITER,
                    record_energy=final,
                    v_tol=_COARSE_V_TOL,
                )
                total += res.iterations
                u, v = res.u, res.v
    if not (np.isfinite(u).all() and np.isfinite(v).all()):
        raise SolverError(
            "segment: the Ambrosio–Tortorelli solver produced non-finite values; "
            "check the input for extreme values or report the image"
        )
    converged = res.converged
    u_out = np.add(u, ref, dtype=out_dtype)
    v_out = v.astype(out_dtype)
    if has_mask:
        v_out[m] = 1.0
    edges, labels, n_regions = extract_regions(
        u_out,
        v_out,
        m if has_mask else None,
        threshold=params.edge_threshold,
        weak_threshold=params.weak_edge_threshold,
        min_feature_px=feature,
    )
    notes = []
    if params.jump_threshold_k > STEP_MARGIN * step * (1 + 1e-9):  # noise-limited
        notes.append(
            f"noise {noise:.3g} K raises the smallest reliably cut step to about "
            f"{params.jump_threshold_k / STEP_MARGIN:.3g} K (requested min_step_k {step:g} K)"
        )
    stop = "converged" if converged else f"stopped at max_num_iter={params.max_num_iter}"
    message = (
        f"{stop}: {total} alternations on {levels} grid(s), {n_regions} region(s), "
        f"{int(edges.sum())} jump pixel(s)" + ("; " + "; ".join(notes) if notes else "")
    )
    if not converged:
        warnings.warn(
            f"segment: {message}; raise max_num_iter or tol for a tighter solution",
            ConvergenceWarning,
            stacklevel=2,
        )
    return Segmentation(
        u=u_out,
        v=v_out,
        edges=edges,
        labels=labels,
        n_regions=n_regions,
        energy=tuple(float(e) for e in res.energies),
        iterations=total,
        converged=converged,
        message=message,
        params=params,
    )
