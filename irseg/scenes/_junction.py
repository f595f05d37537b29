"""A wall meeting a flat roof, seen from inside: 2-D conduction of the junction's vertical section
and a camera looking up into it at 45° to the wall and to the ceiling.

**Section** (:func:`junction_section`). The brick + EPS wall of :func:`irseg.scenes._elements.masonry_wall`
carries a warm flat roof (150 mm concrete deck, 150 mm EPS, 10 mm bitumen membrane); the room is
the inner quadrant, the outside wraps round the top and the outer side. The roof's insulation and
membrane run over the wall head, the wall's insulation and render run up to them, and the deck
bears on the brick: the usual externally insulated eaves of a flat roof. Both legs end in adiabatic
cut-off planes ``leg_m`` from the inner corner (ISO 10211: at least 1 m [from memory]). Each inside
face keeps its own surface coefficient (the wall's for horizontal heat flow, the soffit's for
upward flow; ISO 6946's R_si 0.13 and 0.10 m²K/W [from memory]). The 2-D heat flow per metre of
junction and per kelvin (``L_2D``) gives, by ISO 14683's conventions [from memory],

    ψ_i = L_2D − U_w·l_w − U_r·l_r                       (internal dimensions)
    ψ_e = L_2D − U_w·(l_w + d_r) − U_r·(l_r + d_w)       (external dimensions)

with the plane elements' U-values (ISO 6946 series resistances with the same coefficients), the
legs' inside lengths ``l`` and the elements' thicknesses ``d``. As at an external wall corner
(:mod:`irseg.scenes._corner`), ψ_i > 0 > ψ_e and ψ_i is the extra heat a thermogram of the inside
faces shows against the plane wall and ceiling.

**Scene** (:func:`junction_scene`). The two inside faces are unfolded into one plane (the ceiling
above the junction line, horizontal, the wall below); each face's surface temperature is its plane
value plus the section's contrast, per kelvin of the difference between the inside air next to it
and the outside (the wall's air stratified, the ceiling's at the air's top value). The camera on
the junction's bisector sees both faces at 45°: rows are foreshortened by cos 45° (``v = y·cos 45°``),
the junction line keeps its length. The projection is orthographic (the corner's pinhole
rendering, :func:`irseg.scenes._corner.corner_scene` with ``perspective_m``, is not offered here). The sidecar
declares the view's heat flow upward (the thermographer looks up at a ceiling junction), which is what
tells the analysis that the face above the line is a ceiling and the one below a wall
(:func:`irseg.analysis._bridges.side_coefficients`). A plane of uniform faces, no defect: the validation asks that the
junction is a ``thermal_bridge`` named geometric, found over its length, with ψ against ψ_i.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from irseg.errors import ConfigError
from irseg.scenes._defects import Defect
from irseg.scenes._elements import masonry_wall
from irseg.scenes._materials import MATERIALS
from irseg.scenes._physics import Conditions, h_convective_interior, h_radiative
from irseg.scenes._scene import DefectTruth, Scene, face_conditions
from irseg.scenes._section import Section, solve_section

__all__ = ["JunctionSection", "junction_section", "junction_scene", "ROOF_LAYERS", "JUNCTION_NAME",
           "JUNCTION_VIEW_DEG"]

JUNCTION_NAME = "wall_roof_junction"
JUNCTION_VIEW_DEG = 45.0
#: The warm flat roof of the section, inside first (material, thickness m).
ROOF_LAYERS = (("concrete", 0.15), ("eps", 0.15), ("bitumen", 0.010))
_HALF_PEAK = 0.5  # the junction's truth region: where its contrast holds half of its peak
_CHARGE_M = 1.0  # cells this close to the junction line carry its excess


@dataclass(frozen=True)
class JunctionSection:
    """The solved section per kelvin of inside-outside ambient difference.

    ``s_m`` is each inside face's position along the unfolded faces (0 at the inner corner, > 0
    down the wall, < 0 along the ceiling), ``factor`` its temperature factor
    ``(T_si − T_e)/(T_i − T_e)``, ``factor_wall`` and ``factor_roof`` the plane elements' ``1 − U/h_i``.
    """

    s_m: np.ndarray
    factor: np.ndarray
    factor_wall: float
    factor_roof: float
    l2d_w_mk: float
    outflow_w_mk: float
    u_wall_w_m2k: float
    u_roof_w_m2k: float
    psi_i_w_mk: float
    psi_e_w_mk: float
    leg_m: float

    def contrast(self, s_m: np.ndarray) -> np.ndarray:
        """``factor`` minus the plane factor of the face at ``s_m`` (0 beyond the legs' ends)."""
        plane = np.where(self.s_m >= 0, self.factor_wall, self.factor_roof)
        return np.interp(s_m, self.s_m, self.factor - plane, left=0.0, right=0.0)


def _cells(layers, c: float, what: str) -> list[int]:
    n = [t / c for _, t in layers]
    if any(abs(k - round(k)) > 1e-6 or round(k) < 1 for k in n):
        raise ConfigError(f"junction section: every {what} layer must be a whole number of {c * 1000:g} mm cells; "
                          f"got {[t for _, t in layers]} m")
    return [int(round(k)) for k in n]


def _by_depth(layers, cells: list[int]) -> np.ndarray:
    """Conductivity per cell from the outside face inward."""
    lam = [MATERIALS[m].conductivity_w_mk for m, _ in layers]
    return np.concatenate([np.full(k, v) for k, v in zip(cells[::-1], lam[::-1])])


def _u(layers, h_in: float, h_out: float) -> float:
    return 1.0 / (1.0 / h_in + sum(t / MATERIALS[m].conductivity_w_mk for m, t in layers) + 1.0 / h_out)


def junction_section(wall_layers, roof_layers, *, h_wall: float, h_roof: float, h_outside: float,
                     leg_m: float = 2.0, cell_m: float = 0.005) -> JunctionSection:
    """Solve the wall/flat-roof junction (layers inside first: material, thickness m; the first layer of
    the roof and the second of the wall are the structural cores, the layers outside them wrap round).

    Raises
    ------
    ConfigError
        A layer that is not a whole number of cells, or legs shorter than 1 m.
    """
    c = float(cell_m)
    if leg_m < 1.0:
        raise ConfigError(f"junction section: legs of {leg_m} m are too short; ISO 10211 cut-off planes lie at "
                          "least 1 m from the junction")
    cw, cr = _cells(wall_layers, c, "wall"), _cells(roof_layers, c, "roof")
    nw, nr, nl = sum(cw), sum(cr), int(round(leg_m / c))
    lam_w, lam_r = _by_depth(wall_layers, cw), _by_depth(roof_layers, cr)
    wall_outer, roof_outer = sum(cw[2:]), sum(cr[1:])  # outside the brick / outside the deck
    ny, nx = 1 + nr + nl, 1 + nw + nl
    dr = np.arange(ny)[:, None] - 1 + np.zeros((1, nx), int)  # depth below the roof's outside face
    dc = np.arange(nx)[None, :] - 1 + np.zeros((ny, 1), int)  # depth inside the wall's outside face
    zone = np.zeros((ny, nx), int)
    zone[(dr < 0) | (dc < 0)] = 2
    zone[(dr >= nr) & (dc >= nw)] = 1  # the room
    zone[(dr == nr) & (dc >= nw)] = 3  # the air under the soffit: its own coefficient
    solid = zone == 0
    # the roof's layers over the room and, outside the wall's insulation, over the wall head; the wall's below
    roofish = solid & ((dr < roof_outer) | ((dc >= wall_outer) & (dr < nr)))
    k = np.full((ny, nx), np.nan)
    k[roofish] = lam_r[np.clip(dr[roofish], 0, nr - 1)]
    wallish = solid & ~roofish
    k[wallish] = lam_w[np.clip(dc[wallish], 0, nw - 1)]
    sol = solve_section(Section(k, zone, {1: (h_wall, 1.0), 2: (h_outside, 0.0), 3: (h_roof, 1.0)}, c))
    f = sol.faces
    room = (f["zone"] == 1) | (f["zone"] == 3)
    down = (f["row"][room] - 1 - nr + 0.5) * c  # below the inner corner
    along = (f["col"][room] - 1 - nw + 0.5) * c  # along the ceiling from the inner corner
    on_wall = f["air_col"][room] > f["col"][room]  # the room lies beside the face: the wall
    s = np.where(on_wall, down, -along)
    order = np.argsort(s)
    u_w, u_r = _u(wall_layers, h_wall, h_outside), _u(roof_layers, h_roof, h_outside)
    l2d = sol.flow_w_m[1] + sol.flow_w_m[3]
    inside = nl * c
    t_w, t_r = nw * c, nr * c
    return JunctionSection(
        s_m=s[order], factor=f["surface_c"][room][order], factor_wall=1.0 - u_w / h_wall,
        factor_roof=1.0 - u_r / h_roof, l2d_w_mk=l2d, outflow_w_mk=-sol.flow_w_m[2], u_wall_w_m2k=u_w,
        u_roof_w_m2k=u_r, psi_i_w_mk=l2d - (u_w + u_r) * inside,
        psi_e_w_mk=l2d - u_w * (inside + t_r) - u_r * (inside + t_w), leg_m=inside,
    )


def junction_scene(*, inside_c: float = 20.0, outside_c: float = 0.0, wind_m_s: float = 1.0,
                   junction_y_m: float = 1.8, room_height_m: float = 2.6, width_m: float = 4.0,
                   height_m: float = 4.0, stratification_k_m: float = 0.3, name: str = "scene") -> Scene:
    """The wall/roof junction seen from inside at 45° to the wall and the ceiling (module docstring).

    The unfolded faces are ``width_m`` × ``height_m`` with the junction line ``junction_y_m`` below
    their top (ceiling above it, wall below); the room is ``room_height_m`` high (the wall's air
    stratified by ``stratification_k_m`` per metre about 1.5 m above the floor).
    """
    if not 1.0 <= junction_y_m <= height_m - 1.0:
        raise ConfigError(f"junction_y_m = {junction_y_m} must leave 1 m of ceiling and of wall (0-{height_m} m)")
    el = masonry_wall(width_m=width_m, height_m=height_m)
    cond = Conditions(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, top_height_m=room_height_m,
                      stratification_k_m=stratification_k_m)
    fc = face_conditions(el, cond)
    h_wall, h_out = float(fc["h_in"].mean()), float(fc["h_out"].mean())
    t_si_roof = inside_c - 0.1 * (inside_c - outside_c)  # for the radiative part only
    h_roof = h_convective_interior("upward") + h_radiative(0.5 * (t_si_roof + inside_c), cond.emissivity)
    wall_layers = tuple((l.material, l.thickness_m) for l in el.layers)
    sec = junction_section(wall_layers, ROOF_LAYERS, h_wall=h_wall, h_outside=h_out, h_roof=h_roof)
    c = el.cell_m
    y = (np.arange(el.ny) + 0.5) * c
    s = y - junction_y_m  # > 0 down the wall
    height = np.where(s >= 0, room_height_m - s, room_height_m)  # the ceiling's air: the top of the room
    air = inside_c + stratification_k_m * (height - 1.5)
    drive = (air - outside_c)[:, None] * np.ones((1, el.nx))
    plane = np.where(s >= 0, sec.factor_wall, sec.factor_roof)[:, None]
    h = np.where(s >= 0, h_wall, h_roof)[:, None] * np.ones((1, el.nx))
    baseline = outside_c + plane * drive
    d_t = sec.contrast(s)[:, None] * drive
    surface = baseline + d_t
    mask = (np.abs(d_t) >= _HALF_PEAK * np.abs(d_t).max()) & (np.abs(d_t) > 0)
    owner = np.where((np.abs(s) <= _CHARGE_M)[:, None] & np.ones((1, el.nx), bool), 0, -1)
    excess = -h * d_t  # heat loss positive
    junction = Defect(JUNCTION_NAME, "thermal_bridge", (),
                      f"wall/flat-roof junction, psi_i {sec.psi_i_w_mk:.3f} W/(m·K) (2-D conduction of the section)")
    # the camera on the bisector: v = y·cos 45° along the rows
    cos_v = math.cos(math.radians(JUNCTION_VIEW_DEG))
    # the sidecar declares the view a ceiling's (upward heat flow): looking up into the junction, the face above
    # the line is the ceiling and the analysis reads the wall below with a wall's coefficient
    proj = replace(el, height_m=height_m * cos_v, heat_flow="upward",
                   description="wall/flat-roof junction seen from inside at 45° to the wall and the ceiling: "
                   + el.description + "; roof: " + ", ".join(f"{1000 * t:.0f} mm {m}" for m, t in ROOF_LAYERS))
    j = np.clip(np.round((np.arange(proj.ny) + 0.5) / cos_v - 0.5).astype(int), 0, el.ny - 1)
    pos = (np.arange(proj.ny) + 0.5) / cos_v - 0.5
    j0 = np.clip(np.floor(pos).astype(int), 0, el.ny - 2)
    w = np.clip(pos - j0, 0.0, 1.0)[:, None]
    lin = lambda a: a[j0] * (1.0 - w) + a[j0 + 1] * w  # noqa: E731
    surface_p, baseline_p, excess_p, h_p = lin(surface), lin(baseline), lin(excess) / cos_v, lin(h)
    mask_p, owner_p = mask[j][None], owner[j]
    area = c * c / cos_v
    truth = (DefectTruth(JUNCTION_NAME, "thermal_bridge", junction.description, float(mask_p[0].sum() * area),
                         float(excess_p[owner_p == 0].sum() * c * c), float(excess_p[mask_p[0]].sum() * c * c),
                         float(baseline_p[mask_p[0]].mean()), float(surface_p[mask_p[0]].mean())),)
    settings = {
        "element": proj.description, "kind": "wall_roof_junction", "view": "interior", "width_m": proj.width_m,
        "height_m": proj.height_m, "cell_m": c, "grid": [proj.ny, proj.nx],
        "layers": [[l.material, l.thickness_m, l.cells] for l in el.layers],
        "roof_layers": [list(r) for r in ROOF_LAYERS],
        "inside_c": inside_c, "outside_c": outside_c, "wind_m_s": wind_m_s,
        "stratification_k_m": stratification_k_m, "emissivity": cond.emissivity,
        "outside_exposure": cond.outside_exposure, "h_view_w_m2k": h_wall,
        "junction": {"y_m": junction_y_m, "view_deg": JUNCTION_VIEW_DEG, "psi_i_w_mk": round(sec.psi_i_w_mk, 5),
                     "psi_e_w_mk": round(sec.psi_e_w_mk, 5), "u_wall_w_m2k": round(sec.u_wall_w_m2k, 5),
                     "u_roof_w_m2k": round(sec.u_roof_w_m2k, 5), "h_wall_w_m2k": round(h_wall, 3),
                     "h_roof_w_m2k": round(h_roof, 3), "l2d_w_mk": round(sec.l2d_w_mk, 5), "leg_m": sec.leg_m,
                     "section_cell_m": 0.005},
    }
    balance = {"junction_inflow_w_mk": sec.l2d_w_mk, "junction_outflow_w_mk": sec.outflow_w_mk,
               "junction_relative_imbalance": abs(sec.l2d_w_mk - sec.outflow_w_mk) / sec.l2d_w_mk}
    return Scene(name, "interior", proj, (junction,), cond, surface_p, baseline_p, np.full(surface_p.shape, inside_c),
                 h_p, mask_p, truth, balance, settings, excess_p, owner_p, None, area_scale=1.0 / cos_v)
