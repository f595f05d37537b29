"""The reflected temperature in force: one rule (irseg._defaults.resolve_reflected_c), and the
analysis takes every setting from its ``meta`` argument.

Physics: the linearised radiative coefficient h_r = ε·4σT_m³ with T_m the mean of the surface
and its radiant surroundings (ISO 6946:2017 Annex C [C]); σ = 5.670374419e-8 W m⁻² K⁻⁴ (CODATA
2018 [V]); T/K = t/°C + 273.15 (SI Brochure, 9th edition [V]).
"""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg

import irseg._defaults
from irseg._defaults import DEFAULT_REFLECTED_C, camera_side_air_c, resolve_reflected_c
from irseg.analysis import analyse

SIGMA_SB = 5.670374419e-8  # CODATA 2018 [V]


def test_given_reflected_temperature_is_used_as_is():
    meta = make_meta(surface={"reflected_c": -11.5})
    assert resolve_reflected_c(meta) == (-11.5, None)


@pytest.mark.parametrize(
    "view, air, expected, side",
    [("interior", {"inside_c": 21.0, "outside_c": -3.0}, 21.0, "inside"),
     ("exterior", {"inside_c": 21.0, "outside_c": -3.0}, -3.0, "outside"),
     ("roof", {"inside_c": 21.0, "outside_c": -3.0}, -3.0, "outside")],
)
def test_missing_reflected_temperature_falls_back_to_the_air_on_the_cameras_side(view, air, expected, side):
    # the surroundings a camera sees are at about the air temperature of the space it stands in [CP]
    meta = make_meta(surface={"view": view, "reflected_c": None}, air=air)
    assert camera_side_air_c(meta) == expected
    value, reason = resolve_reflected_c(meta)
    assert value == expected
    assert reason is not None and f"{side} air temperature" in reason and "reflected_c" in reason


def test_without_any_air_temperature_the_default_is_20_c():
    # 20 °C: a heated room [CP]; the same value the radiometric correction used before
    meta = make_meta(surface={"reflected_c": None}, air={"inside_c": None, "outside_c": None})
    value, reason = resolve_reflected_c(meta)
    assert (value, DEFAULT_REFLECTED_C) == (20.0, 20.0)
    assert "taken as 20 °C" in reason and "reflector method" in reason
    # the air on the other side does not count
    inside_only = make_meta(surface={"view": "exterior", "reflected_c": None}, air={"inside_c": 21.0, "outside_c": None})
    assert resolve_reflected_c(inside_only)[0] == 20.0


def test_the_rule_lives_in_a_leaf_module():
    # metadata, radiometry and analysis call it: it may import only types, vocabulary and _shared
    tree = ast.parse(Path(irseg._defaults.__file__).read_text(encoding="utf-8"))
    imported = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            imported.add("." * node.level + (node.module or ""))
        elif isinstance(node, ast.Import):
            imported.update(a.name for a in node.names)
    assert imported <= {"__future__", ".types", ".vocabulary", "._shared"}


def _square():
    t = np.full((120, 160), 18.0)
    d = np.zeros(t.shape, int)
    t[40:70, 60:90] -= 2.0
    d[40:70, 60:90] = 1
    return t, make_seg(d, u=t)


def _h_si(t_mean_c, emissivity=0.93, h_ci=2.5):
    # h_si = h_ci + ε·4σT_m³ (ISO 6946:2017 Annex C [C]); h_ci 2.5 W/m²K for horizontal heat flow,
    # BS EN ISO 13789:2017 Table 8 [V] (as quoted in open-source code)
    return h_ci + emissivity * 4 * SIGMA_SB * (t_mean_c + 273.15) ** 3


@pytest.mark.parametrize(
    "reflected_c, air, surroundings_c",
    [(10.0, {"inside_c": 20.0, "outside_c": 0.0}, 10.0),  # given
     (None, {"inside_c": 24.0, "outside_c": 0.0}, 24.0),  # the inside air
     (None, {"inside_c": None, "outside_c": None}, 20.0)],  # nothing known: 20 °C
)
def test_radiative_coefficient_uses_the_resolved_reflected_temperature(reflected_c, air, surroundings_c):
    t, seg = _square()
    meta = make_meta(camera={"pixel_m": 0.01}, surface={"reflected_c": reflected_c}, air=air)
    res = analyse(make_frame(t), seg, meta)
    # T_m = mean of the sound surface (18 °C) and the surroundings
    assert res.h_w_m2k == pytest.approx(_h_si(0.5 * (18.0 + surroundings_c)), rel=1e-9)


def test_roof_without_sky_or_outside_air_names_the_default():
    t, seg = _square()
    meta = make_meta(surface={"view": "roof", "reflected_c": None}, air={"inside_c": 20.0, "outside_c": None})
    res = analyse(make_frame(t), seg, meta)
    (w,) = [w for w in res.warnings if "reflected_c not given for a roof" in w]
    assert "uses 20 °C" in w


def test_every_setting_comes_from_the_meta_argument():
    # the frames of these tests carry no settings (tests.support.fakes.make_frame); two metas on the
    # same frame must give their own results: area ∝ pixel side² (pinhole geometry [C])
    t, seg = _square()
    frame = make_frame(t)
    fine = analyse(frame, seg, make_meta(camera={"pixel_m": 0.01}))
    coarse = analyse(frame, seg, make_meta(camera={"pixel_m": 0.02}))
    (a,), (b,) = fine.anomalies, coarse.anomalies
    assert (fine.pixel_m, coarse.pixel_m) == (0.01, 0.02)
    assert a.area_px == b.area_px == 900
    assert b.area_m2 == pytest.approx(4 * a.area_m2, rel=1e-12)
    with pytest.raises(TypeError):
        analyse(frame, seg)  # the meta is required
