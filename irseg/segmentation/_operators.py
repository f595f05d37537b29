"""Matrix-free finite-difference operators and a preconditioned conjugate-gradient solver.

Discretisation (see ``docs/method.md``): pixels are the nodes of a unit grid.
Forward differences ``(Dx u)[i, j] = u[i, j+1] - u[i, j]`` (shape ``(M, N-1)``)
and ``(Dy u)[i, j] = u[i+1, j] - u[i, j]`` (shape ``(M-1, N)``); a difference
across the image border is zero (homogeneous Neumann condition). Every
difference is *owned* by the pixel at its start, so an edge weight is a pixel
field restricted to ``[:, :-1]`` or ``[:-1, :]``.

The operators work in place on preallocated float32 buffers: a 640 x 480 image
is about 1.2 MB per field, and allocation-free loops keep the solver cache
friendly. Differences are formed a block of rows at a time (a few rows of scratch instead
of two frame-sized arrays), in the same element order as the whole-frame expressions, so
the results are bit-identical to them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import cv2
import numpy as np
from scipy.linalg import blas

__all__ = [
    "Workspace",
    "PhaseWeights",
    "DataWeights",
    "ScreenedInverse",
    "phase_diagonal",
    "times_data_weights",
    "gradient_sq",
    "apply_weighted_laplacian",
    "apply_screened_laplacian",
    "pcg",
]


_CHUNK_ROWS = 64  # rows per block of the difference operators (their scratch is a few rows, not a frame)


@dataclass
class Workspace:
    """Scratch buffers for one grid size (not shared between threads).

    Four full-size fields (``r``, ``z``, ``p``, ``ap``) and a few rows of difference
    scratch: the operators work on blocks of :data:`_CHUNK_ROWS` rows, element by element
    in the same order as whole-frame NumPy expressions, so the results are bit-identical
    to them while no frame-sized difference array is ever held.
    """

    r: np.ndarray  # (M, N) residual
    z: np.ndarray  # (M, N) preconditioned residual
    p: np.ndarray  # (M, N) search direction
    ap: np.ndarray  # (M, N) operator times p; holds the right-hand side at the start of pcg
    dx: np.ndarray  # (rows, N-1) block scratch of horizontal differences
    dy: np.ndarray  # (rows, N) block scratch of vertical differences
    carry: np.ndarray  # (N,) the last vertical difference of the previous block
    c: np.ndarray  # (rows, N) block scratch of edge weights formed from the phase field
    d: np.ndarray  # (rows, N) block scratch of data weights formed from a 0/1 data weight

    @property
    def op(self) -> np.ndarray:
        """Scratch of :func:`apply_screened_laplacian`: ``z``, free whenever pcg applies an operator."""
        return self.z

    @classmethod
    def for_shape(cls, shape: tuple[int, int], dtype: np.dtype) -> Workspace:
        m, n = shape
        rows = max(1, min(_CHUNK_ROWS, m))
        return cls(
            r=np.empty(shape, dtype),
            z=np.empty(shape, dtype),
            p=np.empty(shape, dtype),
            ap=np.empty(shape, dtype),
            dx=np.empty((rows, max(n - 1, 0)), dtype),
            dy=np.empty((rows, n), dtype),
            carry=np.empty(n, dtype),
            c=np.empty((rows, n), dtype),
            d=np.empty((rows, n), dtype),
        )


def _blocks(m: int, rows: int):
    for a in range(0, m, rows):
        yield a, min(m, a + rows)


def _rows_of(c, a: int, b: int, scratch: np.ndarray | None = None) -> np.ndarray | float:
    if isinstance(c, DataWeights):
        return c.rows(a, b, scratch)
    return c[a:b] if isinstance(c, np.ndarray) and c.ndim == 2 else c


@dataclass(frozen=True)
class DataWeights:
    """Data-term weights ``beta * w`` of a 0/1 data weight ``w`` (bool), formed a block of rows at a time.

    Used on the finest grid, where a masked pixel has weight 0 and every other 1: the values
    are those of the whole-frame ``np.multiply(w, beta)``, so results are bit-identical, and
    the frame-sized float array is never held (memory, issue 15).
    """

    w: np.ndarray  # (M, N) bool
    beta: np.floating  # the data weight, float32

    def rows(self, a: int, b: int, out: np.ndarray) -> np.ndarray:
        """``beta * w`` of rows ``a .. b-1`` written into ``out[: b - a]``."""
        return np.multiply(self.w[a:b], self.beta, out=out[: b - a])


def times_data_weights(weights: DataWeights | np.ndarray | float, x: np.ndarray, out: np.ndarray,
                       ws: Workspace) -> np.ndarray:
    """``out = weights * x`` (``out`` may be ``x``), a block of rows at a time for :class:`DataWeights`."""
    if not isinstance(weights, DataWeights):
        return np.multiply(weights, x, out=out)
    for a, b in _blocks(x.shape[0], ws.d.shape[0]):
        np.multiply(weights.rows(a, b, ws.d), x[a:b], out=out[a:b])
    return out


@dataclass(frozen=True)
class PhaseWeights:
    """Edge weights ``c = v**2 + eta`` of the u-step, formed a block of rows at a time from ``v``.

    The weight of a difference is ``c`` at the pixel owning it: ``cx = c[:, :-1]``,
    ``cy = c[:-1, :]``. Formed on demand into a few rows of scratch instead of held as two
    frame-sized arrays (memory, issue 15); the values are those of the whole-frame
    ``np.square(v) + eta``, so results are bit-identical.
    """

    v: np.ndarray  # (M, N) phase field (fixed during a u-solve)
    eta: np.floating  # small positive floor, in v's dtype

    def rows(self, a: int, b: int, out: np.ndarray) -> np.ndarray:
        """``c`` of rows ``a .. b-1`` written into ``out[: b - a]``."""
        c = out[: b - a]
        np.square(self.v[a:b], out=c)
        c += self.eta
        return c


@dataclass(frozen=True)
class ScreenedInverse:
    """Jacobi preconditioner of the v-step, ``free / (diag + 4 k - k per border side)``, formed by blocks of rows.

    The inverse of the diagonal of ``diag + k L`` (``L`` the Neumann graph Laplacian), zero on
    fixed entries: the same float32 operations in the same order at every pixel as the
    whole-frame ``inv = diag + 4k; inv[0] -= k; inv[-1] -= k; inv[:, 0] -= k; inv[:, -1] -= k;
    1 / inv; inv *= free``, so results are bit-identical, while no frame-sized inverse is held
    beside ``diag`` (memory, issue 15). Called as ``(r, out) -> out = r * inverse``.
    """

    diag: np.ndarray  # (M, N) the operator's own diagonal term
    k_lap: np.floating  # weight of the Laplacian, in diag's dtype
    free: np.ndarray | None  # (M, N) bool: 1 on unknowns, 0 on fixed entries; None: all free
    scratch: np.ndarray  # (rows, N) block scratch

    @classmethod
    def for_level(cls, diag: np.ndarray, k_lap: np.floating, free: np.ndarray | None) -> ScreenedInverse:
        rows = max(1, min(_CHUNK_ROWS, diag.shape[0]))
        return cls(diag, k_lap, free, np.empty((rows, diag.shape[1]), diag.dtype))

    def rows(self, a: int, b: int) -> np.ndarray:
        """The inverse of rows ``a .. b-1`` (in the scratch)."""
        m = self.diag.shape[0]
        inv = self.scratch[: b - a]
        np.add(self.diag[a:b], 4.0 * self.k_lap, out=inv)
        if a == 0:
            inv[0, :] -= self.k_lap
        if b == m:
            inv[-1, :] -= self.k_lap
        inv[:, 0] -= self.k_lap
        inv[:, -1] -= self.k_lap
        np.reciprocal(inv, out=inv)
        if self.free is not None:
            inv *= self.free[a:b]
        return inv

    def into(self, out: np.ndarray) -> np.ndarray:
        """The whole inverse written into ``out`` (a buffer free at the time)."""
        for a, b in _blocks(self.diag.shape[0], self.scratch.shape[0]):
            out[a:b] = self.rows(a, b)
        return out

    def __call__(self, r: np.ndarray, out: np.ndarray) -> np.ndarray:
        for a, b in _blocks(self.diag.shape[0], self.scratch.shape[0]):
            np.multiply(r[a:b], self.rows(a, b), out=out[a:b])
        return out


def phase_diagonal(diag: np.ndarray | float, weights: PhaseWeights, out: np.ndarray, ws: Workspace) -> np.ndarray:
    """``out`` = the diagonal of ``diag + Dx^T cx Dx + Dy^T cy Dy`` with :class:`PhaseWeights`.

    Bit-identical to ``out = diag; out[:, :-1] += cx; out[:, 1:] += cx; out[:-1] += cy;
    out[1:] += cy`` (the same additions in the same order at every pixel), a block of rows
    at a time.
    """
    m, n = out.shape
    rows = ws.c.shape[0]
    for a, b in _blocks(m, rows):
        k = b - a
        out[a:b] = _rows_of(diag, a, b, ws.d)
        c = weights.rows(a, b, ws.c)
        if n > 1:
            out[a:b, :-1] += c[:, :-1]
            out[a:b, 1:] += c[:, :-1]
        hi = min(b, m - 1)
        if hi > a:
            out[a:hi] += c[: hi - a]
        if a > 0:  # the difference owned by the row above the block: its weight formed again
            above = ws.carry
            np.square(weights.v[a - 1], out=above)
            above += weights.eta
            out[a] += above
        if k > 1:
            out[a + 1 : b] += c[: k - 1]
    return out


def gradient_sq(u: np.ndarray, out: np.ndarray, ws: Workspace) -> np.ndarray:
    """``out = (Dx u)^2 + (Dy u)^2`` at the owning pixel (zero across the border).

    Bit-identical to ``out = 0; out[:, :-1] += (Dx u)**2; out[:-1, :] += (Dy u)**2``.
    """
    m, n = u.shape
    rows = ws.dx.shape[0]
    out.fill(0.0)
    for a, b in _blocks(m, rows):
        k = b - a
        if n > 1:
            dx = ws.dx[:k]
            np.subtract(u[a:b, 1:], u[a:b, :-1], out=dx)
            np.square(dx, out=dx)
            out[a:b, :-1] += dx
        hi = min(b, m - 1)  # vertical differences owned by rows a .. hi-1
        if hi > a:
            dy = ws.dy[: hi - a]
            np.subtract(u[a + 1 : hi + 1], u[a:hi], out=dy)
            np.square(dy, out=dy)
            out[a:hi] += dy
    return out


def apply_weighted_laplacian(
    x: np.ndarray,
    cx: np.ndarray | float | PhaseWeights,
    cy: np.ndarray | float | None,
    diag: np.ndarray | float,
    out: np.ndarray,
    ws: Workspace,
) -> np.ndarray:
    """``out = diag * x + Dx^T (cx Dx x) + Dy^T (cy Dy x)``.

    Parameters
    ----------
    x : (M, N) ndarray
        Field to apply the operator to.
    cx : (M, N-1) ndarray, float or PhaseWeights
        Weights of the horizontal differences (>= 0); :class:`PhaseWeights` gives both
        ``cx`` and ``cy``, formed block by block (``cy`` is then ignored).
    cy : (M-1, N) ndarray or float
        Weights of the vertical differences (>= 0).
    diag : (M, N) ndarray, float or DataWeights
        Diagonal (zeroth-order) term.
    out : (M, N) ndarray
        Result buffer (must not alias ``x``).
    ws : Workspace
        Scratch buffers of the right shape.

    Returns
    -------
    out : (M, N) ndarray
    """
    m, n = x.shape
    rows = ws.dx.shape[0]
    carry = ws.carry
    for a, b in _blocks(m, rows):
        k = b - a
        hi = min(b, m - 1)
        if isinstance(cx, PhaseWeights):
            c = cx.rows(a, b, ws.c)
            cx_rows, cy_rows = c[:, :-1], c[: hi - a]
        else:
            cx_rows, cy_rows = _rows_of(cx, a, b), _rows_of(cy, a, hi)
        np.multiply(x[a:b], _rows_of(diag, a, b, ws.d), out=out[a:b])
        if n > 1:
            dx = ws.dx[:k]
            np.subtract(x[a:b, 1:], x[a:b, :-1], out=dx)
            dx *= cx_rows
            out[a:b, :-1] -= dx
            out[a:b, 1:] += dx
        # vertical: every pixel first loses its own difference, then gains the one above,
        # as in the whole-frame form; the block's last difference waits for the next block
        if hi > a:
            dy = ws.dy[: hi - a]
            np.subtract(x[a + 1 : hi + 1], x[a:hi], out=dy)
            dy *= cy_rows
            out[a:hi] -= dy
        if a > 0:
            out[a] += carry
        if k > 1:
            out[a + 1 : b] += ws.dy[: k - 1]
        if b < m:
            carry[...] = ws.dy[k - 1]
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
    b: np.ndarray | float | Callable[[np.ndarray], np.ndarray],
    x: np.ndarray,
    inv_diag: np.ndarray,
    ws: Workspace,
    *,
    rtol: float,
    max_iter: int,
    free: np.ndarray | None = None,
    inv_sum: float | None = None,
) -> tuple[int, float]:
    """Jacobi-preconditioned conjugate gradients for ``A x = b``, warm-started, in place.

    Every iterate lowers the quadratic ``x^T A x / 2 - b^T x`` (a property of CG on a
    symmetric positive definite ``A``), so a truncated solve never raises the energy.

    Parameters
    ----------
    apply : callable ``(x, out) -> out``
        The SPD operator.
    b : (M, N) ndarray, float or callable ``(out) -> out``
        Right-hand side (a scalar: the same value everywhere; a callable writes it into the
        buffer it is given, so no frame-sized right-hand side is held between solves).
    x : (M, N) ndarray, C-contiguous
        Initial guess, overwritten by the solution.
    inv_diag : (M, N) ndarray or callable ``(r, out) -> out``
        Inverse of the operator's diagonal (zero on fixed entries), or its product with a
        residual (e.g. :class:`ScreenedInverse`, formed block by block).
    ws : Workspace
        Scratch buffers.
    rtol : float
        Stop when the preconditioned residual norm falls below ``rtol`` times that of ``b``.
    max_iter : int
        Iteration cap.
    free : (M, N) ndarray, optional
        1 on unknowns, 0 on entries that keep their value in ``x`` (Dirichlet data).
    inv_sum : float, optional
        ``np.sum(inverse, dtype=float64)``: needed with a scalar ``b`` and a callable ``inv_diag``.

    Returns
    -------
    iterations : int
    relative_residual : float
    """
    r, z, p, ap = ws.r, ws.z, ws.p, ws.ap
    rf, zf, pf, apf, xf = r.ravel(), z.ravel(), p.ravel(), ap.ravel(), x.ravel()
    if callable(inv_diag):
        precondition = inv_diag
    else:
        def precondition(res: np.ndarray, out: np.ndarray) -> np.ndarray:
            return np.multiply(res, inv_diag, out=out)
    if callable(b):
        b = b(ap)  # written into ap, which is free until the iterations start
    apply(x, r)  # may use z as scratch; leaves ap alone
    np.subtract(b, r, out=r)
    if free is not None:
        r *= free
    if np.ndim(b) == 0:
        total = float(np.sum(inv_diag, dtype=np.float64)) if inv_sum is None else float(inv_sum)
        bnorm = np.sqrt(max(float(b) ** 2 * total, 0.0))
    else:
        precondition(b, z)
        bnorm = np.sqrt(max(_dot(b.ravel(), zf), 0.0))
    precondition(r, z)
    rz = _dot(rf, zf)
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
        precondition(r, z)
        rz_new = _dot(rf, zf)
        if rz_new <= target:
            rz = rz_new
            break
        p *= rz_new / rz
        p += z
        rz = rz_new
    return it, np.sqrt(max(rz, 0.0)) / bnorm
