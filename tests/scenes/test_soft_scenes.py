"""Scene-maker features for soft, graded and diffuse defects (issue 11), against physics and closed forms.

Sources beside each check value:
- [STEAM] saturation vapour pressure of water at 20 °C: 2.339 kPa (steam tables, e.g. the CRC Handbook of
  Chemistry and Physics, vapour pressure of water table) [V, from memory of the table value];
- [MAGNUS] e_s = 610.94·exp(17.625·T/(T + 243.04)) Pa (Alduchov & Eskridge, J. Appl. Meteor. 35 (1996)) [M];
- [LEWIS] evaporation m = h_c/c_p·(x_s − x_a) for a Lewis number of 1 (Chilton-Colburn analogy) [M], latent
  heat of water near 20 °C 2.45 MJ/kg [M], c_p of air 1006 J/kgK [M], x = 0.622·e/(p − e) [C];
- [HALF] a Gaussian bump A·exp(−r²/2s²) holds at least A/2 inside an area of 2π·ln2·s² (closed form) [C];
- [C] other values computed from the definitions the scene maker documents.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from irseg.scenes import (
    CameraModel,
    Conditions,
    cold_air_fan,
    defect_mask,
    face_conditions,
    partial_fill,
    rasterise,
    settled_fill,
    shoot,
    simulate_scene,
    solid_wall,
    tapered_wet_patch,
    timber_ceiling,
    timber_frame_wall,
    flat_roof,
)
from irseg.scenes._defects import rising_damp
from irseg.scenes._physics import evaporation_w_m2, saturation_pressure_pa
from irseg.scenes._survey import graded_region


def test_saturation_pressure_at_20_c_matches_the_steam_tables():
    assert saturation_pressure_pa(20.0) == pytest.approx(2339.0, rel=0.003)  # [STEAM]
    assert saturation_pressure_pa(0.0) == pytest.approx(610.94, rel=1e-9)  # [MAGNUS] at T = 0


def test_evaporation_from_a_wet_surface_by_the_lewis_analogy():
    # a fully wet face at 15 °C in a room at 20 °C and 50 % RH, h_c 2.5 W/m²K [LEWIS]+[MAGNUS]
    e_s15, e_20 = 610.94 * math.exp(17.625 * 15 / (15 + 243.04)), 0.5 * 610.94 * math.exp(17.625 * 20 / (20 + 243.04))
    x_s, x_a = 0.622 * e_s15 / (101325 - e_s15), 0.622 * e_20 / (101325 - e_20)
    expected = 2.5 / 1006.0 * (x_s - x_a) * 2.45e6  # about 19.6 W/m²
    got = float(evaporation_w_m2(surface_c=15.0, air_c=20.0, relative_humidity=0.5, h_convective_w_m2k=2.5,
                                 wet_fraction=1.0))
    assert got == pytest.approx(expected, rel=1e-6)
    assert 15.0 < got < 25.0
    # a dry face does not evaporate; a face colder than the dew point does not evaporate either
    assert float(evaporation_w_m2(surface_c=15.0, air_c=20.0, relative_humidity=0.5, h_convective_w_m2k=2.5,
                                  wet_fraction=0.0)) == 0.0
    assert float(evaporation_w_m2(surface_c=5.0, air_c=20.0, relative_humidity=0.5, h_convective_w_m2k=2.5,
                                  wet_fraction=1.0)) == 0.0


def test_stratification_that_is_not_linear():
    # the air is inside + a(z − 1.5) + b(z − 1.5)²; the convective share h_c/h of it reaches the ambient of
    # the inside face, so the ambient's second difference over rows is 2·b·Δz²·h_c/h [C]
    el = solid_wall(width_m=0.2, height_m=2.4, cell_m=0.1)
    fc = face_conditions(el, Conditions(stratification_k_m=1.0, stratification_k_m2=0.8, top_height_m=2.4))
    amb = fc["amb_in"][:, 0]
    share = 2.5 / float(fc["h_in"][0, 0])
    assert np.allclose(np.diff(amb, 2), 2 * 0.8 * 0.1**2 * share, rtol=1e-9)


def test_partial_fill_leaves_the_stated_depth_and_the_joists():
    el = timber_ceiling()
    d = partial_fill(el, x0_m=0.35, x1_m=0.85, y0_m=0.3, y1_m=0.8, remaining=1 / 3)
    k, _ = rasterise(el, (d,))
    k0, _ = rasterise(el, ())
    col = int(0.6 / el.cell_m)  # inside the rectangle, in a bay
    row = int(0.5 / el.cell_m)
    changed = k[:, row, col] != k0[:, row, col]
    dz = el.dz_m()
    z0 = el.insulation[0]
    insulated = el.thickness_m() - z0
    # the void reaches from the top down to a third of the insulated depth, to the cell [C]
    assert float(dz[changed].sum()) == pytest.approx(2 / 3 * insulated, abs=float(dz.max()))
    joist_col = int(0.9 / el.cell_m)
    joist_rows = k0[:, row, joist_col] == 0.13
    assert (k[joist_rows, row, joist_col] == 0.13).all()  # the joist stays where the fill is removed
    assert d.truth_kind == "graded" and defect_mask(el, d).any()


def test_settled_fill_thins_out_over_its_soft_top():
    el = timber_frame_wall(stud_spacing_m=0.4, first_stud_m=0.2)
    d = settled_fill(el, 1, void_m=0.2, soft_m=0.15)
    k, _ = rasterise(el, (d,))
    k0, _ = rasterise(el, ())
    col = int(0.4 / el.cell_m)
    depth = [(k[:, r, col] != k0[:, r, col]).sum() for r in range(el.ny)]
    rows = (np.arange(el.ny) + 0.5) * el.cell_m
    full = depth[int(0.1 / el.cell_m)]
    assert full == 10  # the whole insulation layer (10 cells) above the fill
    soft = [dd for dd, y in zip(depth, rows) if 0.2 < y < 0.35]
    assert soft == sorted(soft, reverse=True) and soft[0] > soft[-1]  # thinning toward the fill [C]
    assert depth[int(0.6 / el.cell_m)] == 0


def test_tapered_wetness_rises_toward_the_core():
    el = flat_roof()
    d = tapered_wet_patch(el, x0_m=1.0, x1_m=2.6, y0_m=0.8, y1_m=2.0, water_fraction=0.2, rings=4)
    k, _ = rasterise(el, (d,))
    z = int(np.argmax(el.z_edges_m() >= el.insulation[0] + 0.05))
    row = int(1.4 / el.cell_m)
    cols = [int(x / el.cell_m) for x in (1.05, 1.25, 1.5, 1.8)]
    lam = [k[z, row, c] for c in cols]
    assert lam == sorted(lam) and lam[0] < lam[-1]  # wetter, so more conductive, toward the core
    assert d.truth_kind == "graded"


def test_cold_air_fan_air_and_region():
    el = solid_wall()
    d = cold_air_fan(el, x_m=1.5, y_m=0.6, width_m=0.5, drop_k=6.0, decay_m=0.5)
    col = int(1.5 / el.cell_m)
    y = (np.arange(el.ny) + 0.5) * el.cell_m
    row0 = int(np.argmax(y >= 0.6 + 0.03))
    row1 = int(np.argmax(y >= y[row0] + 0.5))
    # the drop decays by e over decay_m below the gap, exactly [C]
    assert d.air_change_k[row1, col] / d.air_change_k[row0, col] == pytest.approx(math.exp(-(y[row1] - y[row0]) / 0.5),
                                                                                  rel=1e-9)
    assert d.air_change_k[row0, col] < -5.0 and (d.air_change_k <= 0).all()
    assert d.blocks == () and defect_mask(el, d).any() and d.cause == "air_leakage"


def test_damp_base_is_colder_with_evaporation_than_without():
    el = solid_wall(width_m=1.2, height_m=1.2, cell_m=0.04)
    wet = rising_damp(el, tide_m=0.4, wet_surface=0.3)
    dry_face = rising_damp(el, tide_m=0.4, wet_surface=0.0)
    cond = Conditions(inside_c=20.0, outside_c=0.0)
    evap = simulate_scene(el, (wet,), cond, view="interior")
    cond_only = simulate_scene(el, (dry_face,), cond, view="interior")
    base = slice(int(1.0 / el.cell_m), el.ny)
    assert (evap.surface_c[base] < cond_only.surface_c[base]).all()  # evaporation draws heat [LEWIS]
    assert (cond_only.surface_c[base] < cond_only.baseline_c[base]).all()  # wet brick conducts more [C]
    assert evap.truth[0].excess_w > cond_only.truth[0].excess_w > 0


def test_graded_truth_region_of_a_gaussian_bump_is_its_half_peak_area():
    m, n, s = 200, 240, 15.0
    yy, xx = np.mgrid[:m, :n].astype(float)
    contrast = -0.8 * np.exp(-((yy - 100) ** 2 + (xx - 120) ** 2) / (2 * s * s))
    mask = np.hypot(yy - 100, xx - 120) <= 2 * s
    region = graded_region(contrast, mask, pixel_m=0.02)
    assert region.sum() == pytest.approx(2 * math.pi * math.log(2) * s * s, rel=0.03)  # [HALF]


def test_lens_shading_offset_is_warmer_toward_the_corners_with_a_warmer_housing():
    el = timber_frame_wall()
    sc = simulate_scene(el, (partial_fill(el, x0_m=1.0, x1_m=1.4, y0_m=0.6, y1_m=1.1, remaining=0.5),),
                        Conditions(outside_exposure="ventilated"), view="interior")
    plain = shoot(sc, CameraModel(n_cols=160, n_rows=120, distance_m=2.0, centre_m=(1.2, 0.9), shading=0.0))
    shaded = shoot(sc, CameraModel(n_cols=160, n_rows=120, distance_m=2.0, centre_m=(1.2, 0.9), shading=0.08,
                                   housing_c=35.0))
    assert plain.shading_k is None
    assert shaded.shading_k[0, 0] > 1.0 > shaded.shading_k[60, 80] >= 0.0
    # what the shading adds is what the shaded frame shows over the plain one, noise aside [C]
    diff = shaded.apparent_c - plain.apparent_c
    assert float(np.median(diff - shaded.shading_k)) == pytest.approx(0.0, abs=0.01)
