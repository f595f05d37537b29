"""Cell-centred finite-volume heat conduction through a layered envelope element.

The element is a box of ``nz`` layers (through the thickness, z = 0 on the inside
face) by ``ny`` rows by ``nx`` columns (in the plane of the surface). Every cell
has a conductivity λ (W/m·K) and a volumetric heat capacity ρc (J/m³·K). Face
conductances between neighbouring cells use the harmonic mean (two half-cell
resistances in series), which makes a stack of homogeneous layers exact. Both
large faces exchange heat with their surroundings, ``q = h·(T_surface − T_ambient)`` with a
per-cell coefficient and ambient temperature; the four edges are adiabatic.

The linear system is solved by conjugate gradients preconditioned with a
geometric multigrid V-cycle that coarsens in the plane only (2×2 aggregation,
every level keeps all z layers) and smooths with z-line (tridiagonal) Jacobi
relaxation. Line relaxation through the thin, strongly coupled thickness
direction plus in-plane coarsening is the standard remedy for the strong
anisotropy of thin layers (semi-coarsening multigrid, e.g. Trottenberg,
Oosterlee & Schüller, *Multigrid*, Academic Press 2001, §5.1) [M].

Implicit Euler time stepping adds ``C/Δt`` to the diagonal.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from irseg.errors import SolverError

__all__ = ["Operator", "build_operator", "solve_steady", "solve_transient", "surface_fields"]


@dataclass(frozen=True)
class Operator:
    """Conductances of one grid level (W/K); ``gb`` is an extra diagonal term.

    Attributes
    ----------
    gx : (nz, ny, nx-1) ndarray
    gy : (nz, ny-1, nx) ndarray
    gz : (nz-1, ny, nx) ndarray
    gb : (nz, ny, nx) ndarray
        Diagonal contributions: the surface coefficients of the two large faces and, in time steps, C/Δt.
    """

    gx: np.ndarray
    gy: np.ndarray
    gz: np.ndarray
    gb: np.ndarray

    @property
    def shape(self) -> tuple[int, int, int]:
        return self.gb.shape

    def diagonal(self) -> np.ndarray:
        d = self.gb.copy()
        d[:, :, :-1] += self.gx
        d[:, :, 1:] += self.gx
        d[:, :-1, :] += self.gy
        d[:, 1:, :] += self.gy
        d[:-1] += self.gz
        d[1:] += self.gz
        return d

    def matvec(self, t: np.ndarray) -> np.ndarray:
        """Return ``A @ t`` for a (nz, ny, nx) field."""
        out = self.gb * t
        f = self.gx * (t[:, :, :-1] - t[:, :, 1:])
        out[:, :, :-1] += f
        out[:, :, 1:] -= f
        f = self.gy * (t[:, :-1, :] - t[:, 1:, :])
        out[:, :-1, :] += f
        out[:, 1:, :] -= f
        f = self.gz * (t[:-1] - t[1:])
        out[:-1] += f
        out[1:] -= f
        return out

    def with_diagonal(self, extra: np.ndarray) -> Operator:
        return Operator(self.gx, self.gy, self.gz, self.gb + extra)

    def to_sparse(self) -> sp.csr_matrix:
        nz, ny, nx = self.shape
        idx = np.arange(nz * ny * nx).reshape(nz, ny, nx)
        rows, cols, vals = [], [], []
        for g, a, b in (
            (self.gx, idx[:, :, :-1], idx[:, :, 1:]),
            (self.gy, idx[:, :-1, :], idx[:, 1:, :]),
            (self.gz, idx[:-1], idx[1:]),
        ):
            rows += [a.ravel(), b.ravel()]
            cols += [b.ravel(), a.ravel()]
            vals += [-g.ravel(), -g.ravel()]
        rows.append(idx.ravel())
        cols.append(idx.ravel())
        vals.append(self.diagonal().ravel())
        n = nz * ny * nx
        return sp.csr_matrix(
            (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
        )


def _harmonic(k1: np.ndarray, k2: np.ndarray, d1: float | np.ndarray, d2: float | np.ndarray) -> np.ndarray:
    """Conductance per unit area of two half cells in series, W/m²K."""
    return 1.0 / (0.5 * d1 / k1 + 0.5 * d2 / k2)


def build_operator(
    conductivity: np.ndarray,
    *,
    dx_m: float,
    dy_m: float,
    dz_m: np.ndarray,
    h_inside: np.ndarray,
    h_outside: np.ndarray,
) -> tuple[Operator, np.ndarray, np.ndarray]:
    """Assemble face conductances for a (nz, ny, nx) conductivity field.

    Parameters
    ----------
    conductivity : (nz, ny, nx) ndarray
        λ per cell, W/m·K; layer 0 touches the inside face.
    dx_m, dy_m : float
        In-plane cell size (columns, rows), m.
    dz_m : (nz,) ndarray
        Layer cell thicknesses, m.
    h_inside, h_outside : (ny, nx) ndarray
        Combined surface coefficients of the two faces, W/m²K.

    Returns
    -------
    op : Operator
    g_in, g_out : (ny, nx) ndarray
        Conductance (W/K) from each face cell's centre to the ambient, through
        half the cell and the surface resistance.
    """
    k = np.asarray(conductivity, dtype=float)
    dz = np.asarray(dz_m, dtype=float)
    if np.any(k <= 0) or not np.all(np.isfinite(k)):
        raise SolverError("scene conductivity must be finite and > 0 in every cell; check the materials")
    area_z = dx_m * dy_m
    gx = _harmonic(k[:, :, :-1], k[:, :, 1:], dx_m, dx_m) * (dy_m * dz[:, None, None])
    gy = _harmonic(k[:, :-1, :], k[:, 1:, :], dy_m, dy_m) * (dx_m * dz[:, None, None])
    gz = _harmonic(k[:-1], k[1:], dz[:-1, None, None], dz[1:, None, None]) * area_z
    g_in = area_z / (1.0 / np.asarray(h_inside, float) + 0.5 * dz[0] / k[0])
    g_out = area_z / (1.0 / np.asarray(h_outside, float) + 0.5 * dz[-1] / k[-1])
    gb = np.zeros_like(k)
    gb[0] += g_in
    gb[-1] += g_out
    return Operator(gx, gy, gz, gb), g_in, g_out


# --------------------------------------------------------------------------- multigrid


def _pair_sum(a: np.ndarray, axis: int) -> np.ndarray:
    """Sum neighbouring pairs along ``axis`` (an odd last element stays alone)."""
    n = a.shape[axis]
    if n % 2:
        pad = [(0, 0)] * a.ndim
        pad[axis] = (0, 1)
        a = np.pad(a, pad)
    shape = list(a.shape)
    shape[axis : axis + 1] = [shape[axis] // 2, 2]
    return a.reshape(shape).sum(axis=axis + 1)


def _coarsen(op: Operator) -> Operator:
    # In-plane couplings across aggregate boundaries, halved: a piecewise-constant
    # Galerkin product is twice too stiff in-plane for 2x coarsening.
    gx = 0.5 * _pair_sum(op.gx[:, :, 1::2], 1)
    gy = 0.5 * _pair_sum(op.gy[:, 1::2, :], 2)
    gz = _pair_sum(_pair_sum(op.gz, 1), 2)
    gb = _pair_sum(_pair_sum(op.gb, 1), 2)
    return Operator(gx, gy, gz, gb)


class _Level:
    def __init__(self, op: Operator) -> None:
        self.op = op
        d = op.diagonal()
        off = -op.gz  # sub/super diagonal of every z line
        nz = d.shape[0]
        cp = np.empty_like(d)
        den = np.empty_like(d)
        den[0] = d[0]
        for z in range(1, nz):
            cp[z - 1] = off[z - 1] / den[z - 1]
            den[z] = d[z] - off[z - 1] * cp[z - 1]
        self.cp, self.den, self.off = cp, den, off

    def line_solve(self, r: np.ndarray) -> np.ndarray:
        nz = r.shape[0]
        y = np.empty_like(r)
        y[0] = r[0] / self.den[0]
        for z in range(1, nz):
            y[z] = (r[z] - self.off[z - 1] * y[z - 1]) / self.den[z]
        for z in range(nz - 2, -1, -1):
            y[z] -= self.cp[z] * y[z + 1]
        return y


class _Multigrid:
    """V-cycle preconditioner: z-line Jacobi smoothing, 2x2 in-plane coarsening."""

    def __init__(self, op: Operator, *, omega: float = 0.8, sweeps: int = 2, min_size: int = 6) -> None:
        self.levels = [_Level(op)]
        while min(self.levels[-1].op.shape[1:]) > min_size:
            self.levels.append(_Level(_coarsen(self.levels[-1].op)))
        self.coarse = spla.splu(self.levels[-1].op.to_sparse().tocsc())
        self.omega, self.sweeps = omega, sweeps

    def _cycle(self, i: int, r: np.ndarray) -> np.ndarray:
        lev = self.levels[i]
        if i == len(self.levels) - 1:
            return self.coarse.solve(r.ravel()).reshape(r.shape)
        x = self.omega * lev.line_solve(r)
        for _ in range(self.sweeps - 1):
            x += self.omega * lev.line_solve(r - lev.op.matvec(x))
        res = r - lev.op.matvec(x)
        rc = _pair_sum(_pair_sum(res, 1), 2)
        ec = self._cycle(i + 1, rc)
        ny, nx = r.shape[1:]
        x += np.repeat(np.repeat(ec, 2, axis=1), 2, axis=2)[:, :ny, :nx]
        for _ in range(self.sweeps):
            x += self.omega * lev.line_solve(r - lev.op.matvec(x))
        return x

    def __call__(self, r: np.ndarray) -> np.ndarray:
        return self._cycle(0, r)


def _pcg(
    op: Operator, b: np.ndarray, x0: np.ndarray, mg: _Multigrid, *, rtol: float, max_iter: int
) -> tuple[np.ndarray, int]:
    x = x0.copy()
    r = b - op.matvec(x)
    bnorm = float(np.linalg.norm(b)) or 1.0
    if float(np.linalg.norm(r)) <= rtol * bnorm:
        return x, 0
    z = mg(r)
    p = z.copy()
    rz = float(np.vdot(r, z))
    for it in range(1, max_iter + 1):
        ap = op.matvec(p)
        alpha = rz / float(np.vdot(p, ap))
        x += alpha * p
        r -= alpha * ap
        if float(np.linalg.norm(r)) <= rtol * bnorm:
            return x, it
        z = mg(r)
        rz_new = float(np.vdot(r, z))
        p = z + (rz_new / rz) * p
        rz = rz_new
    raise SolverError(
        f"scene conduction solver did not reach rtol={rtol:g} in {max_iter} iterations; "
        "use a coarser grid or check for extreme conductivity contrasts"
    )


def solve_steady(
    op: Operator,
    rhs: np.ndarray,
    *,
    x0: np.ndarray | None = None,
    rtol: float = 1e-10,
    max_iter: int = 300,
) -> tuple[np.ndarray, int]:
    """Solve ``A T = rhs`` for the cell temperatures.

    Parameters
    ----------
    op : Operator
    rhs : (nz, ny, nx) ndarray
        Source vector, W (the two large faces contribute ``g·T_ambient``).
    x0 : ndarray, optional
        Starting guess (default: rhs-weighted mean ambient).
    rtol : float
        Relative residual tolerance.

    Returns
    -------
    t : (nz, ny, nx) ndarray
    iterations : int

    Raises
    ------
    SolverError
        When the tolerance is not reached.
    """
    mg = _Multigrid(op)
    if x0 is None:
        x0 = np.full(op.shape, float(rhs.sum() / op.gb.sum()))
    return _pcg(op, rhs, x0, mg, rtol=rtol, max_iter=max_iter)


def solve_transient(
    op: Operator,
    capacity_j_k: np.ndarray,
    rhs_of_time,
    *,
    t0: np.ndarray,
    dt_s: float,
    n_steps: int,
    rtol: float = 1e-9,
):
    """Implicit Euler time stepping of ``C dT/dt = rhs(t) − A T``.

    Parameters
    ----------
    op : Operator
        Steady operator (surface coefficients of the large faces included).
    capacity_j_k : (nz, ny, nx) ndarray
        Heat capacity of each cell, ρc·V, J/K.
    rhs_of_time : callable
        ``rhs_of_time(time_s) -> rhs``: the (nz, ny, nx) source vector at the end of the
        step, W (the operator, surface coefficients included, stays that of ``op``).
    t0 : (nz, ny, nx) ndarray
        Initial temperatures.
    dt_s : float
        Time step, s.
    n_steps : int

    Yields
    ------
    time_s, t : float, ndarray
        After every step.
    """
    c_dt = capacity_j_k / dt_s
    t = t0.copy()
    step_op = op.with_diagonal(c_dt)
    mg = _Multigrid(step_op)
    for n in range(1, n_steps + 1):
        time_s = n * dt_s
        rhs = rhs_of_time(time_s)
        t, _ = _pcg(step_op, rhs + c_dt * t, t, mg, rtol=rtol, max_iter=300)
        yield time_s, t


def surface_fields(
    t: np.ndarray,
    *,
    conductivity: np.ndarray,
    dz_m: np.ndarray,
    h: np.ndarray,
    ambient: np.ndarray,
    face: str,
) -> tuple[np.ndarray, np.ndarray]:
    """Surface temperature and outward heat flux density on one face.

    Parameters
    ----------
    t : (nz, ny, nx) ndarray
        Cell temperatures.
    conductivity, dz_m
        As for :func:`build_operator`.
    h, ambient : (ny, nx) ndarray
        Surface coefficient (W/m²K) and ambient temperature of that face.
    face : {"inside", "outside"}

    Returns
    -------
    t_surface : (ny, nx) ndarray
    q_w_m2 : (ny, nx) ndarray
        Heat flux density from the solid into the ambient, W/m² (negative when
        heat enters the solid, as on a heated room's side).
    """
    z = 0 if face == "inside" else -1
    r_half = 0.5 * dz_m[z] / conductivity[z]
    q = (t[z] - ambient) / (1.0 / h + r_half)
    return ambient + q / h, q
