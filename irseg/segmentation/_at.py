"""Alternating minimisation of the discrete Ambrosio–Tortorelli energy.

Discrete energy on a grid of spacing 1 (see ``docs/method.md``)::

    E(u, v) = sum  beta * w * (u - g)^2
            + sum  (v^2 + eta) * ((Dx u)^2 + (Dy u)^2)
            + alpha * sum ( eps * ((Dx v)^2 + (Dy v)^2) + (1 - v)^2 / (4 eps) )

with ``w`` the data weight (0 on masked pixels) and forward differences owned by
the pixel at their start. For fixed ``v`` the energy is a quadratic in ``u``
with the SPD matrix ``beta W + Dx^T C Dx + Dy^T C Dy``; for fixed ``u`` it is a
quadratic in ``v`` with the SPD matrix ``diag(G + alpha / (4 eps)) + alpha eps L``,
``G = (Dx u)^2 + (Dy u)^2``. Each half-step is solved by warm-started
Jacobi-preconditioned CG, whose iterates never raise the quadratic, so the
alternation is monotone at fixed ``eps``. Clipping ``v`` to [0, 1] afterwards is
a pointwise contraction that lowers every term, so it keeps monotonicity.

Coarse-to-fine: the energy is the discretisation of a continuous functional, so
on a grid of spacing ``h`` (in fine pixels) the weights become
``beta h^2``, ``alpha h`` and ``eps / h``. The phase-field width is kept at a
fixed number of coarse pixels, so going down the pyramid is also the epsilon
continuation.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from ._operators import (
    DataWeights,
    PhaseWeights,
    ScreenedInverse,
    Workspace,
    apply_screened_laplacian,
    apply_weighted_laplacian,
    gradient_sq,
    pcg,
    phase_diagonal,
    times_data_weights,
)

__all__ = ["LevelResult", "solve_level", "energy", "restrict", "prolong"]


@dataclass
class LevelResult:
    """Outcome of the alternation on one grid at one epsilon."""

    u: np.ndarray
    v: np.ndarray
    energies: list[float]
    iterations: int
    converged: bool
    cg_iterations: int


def energy(
    u: np.ndarray,
    v: np.ndarray,
    g: np.ndarray,
    w: np.ndarray | None,
    *,
    alpha: float,
    beta: float,
    epsilon: float,
    eta: float,
) -> tuple[float, float, float]:
    """The three terms of the discrete AT energy: (data, smoothness, edge), in float64.

    Parameters
    ----------
    u, v, g, w : (M, N) ndarray
        Smooth field, edge field, data and data weight.
    alpha, beta, epsilon, eta : float
        Weights of the functional (grid units).

    Returns
    -------
    data, smooth, edge : float
        ``edge`` includes the factor ``alpha``.
    """
    u64 = u.astype(np.float64)
    v64 = v.astype(np.float64)
    r2 = (u64 - g) ** 2
    data = beta * float(np.sum(r2 if w is None else w * r2))
    c = v64 * v64 + eta
    smooth = float(np.sum(c[:, :-1] * np.diff(u64, axis=1) ** 2)) + float(
        np.sum(c[:-1, :] * np.diff(u64, axis=0) ** 2)
    )
    grad_v = float(np.sum(np.diff(v64, axis=1) ** 2)) + float(np.sum(np.diff(v64, axis=0) ** 2))
    edge = alpha * (epsilon * grad_v + float(np.sum((1.0 - v64) ** 2)) / (4.0 * epsilon))
    return data, smooth, edge


def _sum64(x: np.ndarray) -> float:
    return float(np.sum(x, dtype=np.float64))


def solve_level(
    g: np.ndarray,
    w: np.ndarray | None,
    u: np.ndarray,
    v: np.ndarray,
    *,
    alpha: float,
    beta: float,
    epsilon: float,
    eta: float,
    max_alternations: int,
    tol: float,
    cg_rtol: float,
    cg_max_iter: int,
    record_energy: bool,
    v_tol: float = 0.0,
) -> LevelResult:
    """Alternate u- and v-steps on one grid at fixed epsilon.

    Parameters
    ----------
    g : (M, N) float32 ndarray
        Data (finite everywhere; masked values are ignored through ``w``).
    w : (M, N) float32 or bool ndarray, or None
        Data weight in [0, 1] (bool: 0/1, a quarter of the memory); 0 marks a pixel without
        data, where ``v`` is held at 1. None: every pixel has weight 1 (saves two full-size arrays).
    u, v : (M, N) float32 ndarray
        Starting fields, updated in place.
    alpha, beta, epsilon, eta : float
        Weights in this grid's units.
    max_alternations : int
        Cap on u/v alternations.
    tol : float
        With ``record_energy``: stop when the relative energy decrease of one
        alternation is at most ``tol``.
    cg_rtol, cg_max_iter : float, int
        Inner CG tolerance and cap.
    record_energy : bool
        Evaluate the energy after every alternation (the stopping rule of the final grid).
    v_tol : float
        Without ``record_energy``: stop when ``max |v_new - v_old| <= v_tol`` (coarse grids).

    Returns
    -------
    LevelResult
    """
    dtype = g.dtype
    shape = g.shape
    m, n = shape
    ws = Workspace.for_shape(shape, dtype)
    if w is None:
        bw: DataWeights | np.ndarray | np.floating = np.float32(beta)
        free = None
    else:
        if w.dtype == bool:  # the finest grid: beta or 0, formed a block at a time where needed
            bw = DataWeights(w, np.float32(beta))
        else:
            bw = np.multiply(w, np.float32(beta), dtype=dtype)
        free_v = w if w.dtype == bool else w > 0  # a bool weight is its own 0/1 mask: no second copy (issue 15)
        v[~free_v] = 1.0
        # 1 on unknowns, 0 on fixed entries: a bool multiplies like 1.0/0.0 at a quarter of the memory
        free = None if bool(free_v.all()) else free_v
        del free_v

    def rhs_u(out: np.ndarray) -> np.ndarray:  # beta w g, formed when a u-solve needs it
        return times_data_weights(bw, g, out, ws)

    # The u-step's edge weights v**2 + eta are formed from v a block of rows at a time
    # (PhaseWeights), never held whole. One frame-sized buffer serves both steps in turn: the
    # u-step's inverse diagonal, then the v-step's diagonal (and the energy's squared gradient),
    # whose inverse is formed a block of rows at a time (ScreenedInverse; memory, issue 15).
    diag = np.empty(shape, dtype)
    v_old = np.empty(shape, dtype) if (not record_energy and v_tol > 0) else None
    k_pot = np.float32(alpha / (4.0 * epsilon))
    k_lap = np.float32(alpha * epsilon)
    eta32 = np.float32(eta)
    edge_weights = PhaseWeights(v, eta32)

    def apply_u(x: np.ndarray, out: np.ndarray) -> np.ndarray:
        return apply_weighted_laplacian(x, edge_weights, None, bw, out, ws)

    def apply_v(x: np.ndarray, out: np.ndarray) -> np.ndarray:
        return apply_screened_laplacian(x, float(k_lap), diag, out, ws)

    inv_v = ScreenedInverse.for_level(diag, k_lap, free)

    energies: list[float] = []
    prev = np.inf
    converged = False
    it = 0
    cg_total = 0
    while it < max_alternations:
        it += 1
        # u-step: weights from the current edge field
        phase_diagonal(bw, edge_weights, diag, ws)
        np.reciprocal(diag, out=diag)
        n_u, _ = pcg(apply_u, rhs_u, u, diag, ws, rtol=cg_rtol, max_iter=cg_max_iter)
        # v-step: diagonal G + alpha/(4 eps); its preconditioner adds that of alpha eps L (4 alpha eps
        # inside, one neighbour less per border side), zero on fixed entries
        gradient_sq(u, diag, ws)
        diag += k_pot
        inv_sum = float(np.sum(inv_v.into(ws.p), dtype=np.float64))  # p is free until the solve starts
        if v_old is not None:
            v_old[...] = v
        n_v, _ = pcg(apply_v, k_pot, v, inv_v, ws, rtol=cg_rtol, max_iter=cg_max_iter, free=free, inv_sum=inv_sum)
        np.clip(v, 0.0, 1.0, out=v)
        cg_total += n_u + n_v
        scratch = ws.ap  # the CG buffers are free between solves
        if record_energy:
            # energy of (u, v); smoothness = sum (v^2 + eta) G with G the squared gradient of
            # the current u, formed again in the diagonal's memory (same values)
            np.subtract(u, g, out=scratch)
            np.square(scratch, out=scratch)
            times_data_weights(bw, scratch, scratch, ws)
            data = _sum64(scratch)
            np.square(v, out=scratch)
            sum_v2 = _sum64(scratch)
            scratch += eta32
            scratch *= gradient_sq(u, diag, ws)
            smooth = _sum64(scratch)
            # sum |Dv|^2 = v . (L v) with the Neumann graph Laplacian; (1-v)^2 expanded
            apply_screened_laplacian(v, 1.0, 0.0, scratch, ws)
            scratch *= v
            grad_v = _sum64(scratch)
            pot = float(v.size) - 2.0 * _sum64(v) + sum_v2
            e = data + smooth + alpha * (epsilon * grad_v + pot / (4.0 * epsilon))
            energies.append(e)
            if tol > 0 and np.isfinite(prev) and (prev - e) <= tol * max(abs(e), 1e-30):
                converged = True
                break
            prev = e
        elif v_old is not None:
            np.subtract(v, v_old, out=scratch)
            np.abs(scratch, out=scratch)
            if float(scratch.max()) <= v_tol:
                converged = True
                break
    return LevelResult(u, v, energies, it, converged, cg_total)


def restrict(g: np.ndarray, w: np.ndarray | None) -> tuple[np.ndarray, np.ndarray | None]:
    """2 x 2 weighted block mean of data ``g`` and data weight ``w`` (odd sizes padded by replication)."""
    m, n = g.shape
    pm, pn = m % 2, n % 2
    if pm or pn:
        g = np.pad(g, ((0, pm), (0, pn)), mode="edge")
        if w is not None:
            w = np.pad(w, ((0, pm), (0, pn)), mode="edge")
    if w is None:
        gm = (g[0::2, 0::2] + g[1::2, 0::2] + g[0::2, 1::2] + g[1::2, 1::2]) * np.float32(0.25)
        return gm.astype(g.dtype, copy=False), None
    if w.dtype == bool:  # the finest grid's 0/1 weight: its sums need numbers
        w = w.astype(g.dtype)
    gw = g * w
    sw = w[0::2, 0::2] + w[1::2, 0::2] + w[0::2, 1::2] + w[1::2, 1::2]
    sg = gw[0::2, 0::2] + gw[1::2, 0::2] + gw[0::2, 1::2] + gw[1::2, 1::2]
    gm = (g[0::2, 0::2] + g[1::2, 0::2] + g[0::2, 1::2] + g[1::2, 1::2]) * 0.25
    gc = np.where(sw > 0, sg / np.where(sw > 0, sw, 1), gm).astype(g.dtype)
    return gc, (sw * 0.25).astype(w.dtype)


def prolong(x: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
    """Bilinear 2 x upsampling to ``shape`` (a warm start only).

    Coarse pixel ``I`` covers fine pixels ``2I`` and ``2I + 1``; OpenCV's half-pixel
    centred linear resize matches that geometry. Odd fine sizes were padded by one
    row/column before restriction, so the upsampled grid is cropped.
    """
    up = cv2.resize(x, (2 * x.shape[1], 2 * x.shape[0]), interpolation=cv2.INTER_LINEAR)
    return np.ascontiguousarray(up[: shape[0], : shape[1]])
