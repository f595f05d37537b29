"""Cause rules on synthetic patterns with known meaning.

Signatures, inside view in the heating season: studs/joists are regular stripes at
about 400-600 mm centres [CP]; missing insulation in a frame bay is a sharp-edged cold
rectangle bounded by studs (ASTM C1060, scope) [V]; air leakage gives streaks or fans
spreading from joints with diffuse edges (practitioner guidance) [CP]; wet roof
insulation stays warmer at night after a sunny day (ASTM C1153, scope) [V].
"""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg
from scipy import ndimage

from irseg.analysis import CAUSES, analyse

PIXEL_M = 0.01  # 10 mm per pixel


def _wall(shape=(120, 240), base=18.5):
    return np.full(shape, base), np.zeros(shape, int)


def _studs(t, d, *, cols, width=5, delta=-0.8, rows=slice(None)):
    for c in cols:
        t[rows, c:c + width] += delta
        d[rows, c:c + width] = 1


def _run(t, d, *, u=None, noise=0.03, seed=3, **meta_sections):
    meta_sections.setdefault("camera", {"pixel_m": PIXEL_M})
    t_noisy = t + np.random.default_rng(seed).normal(0.0, noise, t.shape)
    res = analyse(make_frame(t_noisy), make_seg(d, u=t if u is None else u), make_meta(**meta_sections))
    for a in res.anomalies:
        assert a.cause in CAUSES and a.reason
    return res


def _at(res, row, col):
    k = int(res.labels[row, col])
    assert k > 0, "no anomaly at that pixel"
    return res.anomalies[k - 1]


def test_stud_pattern_is_one_framing_anomaly_and_the_bay_is_missing_insulation():
    t, d = _wall()
    _studs(t, d, cols=range(20, 240, 40))  # 50 mm members at 400 mm centres [CP]
    t[20:100, 105:140] -= 3.0  # empty bay between the studs at 100 and 140
    d[20:100, 105:140] = 2
    res = _run(t, d)
    # regular framing is summarised: one anomaly (one id in the label image) for all six members
    (studs,) = [a for a in res.anomalies if a.cause == "thermal_bridge"]
    assert studs.area_px == 6 * 120 * 5
    assert "6 parallel" in studs.reason and "0.40 m" in studs.reason and "summarised" in studs.reason
    # the crew must read regular framing as normal construction (common practice: normal if regular)
    assert "expected in framed construction" in studs.reason
    assert set(np.unique(res.labels[:, [22, 62, 102, 142, 182, 222]])) == {studs.anomaly}
    # its length is the members' lengths summed: 6 × 120 px × 10 mm
    assert studs.length_m == pytest.approx(6 * 1.2, rel=0.02)
    bay = _at(res, 60, 120)
    assert bay.cause == "missing_insulation", bay.reason
    assert bay.length_m is None and bay.psi_w_mk is None  # an area anomaly has no length
    assert bay.severity == 1


def test_short_members_count_as_framing_only_when_regularly_spaced():
    # 20 px tall, 6 px wide: too stubby for a lone band, a thermal bridge as part of a regular set
    # (air temperatures unknown, so the weak-contrast rule for short bands does not apply)
    no_air = {"inside_c": None, "outside_c": None}
    t, d = _wall()
    _studs(t, d, cols=(30, 80, 130, 180), width=6, rows=slice(50, 70), delta=-1.0)
    res = _run(t, d, air=no_air)
    (framing,) = res.anomalies
    assert framing.cause == "thermal_bridge" and "4 parallel" in framing.reason
    assert framing.psi_w_mk is None  # no inside-outside difference: no psi
    t1, d1 = _wall()
    _studs(t1, d1, cols=(80,), width=6, rows=slice(50, 70), delta=-1.0)
    (lone,) = _run(t1, d1, air=no_air).anomalies
    assert lone.cause != "thermal_bridge"


def test_two_members_at_a_framing_centre_are_one_set_but_not_at_twice_it():
    # 600 mm is a usual stud centre (common practice); 1.2 m is not
    for cols, n in (((60, 120), 1), ((60, 180), 2)):
        t, d = _wall()
        _studs(t, d, cols=cols, width=6)
        res = _run(t, d)
        assert len(res.anomalies) == n
        assert all(a.cause == "thermal_bridge" for a in res.anomalies)


def test_a_member_clearly_colder_than_its_neighbours_stays_its_own_anomaly():
    t, d = _wall()
    _studs(t, d, cols=range(20, 240, 40), width=5, delta=-0.8)
    t[:, 140:145] -= 1.2  # this one 2 K colder: insulation missing beside it, not regular framing
    res = _run(t, d)
    framing = [a for a in res.anomalies if "summarised" in a.reason]
    assert len(framing) == 1 and "5 parallel" in framing[0].reason
    lone = _at(res, 60, 142)
    assert lone is not framing[0] and "expected in framed construction" not in lone.reason


def test_short_weak_band_is_a_member_but_a_strong_one_is_a_void():
    # a 0.75 m × 0.2 m horizontal band: at 0.8 K of 24 K a timber header (softwood λ 0.13, EN 12524
    # table at 500 kg/m³ [V], against a typical 0.035 for mineral wool [CP]), at 3.5 K an empty strip
    # such as settled fill (ASTM C1060, scope [V])
    air = {"inside_c": 21.0, "outside_c": -3.0}
    for delta, cause in ((-0.8, "thermal_bridge"), (-3.5, "missing_insulation")):
        t, d = _wall()
        t[20:40, 60:135] += delta
        d[20:40, 60:135] = 1
        (a,) = _run(t, d, air=air).anomalies
        assert a.cause == cause, a.reason


def test_irregular_spacing_is_not_reported_as_a_regular_set():
    t, d = _wall()
    _studs(t, d, cols=(20, 45, 130, 150), width=6, rows=slice(50, 70), delta=-1.0)
    res = _run(t, d)
    assert all("parallel" not in a.reason for a in res.anomalies)


@pytest.mark.parametrize(
    "rows, cols, delta, cause, word",
    [
        # a horizontal slab-edge / lintel band, 80 mm tall across the wall: never missing insulation
        pytest.param(slice(60, 68), slice(10, 230), -1.5, "thermal_bridge", "band", id="lone-long-narrow-band"),
        # 0.8 K at 20 K inside-outside: partial-depth void (0.04 < 0.10 of the difference)
        pytest.param(slice(30, 90), slice(60, 120), -0.8, "missing_insulation", "partial", id="weak-compact-void"),
    ],
)
def test_single_cold_patch_cause(rows, cols, delta, cause, word):
    t, d = _wall()
    t[rows, cols] += delta
    d[rows, cols] = 1
    (a,) = _run(t, d).anomalies
    assert a.cause == cause and word in a.reason


def _fan(shape=(120, 240), apex=(118, 60), depth=3.0, half_angle_deg=22.0, decay_px=45.0):
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    dr, dc = apex[0] - rows, cols - apex[1]  # fan opens upwards from a skirting joint
    ang = np.degrees(np.arctan2(dc, dr))
    dist = np.hypot(dr, dc)
    wedge = (np.abs(ang - 20.0) <= half_angle_deg) & (dr >= 0)
    return np.where(wedge, -depth * np.exp(-dist / decay_px), 0.0)


def test_diffuse_fan_from_a_joint_is_air_leakage():
    contrast = ndimage.gaussian_filter(_fan(), 3.0)  # diffuse edges
    t = 18.5 + contrast
    d = (contrast < -0.4).astype(int)
    (a,) = _run(t, d, noise=0.02).anomalies
    assert a.kind == "cold"
    assert a.cause == "air_leakage", a.reason


def test_decaying_streak_is_air_leakage_not_a_thermal_bridge():
    # a straight finger whose contrast fades away from the joint it starts at
    t, d = _wall()
    prof = -2.5 * np.exp(-np.arange(100) / 35.0)
    t[10:110, 100:108] += prof[::-1, None]
    d[10:110, 100:108] = 1
    t = ndimage.gaussian_filter(t, 1.5)
    (a,) = _run(t, d, noise=0.02).anomalies
    assert a.cause == "air_leakage", a.reason


def test_warm_patch_on_a_roof_at_night_is_moisture():
    rows, cols = np.mgrid[0:120, 0:240]
    blob = ((rows - 60) / 30.0) ** 2 + ((cols - 110) / 55.0) ** 2 < 1.0
    t = np.full((120, 240), -2.0) + 1.5 * blob
    roof = {"surface": {"view": "roof", "reflected_c": -20.0}, "air": {"inside_c": 20.0, "outside_c": 2.0, "wind_m_s": 1.0}}
    (a,) = _run(t, blob.astype(int), **roof).anomalies
    assert a.kind == "warm" and a.cause == "moisture", a.reason
    assert a.excess_w is not None and a.excess_w > 0  # warm from outside = heat loss


def test_sharp_cold_rectangle_on_a_roof_is_not_moisture():
    t = np.full((120, 240), -2.0)
    d = np.zeros((120, 240), int)
    t[40:80, 100:160] -= 1.0
    d[40:80, 100:160] = 1
    (a,) = _run(t, d, surface={"view": "roof"}, air={"inside_c": 20.0, "outside_c": 2.0, "wind_m_s": 1.0}).anomalies
    assert a.cause == "unclassified" and "low-emissivity" in a.reason
    assert a.excess_w is None


def test_roof_patch_colder_than_the_sky_limit_is_unclassified():
    # zero-conduction equilibrium (h_c·T_air + h_r·T_sky)/(h_c + h_r): about −6 °C for air 0 °C, sky −20 °C, 1 m/s
    rows, cols = np.mgrid[0:120, 0:240]
    blob = ((rows - 60) / 30.0) ** 2 + ((cols - 110) / 55.0) ** 2 < 1.0
    t = np.full((120, 240), -3.0) - 6.0 * blob
    roof = {"surface": {"view": "roof", "reflected_c": -20.0}, "air": {"inside_c": 20.0, "outside_c": 0.0, "wind_m_s": 1.0}}
    (a,) = _run(t, blob.astype(int), **roof).anomalies
    assert a.cause == "unclassified" and "conduction cannot explain" in a.reason


def test_wrong_sign_is_unclassified_with_a_reason():
    t, d = _wall()
    t[30:90, 60:120] += 2.0
    d[30:90, 60:120] = 1
    (a,) = _run(t, d).anomalies
    assert a.kind == "warm" and a.cause == "unclassified" and "inside" in a.reason
    t2, d2 = _wall(base=3.0)
    t2[30:90, 60:120] -= 1.0
    d2[30:90, 60:120] = 1
    ext = {"surface": {"view": "exterior"}, "air": {"inside_c": 20.0, "outside_c": 2.0, "wind_m_s": 1.0}}
    (b,) = _run(t2, d2, **ext).anomalies
    assert b.kind == "cold" and b.cause == "unclassified" and "outside" in b.reason


@pytest.mark.parametrize("view", ["exterior", "interior"])
def test_expected_sign_compact_area_is_missing_insulation_from_either_side(view):
    sign = -1.0 if view == "interior" else 1.0
    t, d = _wall(base=18.5 if view == "interior" else 3.0)
    t[30:90, 60:120] += sign * 2.0
    d[30:90, 60:120] = 1
    (a,) = _run(t, d, surface={"view": view}, air={"inside_c": 20.0, "outside_c": 2.0, "wind_m_s": 1.0}).anomalies
    assert a.cause == "missing_insulation", a.reason
    assert a.kind == ("cold" if view == "interior" else "warm")


def test_stud_interrupted_by_a_defect_stays_a_thermal_bridge():
    # the empty bay crosses one member: the short pieces above and below lie on its line
    t, d = _wall()
    _studs(t, d, cols=range(20, 240, 40), width=8)
    t[20:100, 96:140] = 18.5 - 3.0
    d[20:100, 96:140] = 2
    res = _run(t, d)
    assert _at(res, 60, 120).cause == "missing_insulation"
    # the pieces of the member at columns 100-107 above and below the bay belong to the framing anomaly
    top, bottom = _at(res, 10, 103), _at(res, 110, 103)
    assert top is bottom is _at(res, 60, 22)
    assert top.area_px == 5 * 120 * 8 + 2 * 20 * 8 and top.cause == "thermal_bridge" and "6 parallel" in top.reason
    assert (top.bbox_row0, top.bbox_row1) == (0, 120)
    assert len(res.anomalies) == 2  # the framing and the bay


def test_lone_member_on_a_stratified_wall_is_still_a_uniform_band():
    # 2 K of stratification along the member must not read as a fading streak
    rows = np.mgrid[0:120, 0:240][0]
    t = 17.5 + 2.0 * rows / 120
    d = np.zeros(t.shape, int)
    t[:, 100:110] -= 0.8
    d[:, 100:110] = 1
    (a,) = _run(t, d).anomalies
    assert a.cause == "thermal_bridge", a.reason


def test_fragmented_members_are_merged_into_one_anomaly():
    # a segmentation that breaks each member into pieces: one framing anomaly, heat summed
    t, d = _wall()
    _studs(t, d, cols=(40, 100, 160), width=8, delta=-1.0)
    labels = d.copy()
    for k, gap_row in enumerate((30, 60, 90)):  # cut every member at three rows (1 px of "background" label)
        labels[gap_row, :] = np.where(d[gap_row, :] == 1, 0, labels[gap_row, :])
    res = _run(t, labels)
    (merged,) = res.anomalies
    assert merged.cause == "thermal_bridge" and "3 parallel" in merged.reason
    assert merged.area_px == 3 * (120 - 3) * 8
    # the cut rows do not shorten the members: the length is the union of the pieces along each member
    assert merged.length_m == pytest.approx(3 * 1.2, rel=0.03)
    (whole,) = _run(t, d).anomalies
    assert merged.excess_w == pytest.approx(whole.excess_w, rel=0.03)


def test_empty_bays_side_by_side_are_not_a_framing_set():
    # three elongated empty bays at regular spacing, no geometry: wide against their spacing,
    # so not members (studs are 45-100 mm at 400-600 mm centres [CP])
    t, d = _wall()
    for k, c in enumerate((20, 90, 160), start=1):
        t[10:110, c:c + 38] -= 3.0
        d[10:110, c:c + 38] = k
    res = _run(t, d, camera={"pixel_m": None, "hfov_deg": None, "distance_m": None})
    assert len(res.anomalies) == 3
    assert {a.cause for a in res.anomalies} == {"missing_insulation"}


def test_lone_member_cut_into_pieces_is_one_band():
    # two members only (no regular set): each cut into four pieces by the segmentation
    t, d = _wall()
    _studs(t, d, cols=(60, 180), width=8, delta=-0.8)
    labels = d.copy()
    for gap_row in (25, 55, 85):
        labels[gap_row, :] = np.where(d[gap_row, :] == 1, 0, labels[gap_row, :])
    res = _run(t, labels)
    assert len(res.anomalies) == 2
    for a in res.anomalies:
        assert a.cause == "thermal_bridge" and "in 4 pieces" in a.reason, a.reason


def test_member_running_behind_a_header_stays_one_band():
    # a vertical member interrupted for 32 px (> 3 widths + 4 px) by a 0.32 m × 1 m header covering the gap
    t, d = _wall()
    t[:, 150:158] -= 0.8
    d[:, 150:158] = 1
    t[35:67, 110:210] = 18.5 - 1.0  # the header (weaker than a cavity, wider than the member)
    d[35:67, 110:210] = 2
    res = _run(t, d, air={"inside_c": 21.0, "outside_c": -3.0})
    top, bottom = _at(res, 10, 153), _at(res, 100, 153)
    assert top is bottom and top.cause == "thermal_bridge"
    assert _at(res, 50, 120).cause == "thermal_bridge"  # the header: a weak short band


def test_small_spot_is_not_called_missing_insulation():
    # 60 mm across at 10 mm/px: a fixing or a tie as likely as a gap (wall ties: dot grid [CP])
    t, d = _wall()
    t[50:56, 100:106] -= 2.0
    d[50:56, 100:106] = 1
    (a,) = _run(t, d).anomalies
    assert a.cause == "unclassified" and "too small" in a.reason


def test_a_set_with_a_member_hidden_by_a_window_is_still_one_framing_anomaly():
    # studs at 400 mm centres [CP], the one at column 100 missing (cut out for an opening)
    t, d = _wall()
    _studs(t, d, cols=(20, 60, 140, 180, 220), width=5)
    res = _run(t, d)
    (framing,) = res.anomalies
    assert "5 parallel" in framing.reason and "0.40 m" in framing.reason
    # gaps of 0.4 and 0.6 m are not one spacing: no set
    t2, d2 = _wall()
    _studs(t2, d2, cols=(20, 60, 120, 160, 220), width=5)
    assert all("summarised" not in a.reason for a in _run(t2, d2).anomalies)


def test_a_member_touching_an_area_of_its_temperature_stays_in_the_framing_anomaly():
    # a weak cold area (a partly filled bay) touching one member at the same contrast: the member is not
    # that area's fragment; the six members stay one framing anomaly [CP: regular framing is construction]
    t, d = _wall()
    _studs(t, d, cols=range(20, 240, 40), width=5, delta=-0.8)
    t[10:110, 145:175] -= 0.75
    d[10:110, 145:175] = 2
    res = _run(t, d)
    framing = [a for a in res.anomalies if "summarised" in a.reason]
    assert len(framing) == 1 and "6 parallel" in framing[0].reason, [a.reason for a in res.anomalies]


def test_theil_sen_slope_and_top_outline_agree_with_their_reference_forms():
    # reference library: scipy.stats.theilslopes (its slope, the median of the pairwise slopes); the
    # top outline of a region is the smallest row of each column (NumPy's minimum.at, common practice)
    from scipy.stats import theilslopes

    from irseg.analysis._shape import _theil_sen_slope, _upper_roughness

    rng = np.random.default_rng(8)
    for n in (2, 3, 10, 57, 200):
        x = np.sort(rng.choice(500, n, replace=False)).astype(float)
        y = 0.3 * x + rng.normal(0.0, 2.0, n)
        y[::7] = np.round(y[::7])  # some repeated values
        assert _theil_sen_slope(y, x) == float(theilslopes(y, x)[0])
    # a wavy tide line: the same roughness from the pixels in raster order and shuffled
    rows, cols = np.mgrid[:60, :90]
    region = rows >= 30 + np.round(4.0 * np.sin(cols / 5.0))
    rr, cc = np.nonzero(region)
    perm = rng.permutation(rr.size)
    rough = _upper_roughness(rr, cc)
    assert rough == _upper_roughness(rr[perm], cc[perm])
    top = np.full(90, 10**9)
    np.minimum.at(top, cc, rr)
    inner = top[9:-9].astype(float)
    line = np.arange(9, 81, dtype=float)
    slope = float(theilslopes(inner, line)[0])
    r = inner - slope * line
    r = r - np.median(r)
    expected = 1.4826 * float(np.median(np.abs(r - np.median(r))))  # [CP] 1.4826·MAD
    assert rough == pytest.approx(expected, rel=1e-4)
    assert rough > 1.0  # [C] a 4-px sine wave about a straight line: MAD·1.4826 of its samples
