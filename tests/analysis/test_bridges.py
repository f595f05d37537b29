"""Linear thermal bridges (length, ψ), heat emitters and glazing (issue 12).

ψ is the extra heat flow of a linear bridge per metre and per kelvin of inside-outside
difference (ISO 14683:2017, clause 3, definition of linear thermal transmittance; ISO 10211:2017
for its calculation) [from memory]. From surface temperatures the extra flow is
h·∫(T_ref − T_s)dA over the bridge's footprint ("incidence factor" approach of quantitative
thermography of thermal bridges: Asdrubali, Baldinelli & Bianchi, Applied Energy 2012) [from memory].
"""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg

from irseg.analysis import analyse

PIXEL_M = 0.01
AIR = {"inside_c": 20.0, "outside_c": 0.0, "wind_m_s": 1.0}


def _run(t, d, *, seed=5, noise=0.03, **sections):
    sections.setdefault("camera", {"pixel_m": PIXEL_M})
    sections.setdefault("air", AIR)
    tn = t + np.random.default_rng(seed).normal(0.0, noise, t.shape)
    return analyse(make_frame(tn), make_seg(d, u=t), make_meta(**sections))


def test_psi_of_a_uniform_band_is_its_excess_per_metre_and_kelvin():
    # a horizontal band 80 mm tall across a 2.4 m wall, 1.0 K colder than the sound wall, from inside
    t = np.full((120, 240), 18.5)
    d = np.zeros(t.shape, int)
    t[60:68, :] -= 1.0
    d[60:68, :] = 1
    (a,) = _run(t, d).anomalies
    assert a.cause == "thermal_bridge"
    assert a.length_m == pytest.approx(2.4, rel=0.01)
    # ψ = Q / (L·ΔT) exactly as defined (ISO 14683 clause 3) [from memory]
    assert a.psi_w_mk == pytest.approx(a.excess_w / (a.length_m * 20.0), rel=1e-9)
    # and ≈ h·ΔT_s·width / (T_i − T_e) for a uniform band (the incidence-factor integral) [C: physics]
    res = _run(t, d)
    assert a.psi_w_mk == pytest.approx(res.h_w_m2k * 1.0 * 0.08 / 20.0, rel=0.10)
    assert a.psi_low_w_mk < a.psi_w_mk < a.psi_high_w_mk


def test_area_anomaly_has_no_length_or_psi():
    t = np.full((120, 240), 18.5)
    d = np.zeros(t.shape, int)
    t[30:90, 60:120] -= 2.0
    d[30:90, 60:120] = 1
    (a,) = _run(t, d).anomalies
    assert a.cause == "missing_insulation"
    assert (a.length_m, a.psi_w_mk, a.psi_low_w_mk, a.psi_high_w_mk) == (None, None, None, None)


def _wall_with_defect(radiator: bool):
    t = np.full((160, 320), 18.5)
    d = np.zeros(t.shape, int)
    t[40:120, 40:100] -= 3.0  # missing insulation
    d[40:120, 40:100] = 1
    if radiator:  # a radiator at 50 °C beside it: warmer than the inside air, so a heat source
        t[90:140, 170:280] = 50.0
        d[90:140, 170:280] = 2
    return t, d


def test_radiator_is_a_heat_source_and_leaves_a_defect_beside_it_unchanged():
    plain = _run(*_wall_with_defect(False))
    with_rad = _run(*_wall_with_defect(True))
    (defect,) = [a for a in plain.anomalies if a.cause == "missing_insulation"]
    (beside,) = [a for a in with_rad.anomalies if a.cause == "missing_insulation"]
    (source,) = [a for a in with_rad.anomalies if a.kind == "warm"]
    assert source.cause == "unclassified" and source.reason.startswith("heat source")
    assert source.excess_w is None
    # issue 12 target: the defect keeps its contrast and heat within 5 % [common practice: the target]
    assert beside.delta_k == pytest.approx(defect.delta_k, rel=0.05)
    assert beside.excess_w == pytest.approx(defect.excess_w, rel=0.05)
    # the emitter's pixels never serve as sound reference
    assert np.isnan(with_rad.reference_c[110, 220])
    assert set(np.unique(with_rad.labels[100:130, 180:270])) == {source.anomaly}


def test_cold_pane_seen_from_outside_is_likely_glazing():
    t = np.full((120, 240), 3.0)
    d = np.zeros(t.shape, int)
    t[30:90, 80:160] -= 2.0  # glass (emissivity about 0.84) reflecting a cold sky
    d[30:90, 80:160] = 1
    (a,) = _run(t, d, surface={"view": "exterior"}).anomalies
    assert a.cause == "unclassified" and "likely glazing: confirm or exclude with a zone" in a.reason


def test_a_wall_warmer_than_the_inside_air_is_a_metadata_warning_not_a_heat_source():
    # seen from inside in the heating season a wall is colder than the room (heat flows into it, ISO 6946
    # surface resistance R_si > 0) [C: physics]: warmer over most of the frame means inside_c is wrong
    t, d = _wall_with_defect(False)
    res = _run(t, d, air={"inside_c": 14.0, "outside_c": 0.0, "wind_m_s": 1.0})
    assert not any(a.reason.startswith("heat source") for a in res.anomalies)
    assert any("inside air temperature" in w for w in res.warnings)
    assert any(a.cause == "missing_insulation" for a in res.anomalies)


def test_a_framed_pane_seen_from_inside_is_likely_glazing_and_a_void_is_not():
    # a window: the frame and glass edge (rim, 0.06 m) colder than the middle of the glass; a void:
    # strongest in its middle (lateral conduction weakens its rim) [C: conduction]
    def wall(rim_k, middle_k):
        t = np.full((160, 240), 19.0)
        d = np.zeros(t.shape, int)
        t[30:130, 60:180] -= rim_k
        t[36:124, 66:174] += rim_k - middle_k
        d[30:130, 60:180] = 1
        return t, d
    (pane,) = _run(*wall(3.5, 2.0)).anomalies
    assert pane.cause == "unclassified" and pane.reason.startswith("likely glazing: confirm or exclude with a zone")
    assert pane.excess_w is None and pane.mould_risk is None
    (void,) = _run(*wall(2.6, 3.0)).anomalies
    assert void.cause == "missing_insulation", void.reason


def test_a_window_cut_into_frame_bars_and_glass_is_glazing_as_a_whole():
    # seen from outside: the frame (emissivity 0.9) warmer than the glass, which reflects the cold sky
    # (glass about 0.84, common practice) [C: radiometry]; the segmentation cuts the bars and the glass apart
    t = np.full((160, 240), 3.0)
    d = np.zeros(t.shape, int)
    t[30:130, 60:180] += 2.4  # frame, 70 mm
    t[37:123, 67:173] -= 1.2  # glass less warm than the frame
    d[30:37, 60:180], d[123:130, 60:180] = 1, 2
    d[37:123, 60:67], d[37:123, 173:180] = 3, 4
    d[37:123, 67:173] = 5
    res = _run(t, d, surface={"view": "exterior"})
    assert res.anomalies and all(a.cause == "unclassified" and "likely glazing" in a.reason for a in res.anomalies)
    assert all(a.excess_w is None for a in res.anomalies)
    # the same rectangle without a frame (a missing board, uniform) stays missing insulation
    t2 = np.full((160, 240), 3.0)
    t2[30:130, 60:180] += 2.0
    d2 = np.zeros(t.shape, int)
    d2[30:130, 60:180] = 1
    (board,) = _run(t2, d2, surface={"view": "exterior"}).anomalies
    assert board.cause == "missing_insulation", board.reason


def test_emitter_fill_reproduces_a_harmonic_surface():
    # a plane and x² − y² satisfy Laplace's equation (the 5-point stencil exactly): the fill over a hole
    # must give them back [C: mathematics]
    from irseg.analysis._emitters import fill_emitters

    rows, cols = np.mgrid[0:60, 0:80].astype(float)
    hole = np.zeros(rows.shape, bool)
    hole[20:40, 25:60] = True
    for field in (18.0 + 0.02 * rows - 0.01 * cols, 0.001 * ((cols - 40) ** 2 - (rows - 30) ** 2)):
        damaged = np.where(hole, 50.0, field)
        assert np.allclose(fill_emitters(damaged, hole), field, atol=1e-9)


# --------------------------------------------------------------------------- geometric bridges


def _cusp(cols: np.ndarray, centre: float, left_m: float, right_m: float, peak_k: float) -> np.ndarray:
    """An exponential fall-off to each side of a line: the shape 2-D conduction gives round a corner
    (the contrast decays about exponentially with distance from it, a few wall thicknesses) [C: physics]."""
    x = (cols - centre) * PIXEL_M
    lam = np.where(x < 0, left_m, right_m)
    return peak_k * np.exp(-np.abs(x) / lam)


def _corner_image(left_m=0.08, right_m=0.08, peak_k=1.0):
    cols = np.arange(240, dtype=float)
    t = np.tile(18.5 - _cusp(cols, 120.0, left_m, right_m, peak_k), (160, 1))
    d = np.zeros(t.shape, int)
    d[:, 114:127] = 1
    return t, d


def test_a_corner_in_the_middle_of_the_frame_is_a_geometric_bridge_with_psi_against_the_plane_wall():
    t, d = _corner_image()
    res = _run(t, d)
    (a,) = [x for x in res.anomalies if x.cause == "thermal_bridge"]
    assert not [x for x in res.anomalies if x.cause in ("missing_insulation", "moisture", "air_leakage")]
    assert "geometric thermal bridge" in a.reason and "corner" in a.reason
    assert a.length_m == pytest.approx(1.6, rel=0.02)
    # ψ = h·∫ΔT dx / (T_i − T_e), ∫ over both sides of A·exp(−|x|/λ) = 2·A·λ (less the part beyond the
    # 0.6 m read on each side and the far ends taken as the plane wall: about 1 %) [C: physics]
    assert a.psi_w_mk == pytest.approx(res.h_w_m2k * 2 * 1.0 * 0.08 / 20.0, rel=0.05)


def test_a_corner_seen_at_45_degrees_keeps_its_length_and_a_stud_does_not():
    # the faces of a corner are foreshortened across its line, so the line keeps its length; the
    # project's tilt stretches a vertical band by 1/cos θ otherwise (docs/analysis.md §3.3)
    t, d = _corner_image()
    (a,) = [x for x in _run(t, d, camera={"pixel_m": PIXEL_M, "tilt_deg": 45.0}).anomalies
            if x.cause == "thermal_bridge"]
    assert a.length_m == pytest.approx(1.6, rel=0.02)
    s = np.full((160, 240), 18.5)
    ds = np.zeros(s.shape, int)
    s[:, 116:124] -= 1.0  # a uniform member 80 mm wide, sharp-edged
    ds[:, 116:124] = 1
    (b,) = _run(s, ds, camera={"pixel_m": PIXEL_M, "tilt_deg": 45.0}).anomalies
    assert b.cause == "thermal_bridge" and "geometric" not in b.reason
    assert b.length_m == pytest.approx(1.6 * 2 ** 0.5, rel=0.02)


def test_plateaus_steps_and_lopsided_bands_are_not_geometric():
    from irseg.analysis._bridges import geometric_profile
    from irseg.analysis._shape import Shape

    def shape(width_px):
        return Shape(area_px=160 * width_px, perimeter_px=340, length_px=160.0, width_px=float(width_px),
                     elongation=160.0 / width_px, rect_fill=0.95, solidity=0.95, orientation_deg=90.0,
                     centroid_row=79.5, centroid_col=120.0, transition_px=3.0, nonuniformity=0.1, taper=1.0)

    cols = np.arange(240, dtype=float)
    cusp = np.tile(18.5 - _cusp(cols, 120.0, 0.08, 0.08, 1.0), (160, 1))
    assert geometric_profile(cusp, shape(12), loss_sign=1.0, pixel_m=PIXEL_M) is not None
    # an empty bay 0.4 m wide: a plateau ending in edges
    bay = np.full((160, 240), 18.5)
    bay[:, 100:140] -= 2.0
    assert geometric_profile(bay, shape(40), loss_sign=1.0, pixel_m=PIXEL_M) is None
    # a blurred member: half its peak at its edge, nothing left at twice that
    from scipy import ndimage

    member = ndimage.gaussian_filter1d(np.where(np.abs(cols - 120) < 5, -1.0, 0.0), 1.5)
    assert geometric_profile(np.tile(18.5 + member, (160, 1)), shape(10), loss_sign=1.0, pixel_m=PIXEL_M) is None
    # one side four times as long as the other: not the even fall-off of a corner of one wall
    lop = np.tile(18.5 - _cusp(cols, 120.0, 0.03, 0.12, 1.0), (160, 1))
    assert geometric_profile(lop, shape(12), loss_sign=1.0, pixel_m=PIXEL_M) is None
    # a band not across the whole frame
    from dataclasses import replace

    assert geometric_profile(cusp, replace(shape(12), length_px=80.0), loss_sign=1.0, pixel_m=PIXEL_M) is None
    assert geometric_profile(cusp, shape(12), loss_sign=1.0, pixel_m=None) is None


def test_a_geometric_profile_wins_over_the_missing_insulation_rule():
    # a broad corner can measure as a compact area (solidity and fill high, elongation low): its
    # cross-profile decides, so it is a thermal bridge, never missing insulation (issue 12)
    from irseg.analysis._bridges import GeometricProfile
    from irseg.analysis._classify import GEOMETRIC_REASON, classify_cause
    from irseg.analysis._shape import Shape

    wide = Shape(area_px=160 * 60, perimeter_px=440, length_px=160.0, width_px=60.0, elongation=160 / 60,
                 rect_fill=0.95, solidity=0.97, orientation_deg=90.0, centroid_row=79.5, centroid_col=120.0,
                 transition_px=9.0, nonuniformity=0.2, taper=1.0)
    kw = dict(kind="cold", view="interior", delta_k=-0.6, mean_c=18.0, threshold_k=0.2, pixel_m=PIXEL_M,
              regular_set=None, delta_air_k=20.0, sky_limit_c=None)
    assert classify_cause(wide, **kw)[0] == "missing_insulation"
    cause, reason = classify_cause(wide, geometric=GeometricProfile((0.25, 0.3), 0.8, 1000.0), **kw)
    assert cause == "thermal_bridge" and GEOMETRIC_REASON in reason


def _band_shape(width_px=10):
    from irseg.analysis._shape import Shape

    return Shape(area_px=240 * width_px, perimeter_px=500, length_px=240.0, width_px=float(width_px),
                 elongation=240.0 / width_px, rect_fill=0.95, solidity=0.95, orientation_deg=0.0,
                 centroid_row=80.0, centroid_col=119.5, transition_px=6.0, nonuniformity=0.1, taper=1.0)


def _slab_edge(lam_m=0.05, peak_k=1.0, gradient_k_px=0.0):
    # a horizontal bridge from outside (warm) with exponential tails A·exp(−|y|/λ) on a wall with a
    # linear gradient up the frame
    rows = np.arange(160, dtype=float)[:, None]
    t = 2.0 + gradient_k_px * rows + peak_k * np.exp(-np.abs(rows - 80.0) * PIXEL_M / lam_m)
    return np.tile(t, (1, 240))


def test_a_straight_band_counts_its_whole_cross_profile_against_the_plane_wall():
    from irseg.analysis._bridges import straight_band_loss

    # Σ_y A·exp(−|y|·p/λ) over the read, the far ends as the plane wall (their excess, e^{-0.6/0.05}, is
    # nil): the extra heat of the bridge over the 1-D flow of the wall, ISO 14683 / ISO 10211's
    # meaning of ψ [from memory]; the sum is exact [C: geometric series]
    y = np.arange(-56, 57)
    exact = 240 * float(np.exp(-np.abs(y) * PIXEL_M / 0.05).sum())
    got = straight_band_loss(_slab_edge(), _band_shape(), (0, 239), loss_sign=-1.0, pixel_m=PIXEL_M)
    assert got == pytest.approx(exact, rel=0.01)
    # a wall's linear gradient (0.3 K/m, a room's stratification: common practice) is the plane
    # wall's own: the straight baseline cancels it [C: physics]
    tilted = straight_band_loss(_slab_edge(gradient_k_px=0.003), _band_shape(), (0, 239), loss_sign=-1.0,
                                pixel_m=PIXEL_M)
    assert tilted == pytest.approx(exact, rel=0.01)
    # the half-peak band alone holds far less: A·2·λ·ln2 of the 2·A·λ (ln 2 ≈ 0.69) [C: physics]
    half = 240 * float(np.exp(-np.abs(np.arange(-3, 4)) * PIXEL_M / 0.05).sum())
    assert half < 0.75 * got
    assert straight_band_loss(_slab_edge(), _band_shape(), (0, 239), loss_sign=-1.0, pixel_m=None) is None


def test_a_member_crossing_the_band_is_its_own_plane_and_adds_nothing():
    from irseg.analysis._bridges import straight_band_loss

    # a timber header crossed by a stud: where the stud runs, the header is no colder than the stud
    # (same timber), so the extra heat over the stud's columns is nil [C: physics]
    t = 18.5 - _slab_edge() + 2.0  # from inside: a cold band
    stud = np.zeros(t.shape, bool)
    stud[:, 100:110] = True
    t[stud] = 18.5 - 1.0
    whole = straight_band_loss(18.5 - _slab_edge() + 2.0, _band_shape(), (0, 239), loss_sign=1.0, pixel_m=PIXEL_M)
    crossed = straight_band_loss(t, _band_shape(), (0, 239), loss_sign=1.0, pixel_m=PIXEL_M)
    assert crossed == pytest.approx(whole * 230 / 240, rel=0.01)


def test_the_cross_profile_stops_where_the_next_feature_begins():
    from irseg.analysis._bridges import straight_band_loss

    # a second warm band 0.30 m below the bridge (a window head): the read stops at the wall between
    # the two, as far on both sides, so the neighbour's heat is not the bridge's [C: physics]
    t = _slab_edge()
    rows = np.arange(160, dtype=float)[:, None]
    t = t + 1.0 * np.exp(-np.abs(rows - 110.0) * PIXEL_M / 0.03)
    got = straight_band_loss(t, _band_shape(), (0, 239), loss_sign=-1.0, pixel_m=PIXEL_M)
    alone = straight_band_loss(_slab_edge(), _band_shape(), (0, 239), loss_sign=-1.0, pixel_m=PIXEL_M)
    assert 0.8 * alone < got < 1.05 * alone


def test_psi_of_a_slab_edge_counts_its_tails():
    # end to end from outside: ψ = h·∫ΔT dy / (T_i − T_e) = h·2·A·λ / ΔT_air, the whole tail [C: physics]
    t = _slab_edge(lam_m=0.04, peak_k=1.0)
    d = np.zeros(t.shape, int)
    d[77:84, :] = 1
    res = _run(t, d, surface={"view": "exterior"})
    (a,) = [x for x in res.anomalies if x.cause == "thermal_bridge"]
    assert a.psi_w_mk == pytest.approx(res.h_w_m2k * 2 * 1.0 * 0.04 / 20.0, rel=0.10)


def test_a_band_whose_profile_the_frame_cuts_is_not_read_against_a_plane_wall():
    from dataclasses import replace

    from irseg.analysis._bridges import straight_band_loss

    # the band 0.10 m from the frame's top edge, its tail (λ = 0.05 m) still falling there: no plane
    # wall in view on that side, so no cross-profile figure (common practice: a reference needs sound
    # surface on both sides)
    t = np.roll(_slab_edge(), -70, axis=0)
    assert straight_band_loss(t, replace(_band_shape(), centroid_row=10.0), (0, 239), loss_sign=-1.0,
                              pixel_m=PIXEL_M) is None



@pytest.mark.parametrize("row", [0.0, 1.0, 2.0, 158.0, 159.0])
def test_a_band_on_the_frame_edge_has_no_cross_profile_figure(row):
    # the band's centre within its half width of the frame's edge: nothing beyond it is in view (an
    # IndexError on a registration test's image before the fix); no plane wall on that side, no figure
    from dataclasses import replace

    from irseg.analysis._bridges import straight_band_loss

    t = np.roll(_slab_edge(), int(row) - 80, axis=0)
    assert straight_band_loss(t, replace(_band_shape(), centroid_row=row), (0, 239), loss_sign=-1.0,
                              pixel_m=PIXEL_M) is None


# --------------------------------------------------------------------------- a lintel over a window head


def _facade_with_window(*, lintel: str | None):
    """A wall seen from outside (3 °C) with a window: frame 70 mm, 2.4 K warmer, the glass 1.2 K less warm
    than the frame (it reflects the sky: emissivity about 0.84, common practice) [C: radiometry]; over its
    head, 30 mm above the frame, a concrete lintel 200 mm deep 0.3 K warmer than the wall ("bearing": on
    0.15 m beyond both jambs, as lintels bear on the wall, at least 100-150 mm [CP]; "head": over the frame
    only). Blurred by a lens of σ 1 px."""
    from scipy import ndimage

    t = np.full((200, 300), 3.0)
    d = np.zeros(t.shape, int)
    t[70:170, 90:210] += 2.4
    t[77:163, 97:203] -= 1.2
    d[70:77, 90:210], d[163:170, 90:210] = 1, 2
    d[77:163, 90:97], d[77:163, 203:210] = 3, 4
    d[77:163, 97:203] = 5
    if lintel == "bearing":
        t[47:67, 75:225] += 0.3
    elif lintel == "head":
        t[47:67, 90:210] += 0.3
    return ndimage.gaussian_filter(t, 1.0), d


def test_a_lintel_over_a_window_head_is_a_thermal_bridge_with_its_length_and_psi():
    t, d = _facade_with_window(lintel="bearing")
    res = _run(t, d, surface={"view": "exterior"}, noise=0.02)
    bridges = [a for a in res.anomalies if a.cause == "thermal_bridge"]
    assert len(bridges) == 1, [(a.cause, a.reason) for a in res.anomalies]
    (b,) = bridges
    assert "lintel over an opening" in b.reason
    # its length: 1.5 m, the window's 1.2 m and 0.15 m of bearing each side [C: the geometry drawn]
    assert b.length_m == pytest.approx(1.5, rel=0.05)
    # it lies over the head: its rows are the band's, 47-66 (half-peak of a blurred step: ±1 px)
    assert 45 <= b.bbox_row0 <= 49 and 65 <= b.bbox_row1 <= 69
    # ψ of a uniform band = h·ΔT_s·depth / (T_i − T_e) (the incidence-factor integral over its
    # cross-profile, the blur moving none of it) [C: physics]
    assert b.psi_w_mk == pytest.approx(res.h_w_m2k * 0.3 * 0.20 / 20.0, rel=0.15)
    # the window stays likely glazing, never a defect
    assert all(a.cause == "unclassified" for a in res.anomalies if a is not b)


@pytest.mark.parametrize("lintel", [None, "head"])
def test_no_lintel_where_no_band_bears_beyond_both_jambs(lintel):
    # a window alone, or a warm band ending at the jambs (a frame head, a blind box): no lintel is made up
    t, d = _facade_with_window(lintel=lintel)
    res = _run(t, d, surface={"view": "exterior"}, noise=0.02)
    assert not [a for a in res.anomalies if "lintel over an opening" in a.reason]
    assert any("likely glazing" in a.reason for a in res.anomalies)


def test_side_loss_reads_each_side_against_its_own_plane():
    # a junction's cross-profile: an exponential fall-off A·exp(−|x|/λ) on a ceiling (flat) and a wall
    # whose loss grows outward by stratification (0.25 K/m), the wall 0.4 K colder than the ceiling: the
    # excess against both planes is 2·A·λ/p (in K·px) [C: ∫ of the exponential]; a straight line between
    # the far ends would cut the wall's gradient away. Within 5 %: the line's own pixel lies on both planes
    # (half the step is taken off it) and the tail's last hundredths stay in the wall's fitted plane
    from irseg.analysis._bridges import _side_loss

    p, lam, amp = 0.01, 0.06, 0.8
    x = np.arange(-60, 61) * p
    q = amp * np.exp(-np.abs(x) / lam) + np.where(x > 0, 0.4 + 0.25 * x, 0.0)
    assert _side_loss(q, 60).sum() == pytest.approx(2 * amp * lam / p, rel=0.05)
    # stratification alone (0.5 K/m down the wall, no step): a straight line between the far ends lies above
    # both planes near the junction and cuts the fall-off by more than a fifth; each side on its own plane does not
    q2 = amp * np.exp(-np.abs(x) / lam) + np.where(x > 0, 0.5 * x, 0.0)
    line = np.linspace(q2[:3].mean(), q2[-3:].mean(), q2.size)
    assert np.clip(q2 - line, 0, None).sum() < 0.8 * 2 * amp * lam / p
    assert _side_loss(q2, 60).sum() == pytest.approx(2 * amp * lam / p, rel=0.05)


def test_the_two_faces_of_a_junction_seen_from_inside_get_their_own_surface_coefficients():
    from irseg.analysis._bridges import side_coefficients
    from irseg.analysis._surface import h_radiative

    h_r = h_radiative(20.0, 0.9)  # the convention's ε 0.9 at 20 °C (ISO 6946:2017 annex) [from memory]
    # looking up into a wall/ceiling junction (the view declared a ceiling): the ceiling above the line,
    # the wall below; R_si 0.10 m²K/W upward and 0.13 horizontal (ISO 6946:2017 Table 7) [from memory]
    above, below = side_coefficients(view="interior", heat_flow="upward", tilt_deg=45.0, h_radiative_w_m2k=h_r)
    assert 1.0 / above == pytest.approx(0.10, abs=0.005)
    assert 1.0 / below == pytest.approx(0.13, abs=0.005)
    # looking down into a wall/floor junction: the wall above, the floor below; R_si 0.17 downward (same table)
    above, below = side_coefficients(view="interior", heat_flow="downward", tilt_deg=45.0, h_radiative_w_m2k=h_r)
    assert 1.0 / above == pytest.approx(0.13, abs=0.005)
    assert 1.0 / below == pytest.approx(0.17, abs=0.005)
    # ambiguous: a wall declared (which face is the wall?), the junction face-on (one face seen), or
    # outside (R_se 0.04 whatever the direction, same table [from memory]): one coefficient
    for kw in ({"heat_flow": "horizontal", "tilt_deg": 45.0}, {"heat_flow": None, "tilt_deg": 45.0},
               {"heat_flow": "upward", "tilt_deg": 0.0}):
        assert side_coefficients(view="interior", h_radiative_w_m2k=h_r, **kw) is None
    assert side_coefficients(view="exterior", heat_flow="upward", tilt_deg=45.0, h_radiative_w_m2k=h_r) is None


def test_each_side_of_a_horizontal_junction_is_weighted_by_its_own_coefficient():
    from dataclasses import replace

    from irseg.analysis._bridges import geometric_profile, side_note

    # the surface balance per side (ISO 6946 annex: q = h·ΔT [C: physics]): Σ h_side·loss_side, read in
    # units of the image's coefficient, so a symmetric junction (the same fall-off both ways) comes out
    # (h_above + h_below) / (2·h_image) times its one-coefficient figure [C: arithmetic]
    rows = np.arange(160, dtype=float)
    t = np.tile((18.5 - _cusp(rows, 80.0, 0.08, 0.08, 1.0))[:, None], (1, 240))
    shape = replace(_band_shape(12), centroid_row=80.0)
    plain = geometric_profile(t, shape, loss_sign=1.0, pixel_m=PIXEL_M)
    h_up, h_wall = 10.1, 7.6
    sided = geometric_profile(t, shape, loss_sign=1.0, pixel_m=PIXEL_M, side_h_w_m2k=(h_up, h_wall), h_w_m2k=h_wall)
    assert plain is not None and sided is not None
    assert sided.loss_sum_kpx == pytest.approx(plain.loss_sum_kpx * (h_up + h_wall) / (2 * h_wall), rel=0.02)
    assert plain.side_h_w_m2k is None and sided.side_h_w_m2k == (h_up, h_wall)
    assert side_note(plain) == "" and "R_si 0.10 and 0.13" in side_note(sided)  # 1/10.1, 1/7.6 [C: arithmetic]
    # the weights follow the rows: the ceiling's side above the line (a longer tail there weighs more)
    lop = np.tile((18.5 - _cusp(rows, 80.0, 0.10, 0.07, 1.0))[:, None], (1, 240))
    up = geometric_profile(lop, shape, loss_sign=1.0, pixel_m=PIXEL_M, side_h_w_m2k=(h_up, h_wall), h_w_m2k=h_wall)
    down = geometric_profile(lop, shape, loss_sign=1.0, pixel_m=PIXEL_M, side_h_w_m2k=(h_wall, h_up), h_w_m2k=h_wall)
    n = np.arange(1, 61)  # the 0.6 m read, in pixels
    s_above, s_below = np.exp(-n * PIXEL_M / 0.10).sum(), np.exp(-n * PIXEL_M / 0.07).sum()
    mid = 0.5 * (h_up + h_wall)  # the line itself lies on both faces
    expect = (h_up * s_above + h_wall * s_below + mid) / (h_wall * s_above + h_up * s_below + mid)
    assert up.loss_sum_kpx / down.loss_sum_kpx == pytest.approx(expect, rel=0.01)
    # a vertical line (a wall corner) keeps the image's one coefficient
    cols = np.arange(240, dtype=float)
    corner = np.tile(18.5 - _cusp(cols, 120.0, 0.08, 0.08, 1.0), (160, 1))
    vertical = replace(shape, orientation_deg=90.0, centroid_row=79.5, centroid_col=120.0, length_px=160.0)
    a = geometric_profile(corner, vertical, loss_sign=1.0, pixel_m=PIXEL_M)
    b = geometric_profile(corner, vertical, loss_sign=1.0, pixel_m=PIXEL_M, side_h_w_m2k=(h_up, h_wall), h_w_m2k=h_wall)
    assert a is not None and b.loss_sum_kpx == pytest.approx(a.loss_sum_kpx, rel=1e-12) and b.side_h_w_m2k is None


def test_a_ceiling_junction_seen_from_inside_reads_the_wall_below_with_a_wall_s_coefficient():
    # a horizontal junction across the frame, the same fall-off both ways, seen at 45° from inside
    rows = np.arange(160, dtype=float)
    t = np.tile((18.5 - _cusp(rows, 80.0, 0.08, 0.08, 1.0))[:, None], (1, 240))
    d = np.zeros(t.shape, int)
    d[74:87, :] = 1
    cam = {"pixel_m": PIXEL_M, "tilt_deg": 45.0}

    def bridge(heat_flow):
        res = _run(t, d, camera=cam, surface={"view": "interior", "heat_flow": heat_flow})
        (a,) = [x for x in res.anomalies if x.cause == "thermal_bridge"]
        return a

    wall, ceiling = bridge("horizontal"), bridge("upward")
    # declared a ceiling: above the line upward heat flow, below it a wall; ψ ∝ Σ h_side·loss_side, so
    # (h_up + h_wall)/2 over the wall's h for a symmetric fall-off; R_si 0.10 and 0.13 m²K/W (ISO 6946:2017
    # Table 7 [from memory]) make that about (1/0.10 + 1/0.13)/2·0.13 ≈ 1.15 [C: arithmetic]
    assert ceiling.psi_w_mk / wall.psi_w_mk == pytest.approx(0.5 * (1 / 0.10 + 1 / 0.13) * 0.13, rel=0.03)
    assert "R_si 0.10 and 0.13" in ceiling.reason and "R_si" not in wall.reason
