"""Matrix-free finite-difference operators and a preconditioned conjugate-gradient solver.

Discretisation (see ``docs/method.md``): pixels are the nodes of a unit grid.
Forward differences ``(Dx u)[i, j] = u[i, j+1] - u[i, j]`` (shape ``(M, N-1)``)
and ``(Dy u)[i, j] = u[i+1, j] - u[i, j]`` (shape ``(M-1, N)``); a difference
across the image border is zero (homogeneous Neumann condition). Every
difference is *owned* by the pixel at its start, so an edge weight is a pixel
field restricted to ``[:, :-1]`` or ``[:-1, :]``.

The operators work in place on preallocated float32 buffers: a 640 x 480 image
is about 1.2 MB per field, and allocation-free loops keep the solver cache
friendly.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import cv2
import numpy as np
from scipy.linalg import blas

__all__ = [
    "Workspace",
    "apply_weighted_laplacian",
    "apply_screened_laplacian",
    "pcg",
]


@dataclass
class Workspace:
    """Scratch buffers for one grid size (not shared between threads)."""

    dx: np.ndarray  # (M, N-1)
    dy: np.ndarray  # (M-1, N)
    r: np.ndarray  # (M, N) residual
    z: np.ndarray  # (M, N) preconditioned residual
    p: np.ndarray  # (M, N) search direction
    ap: np.ndarray  # (M, N) operator times p
    tmp: np.ndarray  # (M, N) scratch of pcg
    op: np.ndarray  # (M, N) scratch of the operators (shares memory with tmp)

    @classmethod
    def for_shape(cls, shape: tuple[int, int], dtype: np.dtype) -> Workspace:
        m, n = shape
        return cls(
            dx=np.empty((m, n - 1), dtype),
            dy=np.empty((m - 1, n), dtype),
            r=np.empty(shape, dtype),
            z=np.empty(shape, dtype),
            p=np.empty(shape, dtype),
            ap=np.empty(shape, dtype),
            tmp=(tmp := np.empty(shape, dtype)),
            op=tmp,  # pcg's scratch is free whenever an operator runs
        )


def apply_weighted_laplacian(
    x: np.ndarray,
    cx: np.ndarray | float,
    cy: np.ndarray | float,
    diag: np.ndarray | float,
    out: np.ndarray,
    ws: Workspace,
) -> np.ndarray:
    """``out = diag * x + Dx^T (cx Dx x) + Dy^T (cy Dy x)``.

    Parameters
    ----------
    x : (M, N) ndarray
        Field to apply the operator to.
    cx : (M, N-1) ndarray or float
        Weights of the horizontal differences (>= 0).
    cy : (M-1, N) ndarray or float
        Weights of the vertical differences (>= 0).
    diag : (M, N) ndarray or float
        Diagonal (zeroth-order) term.
    out : (M, N) ndarray
        Result buffer (must not alias ``x``).
    ws : Workspace
        Scratch buffers of the right shape.

    Returns
    -------
    out : (M, N) ndarray
    """
    dx, dy = ws.dx, ws.dy
    np.multiply(x, diag, out=out)
    np.subtract(x[:, 1:], x[:, :-1], out=dx)
    dx *= cx
    out[:, :-1] -= dx
    out[:, 1:] += dx
    np.subtract(x[1:, :], x[:-1, :], out=dy)
    dy *= cy
    out[:-1, :] -= dy
    out[1:, :] += dy
    return out


_LAPLACE_5 = np.array([[0.0, -1.0, 0.0], [-1.0, 4.0, -1.0], [0.0, -1.0, 0.0]])


def apply_screened_laplacian(
    x: np.ndarray, weight: float, diag: np.ndarray, out: np.ndarray, ws: Workspace
) -> np.ndarray:
    """``out = diag * x + weight * L x`` with ``L`` the unit-weight graph Laplacian (Neumann).

    Same operator as :func:`apply_weighted_laplacian` with constant ``cx = cy = weight``,
    computed by OpenCV's 5-point filter: replicating the border row/column makes the
    difference across the border zero, which is exactly the Neumann graph Laplacian.
    """
    kernel = (_LAPLACE_5 * weight).astype(x.dtype)
    cv2.filter2D(x, -1, kernel, dst=out, borderType=cv2.BORDER_REPLICATE)
    np.multiply(x, diag, out=ws.op)
    out += ws.op
    return out


def _dot(a: np.ndarray, b: np.ndarray) -> float:
    # float32 BLAS sdot on flat views; the caller pins BLAS to one thread
    # (threadpoolctl) around the solver loop.
    return float(blas.sdot(a, b)) if a.dtype == np.float32 else float(np.vdot(a, b))


def _axpy(a: float, x: np.ndarray, y: np.ndarray) -> None:
    """``y += a * x`` in place on flat contiguous views."""
    if y.dtype == np.float32 and x.dtype == np.float32:
        out = blas.saxpy(x, y, a=a)
        if out.ctypes.data != y.ctypes.data:  # f2py copied (never for contiguous float32)
            y[...] = out
    else:
        y += a * x


def pcg(
    apply: Callable[[np.ndarray, np.ndarray], np.ndarray],
    b: np.ndarray | float,
    x: np.ndarray,
    inv_diag: np.ndarray,
    ws: Workspace,
    *,
    rtol: float,
    max_iter: int,
    free: np.ndarray | None = None,
) -> tuple[int, float]:
    """Jacobi-preconditioned conjugate gradients for ``A x = b``, warm-started, in place.

    Every iterate lowers the quadratic ``x^T A x / 2 - b^T x`` (a property of CG on a
    symmetric positive definite ``A``), so a truncated solve never raises the energy.

    Parameters
    ----------
    apply : callable ``(x, out) -> out``
        The SPD operator.
    b : (M, N) ndarray or float
        Right-hand side (a scalar: the same value everywhere).
    x : (M, N) ndarray, C-contiguous
        Initial guess, overwritten by the solution.
    inv_diag : (M, N) ndarray
        Inverse of the operator's diagonal (zero on fixed entries).
    ws : Workspace
        Scratch buffers.
    rtol : float
        Stop when the preconditioned residual norm falls below ``rtol`` times that of ``b``.
    max_iter : int
        Iteration cap.
    free : (M, N) ndarray, optional
        1 on unknowns, 0 on entries that keep their value in ``x`` (Dirichlet data).

    Returns
    -------
    iterations : int
    relative_residual : float
    """
    r, z, p, ap = ws.r, ws.z, ws.p, ws.ap
    rf, zf, pf, apf, xf = r.ravel(), z.ravel(), p.ravel(), ap.ravel(), x.ravel()
    apply(x, r)
    np.subtract(b, r, out=r)
    if free is not None:
        r *= free
    np.multiply(r, inv_diag, out=z)
    rz = _dot(rf, zf)
    if np.ndim(b) == 0:
        bnorm = np.sqrt(max(float(b) ** 2 * float(np.sum(inv_diag, dtype=np.float64)), 0.0))
    else:
        np.multiply(b, inv_diag, out=ws.tmp)
        bnorm = np.sqrt(max(_dot(b.ravel(), ws.tmp.ravel()), 0.0))
    if bnorm == 0.0:
        bnorm = 1.0
    target = (rtol * bnorm) ** 2
    if rz <= target:
        return 0, np.sqrt(max(rz, 0.0)) / bnorm
    p[...] = z
    it = 0
    while it < max_iter:
        it += 1
        apply(p, ap)
        if free is not None:
            ap *= free
        pap = _dot(pf, apf)
        if not pap > 0.0:
            break
        step = rz / pap
        _axpy(step, pf, xf)
        _axpy(-step, apf, rf)
        np.multiply(r, inv_diag, out=z)
        rz_new = _dot(rf, zf)
        if rz_new <= target:
            rz = rz_new
            break
        p *= rz_new / rz
        p += z
        rz = rz_new
    return it, np.sqrt(max(rz, 0.0)) / bnorm
