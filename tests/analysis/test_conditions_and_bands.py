"""Inspection-condition warnings, missing metadata, confidence bands and severity."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg

from irseg.analysis import analyse, severity_key


def _scene(rng=None, *, noise=0.0):
    t = np.full((100, 140), 18.0)
    d = np.zeros(t.shape, int)
    t[20:50, 20:60] -= 2.5
    d[20:50, 20:60] = 1
    t[60:90, 80:100] -= 1.0
    d[60:90, 80:100] = 2
    if rng is not None:
        t_obs = t + rng.normal(0.0, noise, t.shape)
    else:
        t_obs = t
    return t_obs, make_seg(d, u=t)


def _analyse(t, seg, **sections):
    sections.setdefault("camera", {"pixel_m": 0.01})
    return analyse(make_frame(t), seg, make_meta(**sections))


def test_small_inside_outside_difference_warns():
    # inside-outside difference of at least 10 K: EN 13187:1998 and ASTM C1060 [V] (as quoted by
    # secondary sources, not in the standards' own text)
    t, seg = _scene()
    res = _analyse(t, seg, air={"inside_c": 20.0, "outside_c": 14.0})
    assert any("below 10 K" in w and "EN 13187" in w for w in res.warnings)
    ok = _analyse(t, seg, air={"inside_c": 20.0, "outside_c": 5.0})
    assert not any("below" in w for w in ok.warnings)


def test_wind_above_limit_warns_for_exterior_views():
    # ASTM C1060: wind at most 15 mph = 6.7 m/s [V] (as quoted by a secondary source)
    t, seg = _scene()
    t = 20.0 - t  # warm defects seen from outside
    seg = dataclasses.replace(seg, u=20.0 - seg.u)
    ext = {"view": "exterior"}
    res = _analyse(t, seg, surface=ext, air={"inside_c": 20.0, "outside_c": 0.0, "wind_m_s": 9.0})
    assert any("6.7 m/s" in w for w in res.warnings)
    calm = _analyse(t, seg, surface=ext, air={"inside_c": 20.0, "outside_c": 0.0, "wind_m_s": 2.0})
    assert not any("exceeds" in w for w in calm.warnings)
    unknown = _analyse(t, seg, surface=ext, air={"inside_c": 20.0, "outside_c": 0.0, "wind_m_s": None})
    assert any("wind_m_s not given" in w for w in unknown.warnings)
    # h_ce = 4 + 4v: stronger wind, more heat for the same contrast (ISO 6946 annex)
    assert res.anomalies[0].excess_w > calm.anomalies[0].excess_w


def test_roof_without_sky_temperature_warns():
    t, seg = _scene()
    res = _analyse(t, seg, surface={"view": "roof", "reflected_c": None})
    assert any("reflected_c not given for a roof" in w for w in res.warnings)
    ok = _analyse(t, seg, surface={"view": "roof", "reflected_c": -15.0})
    assert not any("reflected_c" in w for w in ok.warnings)


def test_missing_geometry_gives_pixel_areas_and_a_warning():
    t, seg = _scene()
    res = _analyse(t, seg, camera={"hfov_deg": None, "distance_m": None, "pixel_m": None})
    assert res.pixel_m is None and res.pixel_area_m2 is None
    assert any("no geometry" in w for w in res.warnings)
    for a in res.anomalies:
        assert a.area_px > 0
        assert a.area_m2 is None and a.area_low_m2 is None and a.excess_w is None and a.excess_kwh_year is None
    assert len(res.anomalies) == 2


def test_missing_air_temperatures_disable_energy_and_f_rsi():
    t, seg = _scene()
    res = _analyse(t, seg, air={"inside_c": None, "outside_c": None})
    assert any("inside_c and outside_c not given" in w for w in res.warnings)
    for a in res.anomalies:
        assert a.excess_w is not None  # W need only geometry and h
        assert a.excess_kwh_year is None and a.f_rsi is None and a.mould_risk is None


def test_inside_equal_outside_gives_no_energy():
    t, seg = _scene()
    res = _analyse(t, seg, air={"inside_c": 10.0, "outside_c": 10.0})
    assert all(a.excess_kwh_year is None and a.f_rsi is None for a in res.anomalies)
    assert any("not warmer" in w for w in res.warnings)


def test_bands_bracket_the_estimate_and_are_deterministic(rng):
    t, seg = _scene(rng, noise=0.05)
    one = _analyse(t, seg, analysis={"seed": 7})
    two = _analyse(t, seg, analysis={"seed": 7})
    other = _analyse(t, seg, analysis={"seed": 8})
    assert one.anomalies == two.anomalies
    assert one.anomalies[0].excess_low_w != other.anomalies[0].excess_low_w
    for a in one.anomalies:
        assert a.area_low_m2 < a.area_m2 < a.area_high_m2
        assert a.excess_low_w < a.excess_w < a.excess_high_w


def test_bands_widen_with_the_input_uncertainties():
    t, seg = _scene()
    tight = _analyse(t, seg, camera={"pixel_m": 0.01, "netd_k": 0.0},
                     surface={"emissivity_uncertainty_abs": 0.0},
                     analysis={"h_uncertainty_rel": 0.0, "distance_uncertainty_rel": 0.0})
    loose = _analyse(t, seg, analysis={"h_uncertainty_rel": 0.4, "distance_uncertainty_rel": 0.10})
    a, b = tight.anomalies[0], loose.anomalies[0]
    # noise-free scene, no uncertainty: the heat band collapses on the estimate
    assert a.excess_low_w == pytest.approx(a.excess_w, rel=1e-9)
    assert a.excess_high_w == pytest.approx(a.excess_w, rel=1e-9)
    # area: only the ±½ px outline remains -> within perimeter/2 px
    perim = 2 * (30 + 40) - 4
    assert a.area_high_m2 - a.area_low_m2 <= perim * 1e-4 + 1e-12
    assert (b.excess_high_w - b.excess_low_w) > 0.3 * b.excess_w  # ±40 % on h alone
    # distance ±10 %: area ∝ d², 90 % band about ±33 % (1.645 × 2 × 10 %)
    assert (b.area_high_m2 - b.area_low_m2) / b.area_m2 == pytest.approx(2 * 1.645 * 0.2, rel=0.15)


def test_severity_ranks_by_mould_risk_then_energy():
    t, seg = _scene()
    res = _analyse(t, seg, air={"inside_c": 20.0, "outside_c": 0.0})
    big, small = res.anomalies  # ids in raster order
    assert big.excess_kwh_year > small.excess_kwh_year
    assert (big.severity, small.severity) == (1, 2)
    assert big.severity_score > small.severity_score
    # mould risk outranks energy
    risky = dataclasses.replace(small, mould_risk=True)
    assert sorted([big, risky], key=severity_key)[0] is risky
    # None energy sorts after known energy; across images the key still orders
    unknown = dataclasses.replace(big, excess_kwh_year=None, excess_w=None, anomaly=9)
    assert sorted([unknown, small], key=severity_key)[0] is small


def test_severity_mould_flag_first_within_an_image():
    # limit 0.85: the 2.5 K defect (f = 15.5/20 = 0.775) is at risk, the 1 K one (0.85) not (DIN 4108-2 form)
    t, seg = _scene()
    res = _analyse(t, seg, air={"inside_c": 20.0, "outside_c": 0.0}, analysis={"frsi_limit": 0.80})
    by_id = {a.anomaly: a for a in res.anomalies}
    assert by_id[1].mould_risk is True and by_id[2].mould_risk is False
    assert by_id[1].severity == 1
