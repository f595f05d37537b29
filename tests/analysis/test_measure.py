"""Analytic anomalies: exact area and excess heat, worked examples, soft rims, the
local reference under gradients and the sign rule."""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg
from scipy import ndimage

from irseg.analysis import analyse

SIGMA_SB = 5.670374419e-8  # CODATA 2018 [V]


def _square_scene(shape=(120, 160), box=(40, 70, 60, 90), base=18.0, delta=-2.0):
    t = np.full(shape, base)
    d = np.zeros(shape, int)
    r0, r1, c0, c1 = box
    t[r0:r1, c0:c1] += delta
    d[r0:r1, c0:c1] = 1
    return t, d


def test_uniform_square_gives_exact_area_and_heat_loss():
    t, d = _square_scene()
    meta = make_meta(camera={"pixel_m": 0.01})
    res = analyse(make_frame(t), make_seg(d, u=t), meta)
    assert len(res.anomalies) == 1
    a = res.anomalies[0]
    assert (a.kind, a.area_px) == ("cold", 900)
    assert a.area_m2 == pytest.approx(900 * 1e-4, rel=1e-12)
    assert a.delta_k == pytest.approx(-2.0, abs=1e-9)
    assert a.reference_c == pytest.approx(18.0, abs=1e-9)
    # h_si = h_ci + ε·4σT_m³ (ISO 6946:2017 Annex C) [C], T_m = mean of the sound surface (18 °C) and the
    # surroundings (inside air 20 °C)
    h = 2.5 + 0.93 * 4 * SIGMA_SB * (19.0 + 273.15) ** 3
    assert res.h_w_m2k == pytest.approx(h, rel=1e-9)
    assert a.excess_w == pytest.approx(h * 2.0 * 900 * 1e-4, rel=1e-9)
    # degree-day method [CP]: ΔQ/(T_i − T_e)·HDD·24/1000 with 20 K and 3000 K·d
    assert a.excess_kwh_year == pytest.approx(a.excess_w / 20.0 * 3000 * 24 / 1000, rel=1e-12)
    assert (a.bbox_row0, a.bbox_col0, a.bbox_row1, a.bbox_col1) == (40, 60, 70, 90)
    assert (a.centroid_row, a.centroid_col) == pytest.approx((54.5, 74.5))
    assert (a.min_c, a.max_c, a.mean_c) == pytest.approx((16.0, 16.0, 16.0))
    assert res.labels.dtype == np.int32 and int((res.labels == 1).sum()) == 900


@pytest.mark.parametrize("tilt, area_m2, excess_w, kwh", [(0.0, 0.1728, 2.658, 9.57), (30.0, 0.1995, 3.070, 11.05)])
def test_pixel_sum_worked_example(tilt, area_m2, excess_w, kwh):
    # worked here [C]: 320 px, 25°, 3 m (p = 2·d·tan(FOV/2)/N), 10 000 px 2.0 K colder, inside view,
    # ΔQ = h_si·ΔT·A with h_si = 1/0.13 = 7.69 (ISO 6946:2017 Table 7 R_si [V], as quoted by secondary
    # sources); degree-day method [CP] with HDD 3000, T_i − T_e = 20 K; 30° tilt: area × 1/cos 30°.
    # Our h_si (2.5 + 0.9·4σT³ at 20 °C = 7.64) differs from 1/0.13 by 0.65 %.
    t, d = _square_scene(shape=(240, 320), box=(70, 170, 110, 210), base=20.0, delta=-2.0)
    meta = make_meta(
        camera={"hfov_deg": 25.0, "distance_m": 3.0, "tilt_deg": tilt},
        surface={"emissivity": 0.9, "reflected_c": 20.0},
        air={"inside_c": 20.0, "outside_c": 0.0},
    )
    res = analyse(make_frame(t), make_seg(d, u=t), meta)
    (a,) = res.anomalies
    assert a.area_px == 10_000
    assert a.area_m2 == pytest.approx(area_m2, rel=1e-3)
    assert a.excess_w / res.h_w_m2k == pytest.approx(2.0 * area_m2, rel=1e-3)  # contrast × area, exact
    assert a.excess_w == pytest.approx(excess_w, rel=0.01)
    assert a.excess_kwh_year == pytest.approx(kwh, rel=0.01)


def test_soft_rim_carries_heat():
    # a blurred defect: the heat lost over its soft rim belongs to it (physics: Δq = h·ΔT everywhere)
    t, d0 = _square_scene(shape=(120, 160), box=(40, 70, 60, 90), delta=-3.0)
    t = ndimage.gaussian_filter(t, 2.0)
    d = (t < 18.0 - 1.5).astype(int)  # region = pixels beyond half the contrast
    meta = make_meta(camera={"pixel_m": 0.01})
    res = analyse(make_frame(t), make_seg(d, u=t), meta)
    (a,) = res.anomalies
    total = res.h_w_m2k * float((18.0 - t).sum()) * 1e-4  # true excess over the whole image
    region_only = res.h_w_m2k * float((18.0 - t)[d == 1].sum()) * 1e-4
    assert region_only < 0.93 * total  # the rim matters here
    assert a.excess_w == pytest.approx(total, rel=0.04)


def test_reference_follows_a_linear_gradient_within_0p1_k(rng):
    # 2 K of stratification over the height and 1 K across (common practice: walls carry ~2 K of stratification)
    m, n = 160, 200
    rows, cols = np.mgrid[0:m, 0:n]
    sound = 17.0 + 2.0 * rows / m + 1.0 * cols / n
    d = np.zeros((m, n), int)
    d[15:45, 140:180] = 1  # near a corner: its local truth is far from the image median
    t = sound.copy()
    t[d == 1] -= 1.5
    u = t.copy()
    t = t + rng.normal(0.0, 0.05, t.shape)
    meta = make_meta(camera={"pixel_m": 0.01})
    res = analyse(make_frame(t), make_seg(d, u=u), meta)
    (a,) = res.anomalies
    truth = float(sound[d == 1].mean())
    assert abs(a.reference_c - truth) < 0.1
    assert abs(a.delta_k - (-1.5)) < 0.1
    assert abs(float(np.median(t)) - truth) > 0.3  # a global median would fail this check
    assert np.nanmax(np.abs(res.reference_c[d == 1] - sound[d == 1])) < 0.1


def test_reference_under_gradient_without_segmented_background_split(rng):
    # two anomalies of opposite sign on a sloped wall: each gets its own local level
    m, n = 150, 200
    rows, cols = np.mgrid[0:m, 0:n]
    sound = 15.0 + 3.0 * cols / n
    d = np.zeros((m, n), int)
    d[50:90, 10:50] = 1
    d[50:90, 150:190] = 2
    t = sound + np.where(d == 1, -1.0, 0.0) + np.where(d == 2, 1.0, 0.0)
    res = analyse(make_frame(t + rng.normal(0, 0.03, t.shape)), make_seg(d, u=t),
                  make_meta(camera={"pixel_m": 0.01}))
    assert [a.kind for a in res.anomalies] == ["cold", "warm"]
    for a, lab in zip(res.anomalies, (1, 2)):
        assert abs(a.reference_c - float(sound[d == lab].mean())) < 0.1


def test_sign_rule_for_excess_heat():
    # inside view: cold = heat loss (positive W), warm = not a heat-loss signature (None)
    t, d = _square_scene(delta=+2.0)
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": 0.01}))
    (a,) = res.anomalies
    assert a.kind == "warm" and a.excess_w is None and a.excess_kwh_year is None and a.excess_low_w is None
    # outside view: warm = heat loss, positive; exterior h = 4 + 4v + ε·4σT_m³ (ISO 6946 annex [M])
    meta = make_meta(camera={"pixel_m": 0.01}, surface={"view": "exterior", "reflected_c": 2.0},
                     air={"inside_c": 20.0, "outside_c": 2.0, "wind_m_s": 1.0})
    t2, d2 = _square_scene(base=3.0, delta=+1.0)
    res2 = analyse(make_frame(t2), make_seg(d2, u=t2), meta)
    (b,) = res2.anomalies
    h_se = 4 + 4 * 1.0 + 0.93 * 4 * SIGMA_SB * (2.5 + 273.15) ** 3
    assert b.kind == "warm"
    assert res2.h_w_m2k == pytest.approx(h_se, rel=1e-9)
    assert b.excess_w == pytest.approx(h_se * 1.0 * 900 * 1e-4, rel=1e-9)
    assert b.f_rsi is None and b.mould_risk is None  # f_Rsi is an interior quantity


def test_f_rsi_from_the_anomaly_and_mould_flag():
    # f = (θ_si − θ_e)/(θ_i − θ_e), ISO 13788 definition: T_i 20, T_e 10, surface 17.5 °C -> 0.75 [C]
    t, d = _square_scene(base=19.0, delta=-1.5)
    # limits: 0.70, DIN 4108-2 minimum f_Rsi; 0.75, BRE IP 1/06 f_CRsi for dwellings (UK); both [V] as
    # quoted by secondary sources
    for limit, risk in ((0.70, False), (0.76, True)):
        meta = make_meta(camera={"pixel_m": 0.01}, air={"inside_c": 20.0, "outside_c": 10.0},
                         analysis={"frsi_limit": limit})
        (a,) = analyse(make_frame(t), make_seg(d, u=t), meta).anomalies
        assert a.f_rsi == pytest.approx(0.75, abs=1e-9)
        assert a.mould_risk is risk


def test_f_rsi_uses_the_coldest_robust_value():
    # the 5th percentile, not the mean: half the square at 12 °C, half at 16 °C -> f from 12 °C
    t, d = _square_scene(base=18.0, delta=-2.0)
    t[40:55, 60:90] = 12.0
    meta = make_meta(camera={"pixel_m": 0.01}, air={"inside_c": 20.0, "outside_c": 0.0})
    (a,) = analyse(make_frame(t), make_seg(d, u=t), meta).anomalies
    assert a.f_rsi == pytest.approx((12.0 - 0.0) / 20.0, abs=1e-9)
    assert a.mould_risk is True  # 0.60 < 0.70 (DIN 4108-2)


def _soft_bay(shape=(100, 160), cols=(0, 60), sound=19.3, bay=15.8, blur=4.0):
    t = np.full(shape, sound)
    t[:, cols[0]:cols[1]] = bay
    return ndimage.gaussian_filter(t, blur, mode="nearest")


def test_bay_at_the_image_edge_keeps_its_reference():
    # one-sided ring (the bay touches three image edges) on the soft rim of lateral conduction:
    # the reference must not extrapolate a slope into the bay nor sit in the rim
    t = _soft_bay(blur=7.0)
    d = (t < (19.3 + 15.8) / 2).astype(int)
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": 0.01}))
    (a,) = res.anomalies
    assert a.reference_c == pytest.approx(19.3, abs=0.05)
    total = res.h_w_m2k * float((19.3 - t).sum()) * 1e-4
    assert a.excess_w == pytest.approx(total, rel=0.03)


def test_sound_strip_pulled_by_a_neighbours_rim_is_not_an_anomaly():
    # the segmentation splits the sound wall at column 24; the strip 24..(bay) holds part of the bay's rim
    t = _soft_bay(cols=(40, 100), blur=4.0)
    d = np.zeros(t.shape, int)
    d[t < (19.3 + 15.8) / 2] = 1
    strip = np.zeros(t.shape, bool)
    strip[:, 24:40] = True
    strip &= d == 0
    d[strip] = 2
    assert 19.3 - float(t[strip].mean()) > 0.25  # its mean alone would pass the 0.25 K threshold
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": 0.01}))
    assert len(res.anomalies) == 1 and res.anomalies[0].area_px == int((d == 1).sum())


def test_region_drawn_wider_than_the_defect_is_measured_at_half_contrast():
    # a segmentation hands the jump band to the region: the labels are 2 px wider on every side
    # than the 30 × 40 px defect; the measured extent stops at the half-contrast edge
    t, d_true = _square_scene(box=(40, 70, 60, 100), delta=-2.0)
    d = np.zeros(t.shape, int)
    d[38:72, 58:102] = 1
    t[38:40, 58:102] = t[70:72, 58:102] = 18.0 - 0.5  # the outer band holds a quarter of the contrast
    t[38:72, 58:60] = t[38:72, 100:102] = 18.0 - 0.5
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": 0.01}))
    (a,) = res.anomalies
    assert a.area_px == 30 * 40 and int((res.labels == 1).sum()) == 30 * 40
    assert (a.bbox_row0, a.bbox_col0, a.bbox_row1, a.bbox_col1) == (40, 60, 70, 100)
    assert a.delta_k == pytest.approx(-2.0, abs=1e-9)
    # the heat of the outer band still counts: h·(2 K·1200 px + 0.5 K·(34·44 − 1200) px)·A_px
    band_px = 34 * 44 - 30 * 40
    assert a.excess_w == pytest.approx(res.h_w_m2k * (2.0 * 1200 + 0.5 * band_px) * 1e-4, rel=1e-9)
