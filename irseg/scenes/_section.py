"""Steady 2-D heat conduction through a section of any shape on a uniform grid.

A section is a (ny, nx) grid of square cells of side ``cell_m``: solid cells carry a
conductivity λ (W/(m·K)); the other cells are air of a numbered *zone* (a room, the outside)
with a combined surface coefficient h and an ambient temperature. Cell-centred finite
volumes: two solid neighbours are joined by two half-cell resistances in series (harmonic
mean, exact for layers aligned with the grid); a solid cell beside an air cell exchanges
``(T_amb − T)/(1/h + cell/(2λ))`` per metre of depth through that face. The edges of the grid
are adiabatic (the cut-off planes of ISO 10211). The sparse system is solved directly.

Heat flows are per metre of depth (W/m), counted positive into the solid from each zone.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from irseg.errors import ConfigError

__all__ = ["Section", "SectionSolution", "solve_section"]

_STEPS = ((0, 1), (0, -1), (1, 0), (-1, 0))  # (drow, dcol) to a neighbour


@dataclass(frozen=True)
class Section:
    """A 2-D section: ``conductivity`` (NaN in air), ``zone`` (0 in solid, 1.. in air) and the
    zones' ``(h W/(m²K), ambient °C)`` in ``zones``."""

    conductivity: np.ndarray
    zone: np.ndarray
    zones: dict
    cell_m: float


@dataclass(frozen=True)
class SectionSolution:
    """Cell temperatures (NaN in air), the boundary faces and the heat flow from each zone (W/m).

    ``faces`` holds one row per solid face touching air: solid row, col, the air cell's row,
    col, zone, the face's conductance per metre (W/(m·K)) and its surface temperature (°C).
    """

    temperature_c: np.ndarray
    faces: dict
    flow_w_m: dict


def solve_section(section: Section) -> SectionSolution:
    """Steady temperatures of a section and the heat flow each zone gives it.

    Raises
    ------
    ConfigError
        A solid cell with a conductivity that is not positive, or an air cell of a zone with no
        conditions.
    """
    k = np.asarray(section.conductivity, float)
    zone = np.asarray(section.zone, int)
    c = float(section.cell_m)
    solid = zone == 0
    if not np.all(np.isfinite(k[solid]) & (k[solid] > 0)):
        raise ConfigError("section: every solid cell (zone 0) needs a conductivity > 0 W/(m·K)")
    missing = set(np.unique(zone[~solid]).tolist()) - set(section.zones)
    if missing:
        raise ConfigError(f"section: air zones {sorted(missing)} have no (h, ambient) in zones")
    ny, nx = k.shape
    index = np.full((ny, nx), -1, int)
    n = int(solid.sum())
    index[solid] = np.arange(n)
    rows, cols, vals = [], [], []
    diag = np.zeros(n)
    rhs = np.zeros(n)
    face_parts: dict[str, list] = {key: [] for key in ("row", "col", "air_row", "air_col", "zone", "g")}
    r_all, c_all = np.nonzero(solid)
    for dr, dc in _STEPS:
        r2, c2 = r_all + dr, c_all + dc
        inside = (r2 >= 0) & (r2 < ny) & (c2 >= 0) & (c2 < nx)  # the grid's edges are adiabatic
        r1, c1, r2, c2 = r_all[inside], c_all[inside], r2[inside], c2[inside]
        k1 = k[r1, c1]
        both = solid[r2, c2]
        # solid-solid: two half cells in series, per metre of depth (each pair is visited from both sides)
        g = c / (0.5 * c / k1[both] + 0.5 * c / k[r2[both], c2[both]])
        i, j = index[r1[both], c1[both]], index[r2[both], c2[both]]
        rows.append(i)
        cols.append(j)
        vals.append(-g)
        np.add.at(diag, i, g)
        # solid-air: the surface resistance and half the cell
        air = ~both
        za = zone[r2[air], c2[air]]
        h = np.array([section.zones[z][0] for z in za], float)
        amb = np.array([section.zones[z][1] for z in za], float)
        g = c / (1.0 / h + 0.5 * c / k1[air])  # per metre of depth: a face is c wide
        i = index[r1[air], c1[air]]
        np.add.at(diag, i, g)
        np.add.at(rhs, i, g * amb)
        for key, v in (("row", r1[air]), ("col", c1[air]), ("air_row", r2[air]), ("air_col", c2[air]),
                       ("zone", za), ("g", g)):
            face_parts[key].append(v)
    rows.append(np.arange(n))
    cols.append(np.arange(n))
    vals.append(diag)
    a = sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n))
    t_solid = spla.spsolve(a.tocsc(), rhs)
    t = np.full((ny, nx), np.nan)
    t[solid] = t_solid
    faces = {key: np.concatenate(v) for key, v in face_parts.items()}
    amb = np.array([section.zones[z][1] for z in faces["zone"]], float)
    h = np.array([section.zones[z][0] for z in faces["zone"]], float)
    t_cell = t[faces["row"], faces["col"]]
    q = faces["g"] * (amb - t_cell)  # W per metre of depth per face (cell side c), into the solid
    faces["surface_c"] = amb - q / (h * c)
    faces["q_w_m"] = q
    flow = {int(z): float(q[faces["zone"] == z].sum()) for z in section.zones}
    return SectionSolution(t, faces, flow)
