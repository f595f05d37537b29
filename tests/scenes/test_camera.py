"""Camera model: footprint geometry, band radiance, noise statistics, truth masks."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from irseg.errors import ConfigError
from irseg.radiometry import apparent_to_object
from irseg.scenes import (
    CameraModel,
    Conditions,
    Scene,
    missing_bay,
    pixel_footprint_m,
    shoot,
    simulate_scene,
    timber_frame_wall,
    truth_in_window,
    view_window,
)


@pytest.mark.parametrize(
    ("n", "fov", "d", "expected_mm"),
    # pinhole geometry, p = 2 d tan(FOV/2)/N [C]
    [(160, 25.0, 5.0, 13.86), (320, 25.0, 5.0, 6.93), (640, 25.0, 5.0, 3.46), (640, 45.0, 3.0, 3.88),
     (1280, 25.0, 10.0, 3.46)],
)
def test_pixel_footprint_matches_reference_table(n, fov, d, expected_mm):
    assert pixel_footprint_m(hfov_deg=fov, distance_m=d, n_cols=n) * 1000 == pytest.approx(expected_mm, abs=0.006)


def _uniform_scene(surface_c: float, radiant_c: float, emissivity: float, shape=(40, 60), cell=0.05) -> Scene:
    el = timber_frame_wall(width_m=shape[1] * cell, height_m=shape[0] * cell, cell_m=cell)
    fp = np.zeros((1, *shape), bool)
    fp[0, 10:20, 20:35] = True
    return Scene("uniform", "interior", el, (), Conditions(emissivity=emissivity), np.full(shape, surface_c),
                 np.full(shape, surface_c), np.full(shape, radiant_c), np.full(shape, 7.7), fp, (), {})


_QUIET = dict(psf_sigma_px=0.0, netd_k=0.0, column_sigma_k=0.0, shading=0.0, n_cols=64, n_rows=48,
              hfov_deg=45.0, distance_m=2.0)


def test_band_radiance_worked_example_and_round_trip():
    # Planck's law over 7.5-14 um (CODATA 2018 constants) in L = eps L_b(T_obj) + (1 - eps) L_b(T_refl)
    # (opaque grey surface, Kirchhoff's law), tau 1 [C]: eps 0.93, T_obj 15 °C, T_refl 20 °C -> 15.359 °C
    shot = shoot(_uniform_scene(15.0, 20.0, 0.93), CameraModel(**_QUIET))
    assert np.abs(shot.apparent_c - 15.359).max() < 0.001
    back = apparent_to_object(shot.apparent_c, emissivity=0.93, reflected_c=20.0)
    assert np.abs(back - 15.0).max() < 0.001
    # same equation [C]: glass eps 0.84 at 10 °C, T_refl 20 °C reads 11.67 °C
    shot = shoot(_uniform_scene(10.0, 20.0, 0.84), CameraModel(**_QUIET))
    assert np.abs(shot.apparent_c - 11.67).max() < 0.006


def test_noise_pattern_and_dead_pixels_statistics():
    cam = CameraModel(**dict(_QUIET, netd_k=0.08, column_sigma_k=0.03, n_cols=200, n_rows=150), dead_pixels=5,
                      seed=7)
    shot = shoot(_uniform_scene(18.0, 18.0, 1.0, shape=(80, 100), cell=0.04), cam)
    a = np.where(shot.dead, np.nan, shot.apparent_c)
    # check values are the model's own inputs (NETD 0.08 K, column sigma 0.03 K, 5 dead pixels) recovered
    # as sample statistics; the relative standard error of a sample std is 1/sqrt(2n) [C]:
    # rel 0.05 is ~8 of them over 15 000 pixels, rel 0.35 ~7 over 200 columns; dead jumps are >= 15 K.
    col = np.nanmean(a, axis=0)
    resid = a - col[None, :]
    assert np.nanstd(resid) == pytest.approx(0.08, rel=0.05)
    assert np.std(col) == pytest.approx(0.03, rel=0.35)
    assert shot.dead.sum() == 5
    assert (np.abs(shot.apparent_c[shot.dead] - 18.0) > 10).all()
    again = shoot(_uniform_scene(18.0, 18.0, 1.0, shape=(80, 100), cell=0.04), cam)
    np.testing.assert_array_equal(again.apparent_c, shot.apparent_c)


def test_lens_shading_darkens_corners_towards_housing():
    cam = CameraModel(**dict(_QUIET, shading=0.03), housing_c=10.0)
    a = shoot(_uniform_scene(20.0, 20.0, 1.0), cam).apparent_c
    # radiance mixing (Planck's law, 7.5-14 um): the centre pixel sees almost no housing; at the corner
    # 3 % of the 20 °C radiance is replaced by 10 °C housing radiance, about 0.3 K lower [C]
    assert abs(a[24, 32] - 20.0) < 0.01
    assert a[0, 0] < a[24, 32] - 0.2


def test_truth_footprint_area_on_camera_grid():
    el = timber_frame_wall(width_m=1.2, height_m=0.9, cell_m=0.03)
    sc = simulate_scene(el, (missing_bay(el, 1),), Conditions(outside_exposure="ventilated"), view="interior")
    cam = CameraModel(n_cols=160, n_rows=120, hfov_deg=45.0, distance_m=1.3, netd_k=0.0, column_sigma_k=0.0)
    shot = shoot(sc, cam)
    p = shot.pixel_m
    x0, x1, y0, y1 = view_window(el, cam)
    (t,) = truth_in_window(sc, x0_m=x0, x1_m=x1, y0_m=y0, y1_m=y1)
    assert t.area_m2 < sc.truth[0].area_m2  # the bay runs past the top and bottom of the view
    # pixel area matches the surface-grid area in the view to within a rim of half a cell
    fp = shot.defect_masks[0]
    rows, cols = np.nonzero(fp)
    perimeter_m = 2 * ((np.ptp(rows) + 1) + (np.ptp(cols) + 1)) * p
    assert abs(fp.sum() * p * p - t.area_m2) < perimeter_m * el.cell_m / 2
    # the defect is colder in the image than its surroundings: an empty bay at 20/0 °C reads several K
    # colder inside (ASTM C1060, scope: missing insulation reads as a cold area from inside [V];
    # 1 K margin [CP])
    assert shot.apparent_c[fp].mean() < shot.apparent_c[~fp].mean() - 1.0


def test_view_larger_than_element_is_refused():
    el = timber_frame_wall(width_m=1.2, height_m=0.9, cell_m=0.03)
    sc = simulate_scene(el, (missing_bay(el, 1),), Conditions(outside_exposure="ventilated"), view="interior")
    with pytest.raises(ConfigError, match="leaves the"):
        shoot(sc, CameraModel(distance_m=5.0))
    with pytest.raises(ConfigError, match="leaves the"):
        shoot(sc, replace(CameraModel(n_cols=100, n_rows=75, distance_m=1.2), tilt_deg=70.0))
