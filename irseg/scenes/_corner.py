"""An external wall corner seen from inside: 2-D conduction of its horizontal section and a
camera looking into it at 45° to both faces.

**Section** (:func:`corner_section`). Two legs of the same layered wall meet at a right angle;
the room is the inner quadrant, the outside wraps round the other three. Layers keep their
thickness round the corner measured from the outside face (external insulation and render wrap
it, the brick fills the corner square), which is how an externally insulated corner is built.
The legs end in adiabatic cut-off planes at ``leg_m`` from the inner corner (ISO 10211 asks for
at least 1 m, or three times the wall's thickness, from the central element [from memory]).
The 2-D heat flow ``Φ`` per metre of corner height and per kelvin (``L_2D`` of ISO 10211) gives
the linear thermal transmittance by ISO 14683's conventions [from memory]:

    ψ_i = L_2D − U·(l_A + l_B)            (internal dimensions: the legs' inside lengths)
    ψ_e = L_2D − U·(l_A + l_B + 2·d)      (external dimensions: the outside lengths)

with ``U = 1/(R_si + Σ d/λ + R_se)`` of the plane wall (ISO 6946) and the same surface
coefficients as the section. An external corner has ψ_i > 0 and ψ_e < 0 (its outside is longer
than its inside), and ``ψ_i − ψ_e = 2·U·d``. From inside, the heat a thermogram "sees" is the
flow through the inside faces; against the plane wall far from the corner it is ``ψ_i·ΔT`` per
metre of corner, so ψ_i is the truth the analysis' ψ is compared with.

**Scene** (:func:`corner_scene`). The corner's inside faces are unfolded into one plane element
(the corner line vertical at ``corner_x_m``) on which the plane wall, with any real defects, is
simulated in 3-D as every scene is (:func:`irseg.scenes._scene.simulate_scene`). The corner's
2-D field, ``T_si,2D − T_si,1D`` per kelvin of inside-outside (ambient) difference, is added to
every row: linear steady conduction superposes exactly where the corner's and a defect's
perturbations do not overlap, so a defect keeps a few decimetres from the corner. A camera on
the corner's bisector sees both faces at 45°: each face is foreshortened across the corner line
by cos 45°, the same on both sides, so the unfolded surface maps to the image by
``u = x·cos 45°`` and the corner line keeps its length (rows are not foreshortened): the
orthographic projection, with ``area_scale`` (1/cos 45°) turning projected areas back into surface
areas for the truth. A pinhole camera on the bisector ``D`` from the corner sees a point ``a``
along a face at ``u = a·sin 45°·D/(D − a·cos 45°)`` in the picture plane through the corner, and a
point at height ``y`` at ``v = y_axis + (y − y_axis)·D/z``, ``z = D − a·cos 45°`` its depth: at 2.6 m with a 45°
field the frame's sides (u = ±1.08 m) show 1.08 m of each face instead of 1.52 m, and a pixel there
covers 0.50 of the surface length across the line and 0.71 along it that it covers at the corner
(0.35 of the area; at 0.6 m from the line in the image 0.54) [C: pinhole geometry]. With
``perspective_m`` the scene is that picture plane (:func:`_perspective`), each cell sampled from the
unfolded faces where the pinhole sees it and ``Scene.area_map`` holding the surface it covers, so
the truth's areas and heat are counted over the surface while irseg's analysis, with one pixel
size per image, is not told. Two further simplifications: the inside
surface coefficient is the plane wall's up to the corner (the corner's smaller share of
convection and of radiation to the room, why ISO 13788 uses R_si 0.25 for mould checks, makes a
real corner colder still), and the faces' emissivity at 45° is taken as at normal incidence
(dielectric surfaces keep theirs to about 60° [CP]).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from irseg.errors import ConfigError
from irseg.scenes._defects import Defect, cold_air_fan, missing_patch
from irseg.scenes._elements import Element, masonry_wall
from irseg.scenes._materials import MATERIALS
from irseg.scenes._physics import Conditions
from irseg.scenes._scene import DefectTruth, Scene, face_conditions, simulate_scene
from irseg.scenes._section import Section, solve_section

__all__ = ["CornerSection", "corner_section", "corner_scene", "picture_u_m", "CORNER_VIEW_DEG", "CORNER_NAME"]

#: The camera on the corner's bisector sees both faces at this angle to their normal.
CORNER_VIEW_DEG = 45.0
CORNER_NAME = "external_corner"
_HALF_PEAK = 0.5  # the corner's truth region: where its contrast holds half of its peak
_CHARGE_M = 1.0  # cells this close to the corner line (and no defect's) carry its excess


@dataclass(frozen=True)
class CornerSection:
    """The solved section per kelvin of inside-outside ambient difference.

    Attributes
    ----------
    s_m : (n,) ndarray
        Position of each inside surface face along the unfolded inside faces, m: 0 at the
        inner corner, > 0 along leg A, < 0 along leg B.
    factor : (n,) ndarray
        Inside surface temperature factor ``(T_si − T_e)/(T_i − T_e)`` there.
    factor_1d : float
        The plane wall's, ``1 − U/h_i`` (ISO 6946 series resistances).
    l2d_w_mk, u_w_m2k, psi_i_w_mk, psi_e_w_mk : float
        ``Φ/ΔT`` per metre of corner, the plane wall's U-value and ψ by internal and external
        dimensions.
    outflow_w_mk : float
        Heat leaving through the outside faces per metre and kelvin (steady: equals the inflow).
    thickness_m, leg_m : float
    """

    s_m: np.ndarray
    factor: np.ndarray
    factor_1d: float
    l2d_w_mk: float
    outflow_w_mk: float
    u_w_m2k: float
    psi_i_w_mk: float
    psi_e_w_mk: float
    thickness_m: float
    leg_m: float

    def contrast(self, s_m: np.ndarray) -> np.ndarray:
        """``factor − factor_1d`` at positions ``s_m`` (0 beyond the legs' ends)."""
        c = self.factor - self.factor_1d
        return np.interp(s_m, self.s_m, c, left=0.0, right=0.0)


def corner_section(layers: tuple[tuple[str, float], ...], *, h_inside: float, h_outside: float,
                   leg_m: float = 2.0, cell_m: float = 0.005) -> CornerSection:
    """Solve an external corner of a layered wall (``layers`` inside first: material, thickness m).

    Raises
    ------
    ConfigError
        A layer that is not a whole number of cells, or legs shorter than 1 m.
    """
    c = float(cell_m)
    cells = [t / c for _, t in layers]
    if any(abs(n - round(n)) > 1e-6 or round(n) < 1 for n in cells):
        raise ConfigError(f"corner section: every layer must be a whole number of {c * 1000:g} mm cells; "
                          f"got {[t for _, t in layers]} m")
    if leg_m < 1.0:
        raise ConfigError(f"corner section: legs of {leg_m} m are too short; ISO 10211 cut-off planes lie at "
                          "least 1 m from the corner")
    lam = [MATERIALS[m].conductivity_w_mk for m, _ in layers]
    n_layer = [int(round(n)) for n in cells]
    nt = sum(n_layer)
    t = nt * c
    nl = int(round(leg_m / c))
    n = 1 + nt + nl  # one column/row of outside air, the wall, the leg beyond the inner corner
    # from the outside face inward: the layers reversed
    by_depth = np.concatenate([np.full(k, v) for k, v in zip(n_layer[::-1], lam[::-1])])
    idx = np.arange(n) - 1  # cells from the outside face (−1: the outside air ring)
    depth = np.minimum(idx[:, None], idx[None, :])  # rows = y, cols = x
    zone = np.zeros((n, n), int)
    zone[depth < 0] = 2
    zone[(idx[:, None] >= nt) & (idx[None, :] >= nt)] = 1  # the room
    k = np.full((n, n), np.nan)
    solid = zone == 0
    k[solid] = by_depth[np.clip(depth[solid], 0, nt - 1)]
    sol = solve_section(Section(k, zone, {1: (h_inside, 1.0), 2: (h_outside, 0.0)}, c))
    f = sol.faces
    room = f["zone"] == 1
    # leg A: faces below the room (solid row nt, air row nt + 1 ... the room starts at index nt + 1 in the grid)
    pos_x = (f["col"][room] - 1 - nt + 0.5) * c  # along x from the inner corner
    pos_y = (f["row"][room] - 1 - nt + 0.5) * c
    on_a = f["air_row"][room] > f["row"][room]  # the room lies above the face: leg A (s = x)
    s = np.where(on_a, pos_x, -pos_y)
    order = np.argsort(s)
    r_total = 1.0 / h_inside + sum(tk / lk for (_, tk), lk in zip(layers, lam)) + 1.0 / h_outside
    u = 1.0 / r_total
    l2d = sol.flow_w_m[1]
    inside_len = 2.0 * nl * c
    return CornerSection(
        s_m=s[order], factor=f["surface_c"][room][order], factor_1d=1.0 - u / h_inside, l2d_w_mk=l2d,
        outflow_w_mk=-sol.flow_w_m[2], u_w_m2k=u, psi_i_w_mk=l2d - u * inside_len,
        psi_e_w_mk=l2d - u * (inside_len + 2.0 * t), thickness_m=t, leg_m=nl * c,
    )


def _plane_1d(element: Element, fc: dict) -> np.ndarray:
    """Inside surface temperature of the plane layered wall (series resistances), (ny, nx)."""
    r_layers = sum(l.thickness_m / MATERIALS[l.material].conductivity_w_mk for l in element.layers)
    r_total = 1.0 / fc["h_in"] + r_layers + 1.0 / fc["h_out"]
    return fc["amb_in"] - (fc["amb_in"] - fc["amb_out"]) / (fc["h_in"] * r_total)


def _project(a: np.ndarray, x_src: np.ndarray, cell: float, *, nearest: bool) -> np.ndarray:
    """Columns of a cell-centred (…, ny, nx) array sampled at surface positions ``x_src`` (m)."""
    pos = x_src / cell - 0.5
    if nearest:
        j = np.clip(np.round(pos).astype(int), 0, a.shape[-1] - 1)
        return a[..., j]
    j0 = np.clip(np.floor(pos).astype(int), 0, a.shape[-1] - 2)
    w = np.clip(pos - j0, 0.0, 1.0)
    return a[..., j0] * (1.0 - w) + a[..., j0 + 1] * w


def picture_u_m(a_m: np.ndarray | float, distance_m: float) -> np.ndarray | float:
    """Where a point ``a_m`` along a face appears in the picture plane through the corner line, m
    from the line, for a pinhole on the bisector ``distance_m`` from the corner [C: pinhole geometry]:
    ``u = a·sin θ·D/(D − a·cos θ)``."""
    t = math.radians(CORNER_VIEW_DEG)
    return a_m * math.sin(t) * distance_m / (distance_m - a_m * math.cos(t))


def _perspective(el: Element, corner_x_m: float, distance_m: float, view_y_m: float):
    """The picture plane of a pinhole on the bisector ``distance_m`` from the corner, its optical axis at
    height ``view_y_m``: ``(element, sample rows, sample columns, area map)``.

    Each cell of the picture plane (the corner line at ``u = 0``) sees the face point ``a`` along its
    face with ``a = |u|·D/(D·sin θ + |u|·cos θ)`` at depth ``z = D − a·cos θ`` and height
    ``y = y_axis + (v − y_axis)·z/D``; the surface it covers per m² of the picture plane is
    ``(da/du)·(z/D)``, ``da/du = D²·sin θ/(D·sin θ + |u|·cos θ)²`` [C: pinhole geometry].
    """
    t = math.radians(CORNER_VIEW_DEG)
    sin_t, cos_t = math.sin(t), math.cos(t)
    far = max(corner_x_m, el.width_m - corner_x_m)
    if far * cos_t >= 0.9 * distance_m:
        raise ConfigError(f"a corner seen from {distance_m} m: the faces ({far} m) reach behind the camera; "
                          "use shorter faces or a longer distance")
    u_l, u_r = picture_u_m(corner_x_m, distance_m), picture_u_m(el.width_m - corner_x_m, distance_m)
    proj = replace(el, width_m=float(u_l + u_r),
                   description=el.description + f"; external corner seen at {CORNER_VIEW_DEG:.0f}° to both faces "
                   f"by a pinhole {distance_m} m from it")
    c = el.cell_m
    u = (np.arange(proj.nx) + 0.5) * c - u_l
    a = np.abs(u) * distance_m / (distance_m * sin_t + np.abs(u) * cos_t)
    z = distance_m - a * cos_t
    x_src = np.clip(corner_x_m + np.sign(u) * a, 0.0, el.width_m)
    v = (np.arange(proj.ny) + 0.5) * c
    y_src = np.clip(view_y_m + (v[:, None] - view_y_m) * (z / distance_m)[None, :], 0.0, el.height_m)
    dadu = distance_m ** 2 * sin_t / (distance_m * sin_t + np.abs(u) * cos_t) ** 2
    area = np.broadcast_to((dadu * z / distance_m)[None, :], (proj.ny, proj.nx)).copy()
    rows = y_src / c - 0.5
    cols = np.broadcast_to((x_src / c - 0.5)[None, :], rows.shape)
    return proj, rows, cols, area


def _sample(a: np.ndarray, rows: np.ndarray, cols: np.ndarray, *, nearest: bool) -> np.ndarray:
    """A cell-centred (…, ny, nx) array at fractional (rows, cols) of its grid."""
    from scipy import ndimage

    if a.ndim == 3:
        return np.stack([_sample(x, rows, cols, nearest=nearest) for x in a]) if a.shape[0] else \
            np.zeros((0,) + rows.shape, a.dtype)
    out = ndimage.map_coordinates(np.asarray(a, float), [rows, cols], order=0 if nearest else 1, mode="nearest")
    return out.astype(a.dtype) if nearest else out


def corner_scene(*, inside_c: float = 20.0, outside_c: float = 0.0, wind_m_s: float = 1.0,
                 corner_x_m: float = 2.0, patch=None, fan=None, stratification_k_m: float = 0.5,
                 width_m: float = 4.0, perspective_m: float | None = None, view_y_m: float = 1.5,
                 name: str = "scene") -> Scene:
    """An external corner of the brick + EPS wall seen from inside at 45° to both faces.

    ``patch`` (x0, x1, y0, y1) adds missing insulation boards and ``fan`` (x, y, width, drop_k) cold
    air falling from a gap on the unfolded wall (x in m along the unfolded inside faces, the corner at
    ``corner_x_m``; y down from the element's top). With ``perspective_m`` the faces are seen by a
    pinhole on the bisector that far from the corner, its optical axis at height ``view_y_m``
    (:func:`_perspective`: the element is the picture plane through the corner line, the corner at
    ``picture_u_m(corner_x_m, perspective_m)`` from its left edge, the surface per cell in
    ``Scene.area_map``); without it the projection is orthographic.
    """
    if not 1.0 <= corner_x_m <= width_m - 1.0:
        raise ConfigError(f"corner_x_m = {corner_x_m} must leave 1 m of wall on each side of the corner "
                          f"(0-{width_m} m)")
    el = masonry_wall(width_m=width_m)
    cond = Conditions(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, top_height_m=3.0,
                      stratification_k_m=stratification_k_m)
    fc = face_conditions(el, cond)
    defects: tuple[Defect, ...] = ()
    if patch is not None:
        defects += (missing_patch(el, x0_m=patch[0], x1_m=patch[1], y0_m=patch[2], y1_m=patch[3]),)
    if fan is not None:
        defects += (cold_air_fan(el, x_m=fan[0], y_m=fan[1], width_m=fan[2], drop_k=fan[3]),)
    if defects:
        plane = simulate_scene(el, defects, cond, view="interior", name=name)
        surface, baseline, masks = plane.surface_c, plane.baseline_c, plane.defect_masks
        excess, owner = plane.excess_w_m2, plane.owner
        balance = dict(plane.balance)
    else:
        surface = baseline = _plane_1d(el, fc)
        masks = np.zeros((0,) + surface.shape, bool)
        excess, owner = np.zeros(surface.shape), np.full(surface.shape, -1)
        balance = {}
    h_in, h_out = float(fc["h_in"].mean()), float(fc["h_out"].mean())
    sec = corner_section(tuple((l.material, l.thickness_m) for l in el.layers), h_inside=h_in, h_outside=h_out)
    c = el.cell_m
    x = (np.arange(el.nx) + 0.5) * c
    drive = fc["amb_in"][:, :1] - fc["amb_out"][:, :1]  # each row's inside-outside ambient difference
    d_t = sec.contrast(x - corner_x_m)[None, :] * drive  # the corner's field, K (< 0)
    surface = surface + d_t
    corner_mask = np.broadcast_to(np.abs(d_t) >= _HALF_PEAK * np.abs(d_t).max(axis=1, keepdims=True),
                                  d_t.shape) & (np.abs(d_t) > 0)
    k = masks.shape[0]
    owner = np.where((owner < 0) & (np.abs(x - corner_x_m) <= _CHARGE_M)[None, :], k, owner)
    excess = excess - fc["h_in"] * d_t  # heat loss positive
    masks = np.concatenate([masks, corner_mask[None]])
    corner = Defect(CORNER_NAME, "thermal_bridge", (),
                    f"external wall corner, psi_i {sec.psi_i_w_mk:.3f} W/(m·K) (2-D conduction of the section)")
    defects = defects + (corner,)
    cos_v = math.cos(math.radians(CORNER_VIEW_DEG))
    if perspective_m is None:
        # the camera on the bisector, orthographic: u = x·cos 45°
        proj = replace(el, width_m=width_m * cos_v,
                       description=el.description + f"; external corner seen at {CORNER_VIEW_DEG:.0f}° to both faces")
        x_src = (np.arange(proj.nx) + 0.5) * c / cos_v
        surface_p = _project(surface, x_src, c, nearest=False)
        baseline_p = _project(baseline, x_src, c, nearest=False)
        masks_p = _project(masks, x_src, c, nearest=True)
        owner_p = _project(owner, x_src, c, nearest=True)
        h_p = _project(fc["h_in"], x_src, c, nearest=False)
        area_map = None
        excess_p = _project(excess, x_src, c, nearest=False) / cos_v  # per projected m²
    else:
        proj, rows, cols, area_map = _perspective(el, corner_x_m, float(perspective_m), float(view_y_m))
        surface_p, baseline_p = _sample(surface, rows, cols, nearest=False), _sample(baseline, rows, cols, nearest=False)
        masks_p, owner_p = _sample(masks, rows, cols, nearest=True), _sample(owner, rows, cols, nearest=True)
        h_p = _sample(fc["h_in"], rows, cols, nearest=False)
        excess_p = _sample(excess, rows, cols, nearest=False) * area_map  # per m² of the picture plane
    cell_area = np.full(surface_p.shape, c * c / cos_v) if area_map is None else area_map * c * c
    truth = tuple(DefectTruth(d.name, d.cause, d.description, float(cell_area[masks_p[i]].sum()),
                              float(excess_p[owner_p == i].sum() * c * c),
                              float(excess_p[masks_p[i]].sum() * c * c), float(baseline_p[masks_p[i]].mean()),
                              float(surface_p[masks_p[i]].mean())) for i, d in enumerate(defects))
    balance.update(corner_inflow_w_mk=sec.l2d_w_mk, corner_outflow_w_mk=sec.outflow_w_mk,
                   corner_relative_imbalance=abs(sec.l2d_w_mk - sec.outflow_w_mk) / sec.l2d_w_mk)
    ny = proj.ny
    settings = {
        "element": proj.description, "kind": "external_corner", "view": "interior", "width_m": proj.width_m,
        "height_m": proj.height_m, "cell_m": c, "grid": [ny, proj.nx],
        "layers": [[l.material, l.thickness_m, l.cells] for l in el.layers],
        "inside_c": inside_c, "outside_c": outside_c, "wind_m_s": wind_m_s,
        "stratification_k_m": stratification_k_m, "emissivity": cond.emissivity,
        "outside_exposure": cond.outside_exposure, "h_view_w_m2k": h_in,
        "projection": "orthographic" if perspective_m is None else {"pinhole_distance_m": perspective_m,
                                                                    "axis_height_m": view_y_m},
        "corner": {"x_m": corner_x_m, "view_deg": CORNER_VIEW_DEG, "psi_i_w_mk": round(sec.psi_i_w_mk, 5),
                   "psi_e_w_mk": round(sec.psi_e_w_mk, 5), "u_w_m2k": round(sec.u_w_m2k, 5),
                   "l2d_w_mk": round(sec.l2d_w_mk, 5), "leg_m": sec.leg_m, "section_cell_m": 0.005},
    }
    return Scene(name, "interior", proj, defects, cond, surface_p, baseline_p,
                 np.full(surface_p.shape, inside_c), h_p, masks_p, truth,
                 balance, settings, excess_p, owner_p, None, area_scale=1.0 / cos_v, area_map=area_map)
