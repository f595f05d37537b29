"""Public entry point: :func:`segment` and its result :class:`Segmentation`."""

from __future__ import annotations

import functools
import warnings
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass

import cv2
import numpy as np
from threadpoolctl import ThreadpoolController

from ..errors import ConvergenceWarning, SolverError
from ._at import LevelResult, prolong, restrict, solve_level
from ._inputs import MIN_SIZE_PX, check_feature_size, check_inputs, check_max_num_iter, check_number
from ._noise import noise_statistics
from ._params import STEP_MARGIN, SegmentParams, derive_params, robust_range
from ._regions import extract_regions

__all__ = ["Segmentation", "segment", "MIN_SIZE_PX"]

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
        Piecewise-smooth temperature field, same scale (°C or K) and float dtype as the input
        (float64 for integer input).
    v : (M, N) float ndarray or None
        Phase field in [0, 1]: about 0 on the jump set, about 1 elsewhere; 1 on masked pixels.
        None when :func:`segment` was called with ``keep_v=False`` (the pipeline does: neither
        the analysis nor the rendering reads it, and it is 4 bytes per pixel; issue 15).
    edges : (M, N) bool ndarray
        Jump set, ``v < params.edge_threshold`` on valid pixels.
    labels : (M, N) int16 ndarray (int32 above 32 767 regions)
        Regions 1..n_regions; every valid pixel (jump pixels included) belongs to one;
        masked pixels are 0. The narrower type when the regions fit: half the memory
        through the analysis (issue 15).
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
    v: np.ndarray | None
    edges: np.ndarray
    labels: np.ndarray
    n_regions: int
    energy: tuple[float, ...]
    iterations: int
    converged: bool
    message: str
    params: SegmentParams


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
    keep_v: bool = True,
) -> Segmentation:
    """Segment a thermogram with the Ambrosio–Tortorelli approximation of Mumford–Shah.

    Minimises ``beta (u - g)^2 + (v^2 + eta) |grad u|^2 + alpha (eps |grad v|^2 + (1 - v)^2 / (4 eps))``
    by alternating linear SPD solves (warm-started CG), coarse to fine, then extracts
    regions bounded by the jump set. See ``docs/method.md``.

    Parameters
    ----------
    temperature : (M, N) float or integer ndarray
        Temperatures in °C or K (integer arrays hold whole degrees); M, N >= 8. Every
        ``_k`` knob is a temperature difference, in kelvin.
    mask : (M, N) bool ndarray, optional
        True on invalid pixels: they carry no data term, create no edges and get label 0.
    noise_k : float, optional
        Noise standard deviation, K; estimated robustly when None.
    min_step_k : float
        Smallest temperature step that should make an edge, K.
    min_feature_px : float
        Smallest feature worth separating, pixels: from 1 to the image's shorter side.
    max_num_iter : int
        Cap on alternations at full resolution.
    tol : float
        Stop when one alternation lowers the energy by less than ``tol`` (relative).
    keep_v : bool
        Keep the phase field in the result (``Segmentation.v``); False gives ``v=None`` and
        frees its memory once the jump set and the regions are formed.

    Returns
    -------
    Segmentation

    Raises
    ------
    InputError
        Not 2-D, smaller than 8 x 8, complex/bool/object dtype, NaN/inf outside the mask,
        or a mask of the wrong shape/dtype or covering everything.
    ConfigError
        A knob out of range (``min_feature_px`` larger than the image's shorter side too:
        the merge step's window and the phase-field width grow with it).
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
    arr, m = check_inputs(temperature, mask)
    noise_in = check_number("noise_k", noise_k, low=0.0, low_open=False, allow_none=True)
    step = check_number("min_step_k", min_step_k, low=0.0, low_open=True)
    feature = check_number("min_feature_px", min_feature_px, low=1.0, low_open=False)
    check_feature_size(feature, arr.shape)
    n_iter = check_max_num_iter(max_num_iter)
    tol_f = check_number("tol", tol, low=0.0, low_open=False)

    data = _offset_data(arr, m)
    if noise_in is None:
        noise, correlation = noise_statistics(data.g, mask=data.mask)
    else:
        noise, correlation = noise_in, 1.0
    levels = _n_levels(arr.shape)
    params = derive_params(
        noise_k=noise,
        noise_estimated=noise_in is None,
        min_step_k=step,
        min_feature_px=feature,
        value_range_k=data.value_range_k,
        noise_correlation=correlation,
        levels=levels,
        max_num_iter=n_iter,
        tol=tol_f,
    )
    u, v, res, total = _solve_pyramid(data, params, levels=levels, tol=tol_f)
    energies, converged = tuple(float(e) for e in res.energies), res.converged
    del res  # holds u and v too
    mask_in, ref, out_dtype = data.mask, data.ref, data.out_dtype
    del data  # the float32 data term is not needed any more
    if not (np.isfinite(u).all() and np.isfinite(v).all()):
        raise SolverError(
            "segment: the Ambrosio–Tortorelli solver produced non-finite values; "
            "check the input for extreme values or report the image"
        )
    u_out = np.add(u, ref, dtype=out_dtype)
    del u
    v_out = v.astype(out_dtype)
    del v
    if mask_in is not None:
        v_out[mask_in] = 1.0
    edges, labels, n_regions = extract_regions(
        u_out,
        v_out,
        mask_in,
        threshold=params.edge_threshold,
        weak_threshold=params.weak_edge_threshold,
        min_feature_px=feature,
    )
    message = _message(params, noise_k=noise, step_k=step, converged=converged, alternations=total,
                       levels=levels, n_regions=n_regions, n_edges=int(edges.sum()))
    if not converged:
        warnings.warn(
            f"segment: {message}; raise max_num_iter or tol for a tighter solution",
            ConvergenceWarning,
            stacklevel=2,
        )
    if not keep_v:
        v_out = None
    return Segmentation(
        u=u_out,
        v=v_out,
        edges=edges,
        labels=labels,
        n_regions=n_regions,
        energy=energies,
        iterations=total,
        converged=converged,
        message=message,
        params=params,
    )


@dataclass(frozen=True)
class _Data:
    """The data term: temperatures relative to their mean, as float32, masked values filled."""

    g: np.ndarray  # (M, N) float32, temperature − ref
    mask: np.ndarray | None  # True on invalid pixels; None when no pixel is masked
    ref: float  # mean of the valid temperatures
    value_range_k: float  # robust range of the valid temperatures (:func:`robust_range`)
    out_dtype: np.dtype  # float dtype of the returned fields


def _offset_data(arr: np.ndarray, m: np.ndarray | None) -> _Data:
    out_dtype = arr.dtype if arr.dtype.kind == "f" and arr.dtype.itemsize >= 4 else np.dtype(np.float64)
    if arr.dtype.kind == "f" and arr.dtype.itemsize < 4:
        out_dtype = np.dtype(np.float32)
    if m is not None and bool(m.any()):
        valid_vals = arr[~m]
        ref = float(np.mean(valid_vals, dtype=np.float64))
        # float32 relative to a representative value: 7 digits resolve mK on any scale
        g = np.subtract(np.where(m, ref, arr), ref, dtype=np.float32)
        value_range = robust_range(valid_vals)
        del valid_vals  # a frame-sized copy: not held through the solve (memory, issue 15)
        return _Data(_fill_masked(g, m), m, ref, value_range, out_dtype)
    valid_vals = arr.ravel()
    ref = float(np.mean(valid_vals, dtype=np.float64))
    return _Data(np.subtract(arr, ref, dtype=np.float32), None, ref, robust_range(valid_vals), out_dtype)


def _solve_pyramid(
    data: _Data, params: SegmentParams, *, levels: int, tol: float
) -> tuple[np.ndarray, np.ndarray, LevelResult, int]:
    """Coarse-to-fine alternating minimisation: ``(u, v, result on the finest grid, alternations)``.

    Each coarser grid halves the size (weights scaled by the grid spacing ``h``); the
    coarsest starts at 2ε then ε, every finer grid at ε, warm-started from the grid below.
    """
    w = ~data.mask if data.mask is not None else None  # the finest grid's 0/1 data weight, as bool (1 B/px)
    pyramid = [(data.g, w)]
    for _ in range(levels - 1):
        pyramid.append(restrict(*pyramid[-1]))
    total = 0
    u = v = res = None
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
                    tol=tol,
                    cg_rtol=_CG_RTOL,
                    cg_max_iter=_CG_MAX_ITER,
                    record_energy=final,
                    v_tol=_COARSE_V_TOL,
                )
                total += res.iterations
                u, v = res.u, res.v
            pyramid[lev] = (None, None)  # a finished grid's data is not needed again
            del gl, wl
            if lev > 0:
                res = None  # the coarse fields live on in u, v until they are prolonged
    return u, v, res, total


def _message(
    params: SegmentParams, *, noise_k: float, step_k: float, converged: bool, alternations: int, levels: int,
    n_regions: int, n_edges: int,
) -> str:
    """One-line summary: stopping reason, grids, regions, jump pixels and the noise note."""
    notes = []
    if params.jump_threshold_k > STEP_MARGIN * step_k * (1 + 1e-9):  # noise-limited
        notes.append(
            f"noise {noise_k:.3g} K raises the smallest reliably cut step to about "
            f"{params.jump_threshold_k / STEP_MARGIN:.3g} K (requested min_step_k {step_k:g} K)"
        )
    stop = "converged" if converged else f"stopped at max_num_iter={params.max_num_iter}"
    return (
        f"{stop}: {alternations} alternations on {levels} grid(s), {n_regions} region(s), "
        f"{n_edges} jump pixel(s)" + ("; " + "; ".join(notes) if notes else "")
    )
