"""Scene presets: the element, defects and conditions of each kind of scene ``make_preset`` simulates.

Each builder returns ``(element, defects, conditions, view, night schedule or None)``; the
keyword options are the ones ``make_preset`` accepts for that kind.
"""

from __future__ import annotations

import inspect

from irseg.errors import ConfigError
from irseg.scenes._construction import construction_items
from irseg.scenes._corner import corner_scene
from irseg.scenes._junction import junction_scene
from irseg.scenes._defects import (
    Defect,
    cold_air_fan,
    missing_bay,
    missing_patch,
    partial_fill,
    partial_void,
    rising_damp,
    settled_fill,
    settled_insulation,
    slab_edge,
    tapered_wet_patch,
    wet_patch,
)
from irseg.scenes._defects import lintel as lintel_defect  # the presets' option is called "lintel"
from irseg.scenes._elements import Block, flat_roof, masonry_wall, solid_wall, timber_ceiling, timber_frame_wall
from irseg.scenes._materials import air_layer
from irseg.scenes._physics import Conditions, NightSchedule
from irseg.scenes._scene import Scene, simulate_scene

__all__ = ["PRESETS", "make_preset"]


def _timber_wall(*, spacing_m=0.6, inside_c=20.0, outside_c=0.0, wind_m_s=1.0, defects=("bay:1",),
                 lintel=None, stratification_k_m=1.0, stratification_k_m2=0.0, construction=()):
    el = timber_frame_wall(stud_spacing_m=spacing_m, first_stud_m=0.3 if spacing_m == 0.6 else 0.2)
    ds = []
    for spec in defects:
        kind, *args = spec.split(":")
        if kind == "bay":
            ds.append(missing_bay(el, int(args[0]), y0_m=float(args[1]) if len(args) > 1 else 0.0))
        elif kind == "settled":
            ds.append(settled_insulation(el, int(args[0]), void_m=float(args[1])))
        elif kind == "void":
            x0, x1, y0, y1, depth = (float(a) for a in args)
            ds.append(partial_void(el, x0_m=x0, x1_m=x1, y0_m=y0, y1_m=y1, depth_m=depth))
        elif kind == "soft":
            bay, void, soft, *wave = args
            ds.append(settled_fill(el, int(bay), void_m=float(void), soft_m=float(soft),
                                   wave_m=float(wave[0]) if wave else 0.0))
        elif kind == "fill":
            x0, x1, y0, y1, remaining = (float(a) for a in args)
            ds.append(partial_fill(el, x0_m=x0, x1_m=x1, y0_m=y0, y1_m=y1, remaining=remaining))
        elif kind == "fan":
            x, y, width, drop = (float(a) for a in args)
            ds.append(cold_air_fan(el, x_m=x, y_m=y, width_m=width, drop_k=drop))
        else:
            raise ConfigError(f"unknown timber-wall defect {spec!r}; use bay:N, settled:N:M, "
                              "void:x0:x1:y0:y1:d, soft:N:void:soft[:wave], fill:x0:x1:y0:y1:remaining or "
                              "fan:x:y:width:drop")
    if lintel is not None:
        ds.append(lintel_defect(el, x0_m=lintel[0], x1_m=lintel[1], y0_m=lintel[2], height_m=lintel[3]))
    ds.extend(construction_items(el, tuple(construction)))
    cond = Conditions(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, outside_exposure="ventilated",
                      top_height_m=2.1, stratification_k_m=stratification_k_m, stratification_k_m2=stratification_k_m2)
    return el, tuple(ds), cond, "interior", None


def _ceiling(*, inside_c=20.0, outside_c=0.0, wind_m_s=1.0, patch=(0.9, 1.5, 0.6, 1.2), partial=()):
    el = timber_ceiling()
    ds = []
    if patch is not None:
        z0 = el.insulation[0]
        mat = air_layer(el.thickness_m() - z0, "upward")
        ds.append(Defect("displaced_insulation", "missing_insulation",
                         (Block(mat, patch[0], patch[1], patch[2], patch[3], z0, el.thickness_m()),),
                         "insulation pushed aside over a patch (both layers)"))
    for i, (x0, x1, y0, y1, remaining) in enumerate(partial):
        ds.append(partial_fill(el, x0_m=x0, x1_m=x1, y0_m=y0, y1_m=y1, remaining=remaining,
                               name=f"partial_fill_{i}"))
    cond = Conditions(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, outside_exposure="loft",
                      top_height_m=2.4)
    return el, tuple(ds), cond, "interior", None


def _masonry(*, inside_c=20.0, outside_c=0.0, wind_m_s=1.0, slab_y=None, patch=None, lintel=None, void=None,
             sky_view=(0.4, 0.5), view="exterior", fan=None, stratification_k_m=1.0, stratification_k_m2=0.0,
             solid=False, damp=None, relative_humidity=0.5, construction=()):
    if solid:
        return _solid_wall(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, damp=damp, fan=fan,
                           stratification_k_m=stratification_k_m, stratification_k_m2=stratification_k_m2,
                           relative_humidity=relative_humidity)
    el = masonry_wall()
    ds = []
    if slab_y is not None:
        ds.append(slab_edge(el, y0_m=slab_y))
    if patch is not None:
        ds.append(missing_patch(el, x0_m=patch[0], x1_m=patch[1], y0_m=patch[2], y1_m=patch[3]))
    if lintel is not None:
        ds.append(lintel_defect(el, x0_m=lintel[0], x1_m=lintel[1], y0_m=lintel[2], height_m=lintel[3]))
    if void is not None:
        ds.append(partial_void(el, x0_m=void[0], x1_m=void[1], y0_m=void[2], y1_m=void[3], depth_m=void[4]))
    if fan is not None:
        ds.append(cold_air_fan(el, x_m=fan[0], y_m=fan[1], width_m=fan[2], drop_k=fan[3]))
    ds.extend(construction_items(el, tuple(construction)))
    cond = Conditions(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, sky_view_top=sky_view[0],
                      sky_view_bottom=sky_view[1], top_height_m=3.0, stratification_k_m=stratification_k_m,
                      stratification_k_m2=stratification_k_m2)
    return el, tuple(ds), cond, view, None


def _solid_wall(*, inside_c=20.0, outside_c=0.0, wind_m_s=1.0, damp=(0.6, 0.06, 0.12, 0.08, 0.3), fan=None,
                stratification_k_m=1.0, stratification_k_m2=0.0, relative_humidity=0.5):
    el = solid_wall()
    ds = []
    if damp is not None:
        tide, wave, soft, water, wet, *span = damp
        ds.append(rising_damp(el, tide_m=tide, wave_m=wave, soft_m=soft, water_fraction=water, wet_surface=wet,
                              x0_m=span[0] if span else 0.0, x1_m=span[1] if span else None))
    if fan is not None:
        ds.append(cold_air_fan(el, x_m=fan[0], y_m=fan[1], width_m=fan[2], drop_k=fan[3]))
    cond = Conditions(inside_c=inside_c, outside_c=outside_c, wind_m_s=wind_m_s, top_height_m=2.4,
                      stratification_k_m=stratification_k_m, stratification_k_m2=stratification_k_m2,
                      relative_humidity=relative_humidity)
    return el, tuple(ds), cond, "interior", None


def _roof(*, inside_c=20.0, wind_m_s=1.0, insulation="eps", wet=((1.2, 2.4, 0.9, 1.9, 0.15),), dt_s=900.0,
          end_h=22.0, air_mean_c=10.0, tapered=()):
    el = flat_roof(insulation=insulation)
    ds = tuple(wet_patch(el, x0_m=w[0], x1_m=w[1], y0_m=w[2], y1_m=w[3], water_fraction=w[4], name=f"wet_{i}")
               for i, w in enumerate(wet))
    ds += tuple(tapered_wet_patch(el, x0_m=w[0], x1_m=w[1], y0_m=w[2], y1_m=w[3], water_fraction=w[4],
                                  rings=int(w[5]), name=f"tapered_wet_{i}") for i, w in enumerate(tapered))
    cond = Conditions(inside_c=inside_c, wind_m_s=wind_m_s, sky_view_top=1.0, sky_view_bottom=1.0)
    return el, ds, cond, "roof", NightSchedule(dt_s=dt_s, end_h=end_h, air_mean_c=air_mean_c)


PRESETS = {"timber-wall": _timber_wall, "ceiling": _ceiling, "masonry-wall": _masonry, "flat-roof": _roof}
# Scenes that are more than one plane element, simulated and projected by their own module; the
# validation makes them, the command line does not offer them (its camera is square-on to one face).
VALIDATION_ONLY = {"wall-corner": corner_scene, "wall-roof-junction": junction_scene}


def make_preset(kind: str, *, name: str = "scene", **options) -> Scene:
    """Simulate one preset scene.

    Parameters
    ----------
    kind : {"timber-wall", "ceiling", "masonry-wall", "flat-roof", "wall-corner", "wall-roof-junction"}
    name : str
        Scene name carried into the truth.
    **options
        Preset options: ``inside_c``, ``outside_c``, ``wind_m_s`` for all; timber wall:
        ``spacing_m``, ``defects`` (``"bay:N[:y0]"``, ``"settled:N:void_m"``,
        ``"void:x0:x1:y0:y1:depth"``, ``"soft:N:void_m:soft_m[:wave_m]"`` settled fill with a soft
        top, ``"fill:x0:x1:y0:y1:remaining"`` insulation left at a fraction of its depth,
        ``"fan:x:y:width:drop_k"`` a cold-air fan from a gap), ``lintel`` (x0, x1, y0, height),
        ``construction`` (``"radiator:x0:x1:y0:y1[:top_c:bottom_c]"``, ``"pipe:x:y0:y1[:water_c]"``,
        ``"window:x0:x1:y0:y1[:u_glass]"``: :mod:`irseg.scenes._construction`),
        ``stratification_k_m``, ``stratification_k_m2``; ceiling: ``patch`` (x0, x1, y0, y1, or
        None), ``partial`` ((x0, x1, y0, y1, remaining fraction), ...); masonry wall: ``slab_y``,
        ``patch``, ``lintel``, ``void`` (x0, x1, y0, y1, depth), ``sky_view`` (top, bottom),
        ``view`` ("exterior" or "interior"), ``fan`` (x, y, width, drop_k), ``construction`` (as the
        timber wall's), stratification, and
        ``solid=True`` for an uninsulated solid brick wall seen from inside (3.0 × 2.4 m) with
        ``damp`` (tide line height, wave, soft band, water fraction, wet surface fraction[, x0, x1], or
        None), ``fan``, stratification, ``relative_humidity``; flat roof: ``insulation``, ``wet`` ((x0, x1, y0, y1, water
        fraction), ...), ``tapered`` ((x0, x1, y0, y1, water fraction, rings), ...) wetness
        tapering to the edge, ``dt_s``, ``end_h``, ``air_mean_c``; wall corner (validation only, not offered by the command line: an external corner
        of the brick + EPS wall seen from inside at 45° to both faces, :mod:`irseg.scenes._corner`):
        ``corner_x_m``, ``patch`` (on the unfolded faces), ``stratification_k_m``, ``width_m``; wall/roof
        junction (validation only: the brick + EPS wall under a warm flat roof seen from inside at 45° to
        the wall and the ceiling, :mod:`irseg.scenes._junction`): ``junction_y_m``, ``room_height_m``,
        ``stratification_k_m``, ``width_m``, ``height_m``.

    Returns
    -------
    Scene

    Raises
    ------
    ConfigError
        Unknown kind or defect specification.
    """
    try:
        builder = PRESETS[kind] if kind in PRESETS else VALIDATION_ONLY[kind]
    except KeyError:
        raise ConfigError(f"scene kind {kind!r} is unknown; use one of {sorted(PRESETS)}") from None
    allowed = set(inspect.signature(builder).parameters)
    unknown = sorted(set(options) - allowed)
    if unknown:
        raise ConfigError(f"scene kind {kind!r} has no option(s) {unknown}; valid: {sorted(allowed)}")
    if kind in VALIDATION_ONLY:  # simulated in 2-D (and 3-D) and projected by its own module
        return builder(name=name, **options)
    el, ds, cond, view, night = builder(**options)
    return simulate_scene(el, ds, cond, view=view, name=name, night=night)
