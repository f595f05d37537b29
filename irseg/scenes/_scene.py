"""Simulate an element with and without its defects and derive the truth.

The viewed face is the inside face for ``view="interior"`` and the outside face for
``"exterior"`` and ``"roof"``. Truth per defect (on the surface grid):

- defect mask (``Scene.defect_masks``): the cells whose build-up the defect changes;
- ``excess_w``: extra heat flow through the viewed face, the difference of the
  surface heat flow with and without the defects, summed over the defect mask and a
  rim (cells closer to this defect than to any other and within ``rim_m``);
- ``excess_footprint_w``: the same over the defect mask only (the name is kept by
  ``truth.json``);
- ``reference_c``: mean no-defect surface temperature over the defect mask.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage

from irseg.errors import ConfigError
from irseg.scenes._conduction import build_operator, solve_steady, solve_transient, surface_fields
from irseg.scenes._defects import Defect
from irseg.scenes._elements import Element
from irseg.scenes._materials import MATERIALS
from irseg.scenes._physics import (
    Conditions,
    NightSchedule,
    evaporation_w_m2,
    h_convective_exterior,
    h_convective_interior,
    h_radiative,
)
from irseg.scenes._raster import defect_mask, rasterise

__all__ = ["DefectTruth", "Scene", "simulate_scene", "face_conditions", "truth_in_window"]

_VIEWS = ("interior", "exterior", "roof")


@dataclass(frozen=True)
class DefectTruth:
    """Truth of one defect on the surface grid."""

    name: str
    cause: str
    description: str
    area_m2: float
    excess_w: float
    excess_footprint_w: float
    reference_c: float
    mean_c: float


@dataclass(frozen=True)
class Scene:
    """A simulated element seen from one side: surface fields plus truth.

    Attributes
    ----------
    surface_c, baseline_c : (ny, nx) ndarray
        Viewed-face temperature with and without the defects, °C.
    radiant_c : (ny, nx) ndarray
        Radiant temperature of the viewed side's surroundings (what the face reflects), °C.
    h_w_m2k : (ny, nx) ndarray
        Combined surface coefficient of the viewed face, W/m²K.
    defect_masks : (k, ny, nx) bool ndarray
        Each defect's region on the surface grid.
    truth : tuple of DefectTruth
    balance : dict
        Heat flows in/out of the defective element (W) and the relative imbalance.
    settings : dict
        Plain description of the simulation (for documents and truth files).
    excess_w_m2 : (ny, nx) ndarray
        Extra heat flux density through the viewed face caused by the defects, W/m².
    owner : (ny, nx) int ndarray
        Index of the defect each cell's excess is charged to (−1: none); see ``rim_m``.
    emissivity_map : (ny, nx) ndarray or None
        Emissivity of the viewed face per cell where a defect sets one (glass); None: the
        conditions' emissivity everywhere.
    area_scale : float
        Surface area per m² of the grid: 1 for a plane element; ``1/cos θ`` where the grid is the
        projection of faces seen at θ across one direction (:mod:`irseg.scenes._corner`).
    area_map : (ny, nx) ndarray or None
        Surface area per m² of the grid, cell by cell, where it varies (a corner seen in perspective,
        :mod:`irseg.scenes._corner`); None: ``area_scale`` everywhere.
    """

    name: str
    view: str
    element: Element
    defects: tuple[Defect, ...]
    conditions: Conditions
    surface_c: np.ndarray
    baseline_c: np.ndarray
    radiant_c: np.ndarray
    h_w_m2k: np.ndarray
    defect_masks: np.ndarray
    truth: tuple[DefectTruth, ...]
    balance: dict
    settings: dict = field(default_factory=dict)
    excess_w_m2: np.ndarray | None = None
    owner: np.ndarray | None = None
    emissivity_map: np.ndarray | None = None
    area_scale: float = 1.0
    area_map: np.ndarray | None = None

    @property
    def cell_m(self) -> float:
        return self.element.cell_m


def _r_total_1d(element: Element) -> float:
    return sum(l.thickness_m / MATERIALS[l.material].conductivity_w_mk for l in element.layers)


def face_conditions(element: Element, cond: Conditions, *, outside_c: float | None = None,
                    sky_c: float | None = None, solar_w_m2: float = 0.0) -> dict:
    """Per-cell surface coefficients and ambient temperatures of both faces (``q = h·(T_amb − T_s)``).

    Returns a dict with ``h_in, amb_in, rad_in, h_out, amb_out, rad_out`` (ny, nx) arrays.
    The ambient of a face is the h-weighted mean of air and radiant temperature
    (plus the sol-air shift ``solar/h`` outside).
    """
    ny, nx = element.ny, element.nx
    te = cond.outside_c if outside_c is None else outside_c
    tsky = cond.sky_temperature_c() if sky_c is None else sky_c
    yc = (np.arange(ny) + 0.5) * element.cell_m
    if element.heat_flow == "horizontal":
        height = cond.top_height_m - yc
    else:
        height = np.full(ny, cond.top_height_m)
    t_air = cond.inside_c + cond.stratification_k_m * (height - 1.5) + cond.stratification_k_m2 * (height - 1.5) ** 2
    # 1-D estimate of the surface temperatures, for the mean temperature in h_r.
    hci = h_convective_interior(element.heat_flow)
    r_si = 1.0 / (hci + h_radiative(cond.inside_c, cond.emissivity))
    r_t = r_si + _r_total_1d(element) + 0.04
    t_si = cond.inside_c - r_si / r_t * (cond.inside_c - te)
    h_in_v = hci + h_radiative(0.5 * (t_si + cond.inside_c), cond.emissivity)
    amb_in_row = (hci * t_air + (h_in_v - hci) * cond.inside_c) / h_in_v
    rad_in = np.full((ny, nx), cond.inside_c)
    if cond.outside_exposure == "ventilated":
        h_out = np.full((ny, nx), 1.0 / 0.13)
        amb_out = np.full((ny, nx), te)
        rad_out = amb_out.copy()
    elif cond.outside_exposure == "loft":
        h_out = np.full((ny, nx), 1.0 / 0.10)
        amb_out = np.full((ny, nx), te)
        rad_out = amb_out.copy()
    elif cond.outside_exposure == "open":
        frac = cond.sky_view_top + (cond.sky_view_bottom - cond.sky_view_top) * yc / element.height_m
        rad_row = frac * tsky + (1.0 - frac) * te
        t_se = te + 0.04 / r_t * (cond.inside_c - te)
        hce = h_convective_exterior(cond.wind_m_s)
        hre = h_radiative(0.5 * (t_se + float(rad_row.mean())), cond.emissivity)
        h_out = np.full((ny, nx), hce + hre)
        amb_row = (hce * te + hre * rad_row + solar_w_m2) / (hce + hre)
        amb_out = np.broadcast_to(amb_row[:, None], (ny, nx)).copy()
        rad_out = np.broadcast_to(rad_row[:, None], (ny, nx)).copy()
    else:
        raise ConfigError(f"outside_exposure={cond.outside_exposure!r}; use open, ventilated or loft")
    return {
        "h_in": np.full((ny, nx), h_in_v),
        "amb_in": np.broadcast_to(amb_in_row[:, None], (ny, nx)).copy(),
        "rad_in": rad_in,
        "h_out": h_out,
        "amb_out": amb_out,
        "rad_out": rad_out,
    }


def _rhs(g_in, g_out, fc, shape) -> np.ndarray:
    rhs = np.zeros(shape)
    rhs[0] += g_in * fc["amb_in"]
    rhs[-1] += g_out * fc["amb_out"]
    return rhs


def _steady(element: Element, k: np.ndarray, fc: dict) -> np.ndarray:
    op, g_in, g_out = build_operator(k, dx_m=element.cell_m, dy_m=element.cell_m, dz_m=element.dz_m(),
                                     h_inside=fc["h_in"], h_outside=fc["h_out"])
    t, _ = solve_steady(op, _rhs(g_in, g_out, fc, op.shape))
    return t


def _night(element: Element, k: np.ndarray, c: np.ndarray, cond: Conditions, sched: NightSchedule):
    """Implicit Euler through the day; returns the final temperatures and face conditions."""
    def fc_at(hour: float) -> dict:
        te = sched.air_c(hour)
        return face_conditions(element, cond, outside_c=te, sky_c=te - sched.sky_depression_k,
                               solar_w_m2=sched.solar_w_m2(hour))

    dz = element.dz_m()
    fc0 = fc_at(sched.start_h)
    op, g_in, g_out = build_operator(k, dx_m=element.cell_m, dy_m=element.cell_m, dz_m=dz,
                                     h_inside=fc0["h_in"], h_outside=fc0["h_out"])
    t0, _ = solve_steady(op, _rhs(g_in, g_out, fc0, op.shape))
    cap = c * (element.cell_m ** 2) * dz[:, None, None]
    n_steps = int(round((sched.end_h - sched.start_h) * 3600.0 / sched.dt_s))
    t = t0
    for _, t in solve_transient(
        op, cap, lambda s: _rhs(g_in, g_out, fc_at(sched.start_h + s / 3600.0), op.shape),
        t0=t0, dt_s=sched.dt_s, n_steps=n_steps,
    ):
        pass
    return t, fc_at(sched.end_h)


def _surface_effects(element: Element, k: np.ndarray, fc: dict, defects: tuple[Defect, ...], cond: Conditions,
                     t: np.ndarray) -> tuple[np.ndarray, dict]:
    """Steady solution with the defects' changes of the inside face: colder air next to it (its convective
    share of the ambient) and the latent heat of evaporation from a damp face (a sink, at the surface
    temperature it reaches: two fixed-point passes from the dry solution).
    """
    hci = h_convective_interior(element.heat_flow)
    h_in = fc["h_in"]
    amb = fc["amb_in"].copy()
    for d in defects:
        if d.air_change_k is not None:
            amb = amb + hci * d.air_change_k / h_in
    wet = np.zeros_like(amb)
    for d in defects:
        if d.wet_surface is not None:
            wet = np.maximum(wet, d.wet_surface)
    out = dict(fc, amb_in=amb)
    t = _steady(element, k, out) if not wet.any() else t
    for _ in range(2 if wet.any() else 0):
        ts, _ = surface_fields(t, conductivity=k, dz_m=element.dz_m(), h=h_in, ambient=out["amb_in"],
                               face="inside")
        sink = evaporation_w_m2(surface_c=ts, air_c=cond.inside_c, relative_humidity=cond.relative_humidity,
                                h_convective_w_m2k=hci, wet_fraction=wet)
        out = dict(fc, amb_in=amb - sink / h_in)
        t = _steady(element, k, out)
    return t, out


def _attribute(masks: np.ndarray, rim_m: float, cell_m: float) -> np.ndarray:
    """Index (0..k-1) of the defect each cell's excess is charged to, −1 for none."""
    k = masks.shape[0]
    owner = np.full(masks.shape[1:], -1, int)
    if k == 0:
        return owner
    dist = np.empty(masks.shape)
    for i in range(k):
        dist[i] = ndimage.distance_transform_edt(~masks[i]) * cell_m
    best = np.argmin(dist, axis=0)
    near = np.take_along_axis(dist, best[None], 0)[0] <= rim_m
    owner[near] = best[near]
    return owner


def simulate_scene(
    element: Element,
    defects: tuple[Defect, ...],
    conditions: Conditions,
    *,
    view: str,
    name: str = "scene",
    night: NightSchedule | None = None,
    rim_m: float = 0.3,
) -> Scene:
    """Simulate ``element`` with and without ``defects`` and collect the truth.

    Parameters
    ----------
    element : Element
    defects : tuple of Defect
    conditions : Conditions
        Survey-time conditions (for ``night`` runs, inside temperature, wind and
        exposure; the outside air follows the schedule).
    view : {"interior", "exterior", "roof"}
    night : NightSchedule, optional
        Run the transient day-to-night case instead of a steady state.
    rim_m : float
        Rim around each defect mask to which lateral excess flow is charged, m.

    Returns
    -------
    Scene

    Raises
    ------
    ConfigError
        Unknown view or exposure.
    """
    if view not in _VIEWS:
        raise ConfigError(f"view={view!r} is not one of {_VIEWS}")
    if not defects:
        raise ConfigError("a scene needs at least one defect (the truth compares with and without)")
    face = "inside" if view == "interior" else "outside"
    key = "in" if face == "inside" else "out"
    dz = element.dz_m()
    results = []
    effects = any(d.wet_surface is not None or d.air_change_k is not None for d in defects)
    if effects and (view != "interior" or night is not None):
        raise ConfigError("damp surfaces and cold-air fans act on the inside face of a steady interior scene")
    # construction that is not a defect (windows, radiators: cause "unclassified") stays in the run
    # without the defects, so each defect's truth is its own change against the same construction
    built = tuple(d for d in defects if d.cause == "unclassified")
    for ds in (defects, built):
        k, c = rasterise(element, ds)
        if night is None:
            fc = face_conditions(element, conditions)
            t = _steady(element, k, fc)
            if effects and any(d.wet_surface is not None or d.air_change_k is not None for d in ds):
                air = fc
                t, fc = _surface_effects(element, k, fc, ds, conditions, t)
        else:
            t, fc = _night(element, k, c, conditions, night)
        ts, q = surface_fields(t, conductivity=k, dz_m=dz, h=fc[f"h_{key}"], ambient=fc[f"amb_{key}"], face=face)
        if effects and any(d.wet_surface is not None or d.air_change_k is not None for d in ds):
            # the heat the room gives the face (convection and radiation against the real air): what
            # a camera sees as h·ΔT; it includes the latent heat of the evaporation and the cold air
            q = fc["h_in"] * (ts - air["amb_in"])
        _, q_in = surface_fields(t, conductivity=k, dz_m=dz, h=fc["h_in"], ambient=fc["amb_in"], face="inside")
        _, q_out = surface_fields(t, conductivity=k, dz_m=dz, h=fc["h_out"], ambient=fc["amb_out"], face="outside")
        results.append((ts, q, q_in, q_out, fc))
    (ts_d, q_d, qin_d, qout_d, fc), (ts_b, q_b, _, _, _) = results
    for d in defects:  # objects in front of the face (radiators, pipes) hide it from the camera
        if d.face_c is not None:
            ts_d = np.where(np.isfinite(d.face_c), d.face_c, ts_d)
    area = element.cell_m ** 2
    # heat loss counted positive: out of the room (inside face) or out of the element (outside face)
    dq = (q_b - q_d) if face == "inside" else (q_d - q_b)
    masks = np.stack([defect_mask(element, d) for d in defects])
    owner = _attribute(masks, rim_m, element.cell_m)
    truth = []
    for i, d in enumerate(defects):
        fp = masks[i]
        truth.append(DefectTruth(
            name=d.name, cause=d.cause, description=d.description,
            area_m2=float(fp.sum() * area),
            excess_w=float(dq[owner == i].sum() * area),
            excess_footprint_w=float(dq[fp].sum() * area),
            reference_c=float(ts_b[fp].mean()),
            mean_c=float(ts_d[fp].mean()),
        ))
    q_into = float(-qin_d.sum() * area)
    q_leave = float(qout_d.sum() * area)
    # steady state: what enters one face leaves the other; a transient run also stores heat
    balance = {"inside_face_w": q_into, "outside_face_w": q_leave,
               "relative_imbalance": None if night is not None
               else abs(q_into - q_leave) / max(abs(q_into), 1e-12)}
    settings = {
        "element": element.description, "kind": element.kind, "view": view,
        "width_m": element.width_m, "height_m": element.height_m, "cell_m": element.cell_m,
        "grid": list(element.shape),
        "layers": [[l.material, l.thickness_m, l.cells] for l in element.layers],
        "inside_c": conditions.inside_c,
        "outside_c": conditions.outside_c if night is None else night.air_c(night.end_h),
        "wind_m_s": conditions.wind_m_s, "stratification_k_m": conditions.stratification_k_m,
        "emissivity": conditions.emissivity, "outside_exposure": conditions.outside_exposure,
        "h_view_w_m2k": float(fc[f"h_{key}"].mean()), "rim_m": rim_m,
        "transient": None if night is None else {
            "start_h": night.start_h, "end_h": night.end_h, "dt_s": night.dt_s,
            "solar_peak_w_m2": night.solar_peak_w_m2, "absorptance": night.absorptance,
            "air_mean_c": night.air_mean_c, "air_amplitude_k": night.air_amplitude_k,
            "sky_depression_k": night.sky_depression_k},
    }
    if conditions.stratification_k_m2:  # written only when used, so older truth files stay the same
        settings["stratification_k_m2"] = conditions.stratification_k_m2
    if effects:
        settings["relative_humidity"] = conditions.relative_humidity
    emissivity_map = None
    for d in defects:  # glass: its own emissivity on the viewed face
        if d.emissivity is not None:
            base = np.full(ts_d.shape, conditions.emissivity) if emissivity_map is None else emissivity_map
            emissivity_map = np.where(np.isfinite(d.emissivity), d.emissivity, base)
    return Scene(name, view, element, tuple(defects), conditions, ts_d, ts_b, fc[f"rad_{key}"],
                 fc[f"h_{key}"], masks, tuple(truth), balance, settings, dq, owner, emissivity_map)


def truth_in_window(scene: Scene, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float) -> tuple[DefectTruth, ...]:
    """The truth restricted to the surface cells whose centres lie in a window (a camera view).

    Defects with no cell of their mask in the window are left out.
    """
    el = scene.element
    c = el.cell_m
    xc = (np.arange(el.nx) + 0.5) * c
    yc = (np.arange(el.ny) + 0.5) * c
    win = ((yc >= y0_m) & (yc < y1_m))[:, None] & ((xc >= x0_m) & (xc < x1_m))[None, :]
    out = []
    for i, t in enumerate(scene.truth):
        fp = scene.defect_masks[i] & win
        if not fp.any():
            continue
        own = (scene.owner == i) & win
        out.append(DefectTruth(
            t.name, t.cause, t.description,
            float((fp.sum() * scene.area_scale if scene.area_map is None else scene.area_map[fp].sum()) * c * c),
            float(scene.excess_w_m2[own].sum() * c * c), float(scene.excess_w_m2[fp].sum() * c * c),
            float(scene.baseline_c[fp].mean()), float(scene.surface_c[fp].mean()),
        ))
    return tuple(out)
