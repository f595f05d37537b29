"""Anomalies with or without a jump, through ``analyse``: soft defects, one anomaly per defect, shading.

Sources beside each check value:
- [HALF] a step blurred by a symmetric kernel crosses half its height at the step (closed form) [C]: the
  half-peak extent of a blurred plateau is the plateau; a cosine taper from 0 to A holds A/2 at its
  middle;
- [INT] blurring keeps the integral of a contrast; excess heat = h·ΣΔT·A_px (Newton's law of cooling,
  as in docs/analysis.md) [C];
- [CP] common practice of building thermography: lens shading is a smooth centre-to-corner pattern of
  the camera, not the wall; rising damp shows a wavering tide line along the base of a wall; a jump
  the segmentation did not find is no reason to miss a defect.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg

from irseg.analysis import analyse
from irseg.analysis._records import EDGE_NOTE

PIXEL_M = 0.01


def _one_region(t: np.ndarray):
    """A segmentation that found no jump at all: one region."""
    return make_seg(np.zeros(t.shape, int), u=t)


def _bump(shape, centre, s_px, amp):
    yy, xx = np.mgrid[: shape[0], : shape[1]].astype(float)
    return amp * np.exp(-((yy - centre[0]) ** 2 + (xx - centre[1]) ** 2) / (2.0 * s_px**2))


def test_soft_defect_without_a_jump_is_one_anomaly_at_half_its_peak():
    # a 0.5 K cold plateau of radius 0.3 m whose edge is softened by a Gaussian of 50 mm, no jump: the
    # extent is the disk (area πR²) [HALF]; heat: the whole blurred disk holds 0.5 K·πR² [INT], of which
    # the part beyond a tenth of the peak is a few per cent
    rng = np.random.default_rng(4)
    m, n, radius = 180, 240, 30.0
    yy, xx = np.mgrid[:m, :n].astype(float)
    disk = (np.hypot(yy - 90, xx - 120) <= radius).astype(float)
    from scipy import ndimage
    soft = -0.5 * ndimage.gaussian_filter(disk, 5.0)
    t = 19.0 + soft + rng.normal(0.0, 0.04, soft.shape)
    res = analyse(make_frame(t), _one_region(19.0 + soft), make_meta(camera={"pixel_m": PIXEL_M}))
    (a,) = res.anomalies
    assert a.kind == "cold" and a.cause == "missing_insulation", a.reason
    assert a.area_px == pytest.approx(math.pi * radius**2, rel=0.05)
    assert a.reference_c == pytest.approx(19.0, abs=0.05)
    expected = res.h_w_m2k * 0.5 * math.pi * radius**2 * PIXEL_M**2  # h·ΣΔT·A_px [INT]
    assert a.excess_w == pytest.approx(expected, rel=0.1)


def test_lens_shading_cut_into_rings_by_the_segmentation_is_not_an_anomaly():
    # 1.2 K warmer at the corners, r² and r⁴ about the frame centre [CP]; the segmentation cuts its
    # contours into rings a quarter of a kelvin apart, each off the image's trend plane
    rng = np.random.default_rng(5)
    m, n = 180, 240
    yy, xx = np.mgrid[:m, :n].astype(float)
    r2 = (((yy - (m - 1) / 2) / ((m - 1) / 2)) ** 2 + ((xx - (n - 1) / 2) / ((n - 1) / 2)) ** 2) / 2.0
    shading = 1.2 * (0.7 * r2 + 0.3 * r2**2)
    t = 19.0 + shading + rng.normal(0.0, 0.05, (m, n))
    rings = np.floor(shading / 0.25).astype(int)
    res = analyse(make_frame(t), make_seg(rings, u=19.0 + shading), make_meta(camera={"pixel_m": PIXEL_M}))
    assert res.anomalies == ()


def test_graded_wet_roof_area_cut_into_rings_is_one_anomaly():
    rng = np.random.default_rng(6)
    m, n = 200, 260
    yy, xx = np.mgrid[:m, :n].astype(float)
    r = np.hypot((yy - 100) / 60.0, (xx - 130) / 80.0)
    taper = np.clip((1.0 - r) / 0.45, 0.0, 1.0)
    wet = 1.5 * (0.5 - 0.5 * np.cos(np.pi * taper))  # plateau core, cosine taper to its edge
    t = -1.0 + wet + rng.normal(0.0, 0.05, (m, n))
    rings = np.floor(wet / 0.5).astype(int)  # the segmentation's staircase of 0.5 K steps
    meta = make_meta(camera={"pixel_m": PIXEL_M}, surface={"view": "roof", "reflected_c": -20.0},
                     air={"inside_c": 20.0, "outside_c": 2.0, "wind_m_s": 1.0})
    res = analyse(make_frame(t), make_seg(rings, u=-1.0 + wet), meta)
    (a,) = res.anomalies
    assert a.kind == "warm" and a.cause == "moisture", a.reason
    # one extent: where the area holds half of its peak, the taper's middle [HALF]
    expected = float((wet >= 0.75).sum())
    assert a.area_px == pytest.approx(expected, rel=0.08)


def test_anomaly_at_the_frame_edge_says_its_area_may_be_cut():
    t = np.full((100, 140), 19.0)
    d = np.zeros(t.shape, int)
    t[30:70, 0:40] -= 2.0
    d[30:70, 0:40] = 1
    (a,) = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": PIXEL_M})).anomalies
    assert EDGE_NOTE in a.reason
    t2 = np.full((100, 140), 19.0)
    t2[30:70, 50:90] -= 2.0
    d2 = np.zeros(t2.shape, int)
    d2[30:70, 50:90] = 1
    (b,) = analyse(make_frame(t2), make_seg(d2, u=t2), make_meta(camera={"pixel_m": PIXEL_M})).anomalies
    assert EDGE_NOTE not in b.reason


def _damp_base(wavy: bool):
    rng = np.random.default_rng(8)
    m, n = 160, 240
    yy, xx = np.mgrid[:m, :n].astype(float)
    top = 100.0 + (6.0 * np.sin(2 * np.pi * xx / 55.0) + 3.0 * np.sin(2 * np.pi * xx / 23.0 + 1.0) if wavy else 0.0)
    zone = np.clip((yy - top) / 4.0 + 0.5, 0.0, 1.0) * (xx >= 30) * (xx < 210)  # a 40 mm ramp at 10 mm/px
    t = 19.0 - 2.5 * zone + rng.normal(0.0, 0.05, (m, n))
    return t, 19.0 - 2.5 * zone


@pytest.mark.parametrize("wavy, cause", [(True, "moisture"), (False, "missing_insulation")])
def test_cold_zone_along_the_base_is_damp_only_with_a_wavering_tide_line(wavy, cause):
    # rising damp leaves a wavering tide line [CP]; a straight-topped cold zone along the base is not told
    # from an empty lower bay by the rule, and stays missing insulation
    t, u = _damp_base(wavy)
    res = analyse(make_frame(t), _one_region(u), make_meta(camera={"pixel_m": PIXEL_M}))
    (a,) = res.anomalies
    assert a.cause == cause, a.reason
    if cause == "moisture":
        assert "rising or penetrating damp: confirm with a moisture meter" in a.reason


def test_same_surface_at_two_resolutions_gives_the_same_anomaly():
    # a soft-edged void of 0.4 × 0.3 m, −0.6 K, sampled at 10 mm and at 5 mm per pixel [CP]: parameters are
    # physical, so the count is the same and the areas agree within 10 %
    areas = []
    for pixel in (0.01, 0.005):
        m, n = int(round(1.2 / pixel)), int(round(1.6 / pixel))
        y = (np.arange(m) + 0.5) * pixel
        x = (np.arange(n) + 0.5) * pixel
        edge = 0.04

        def ramp(v, a, b):
            return np.clip((v - a) / edge + 0.5, 0, 1) * np.clip((b - v) / edge + 0.5, 0, 1)

        void = -0.6 * ramp(y, 0.45, 0.75)[:, None] * ramp(x, 0.6, 1.0)[None, :]
        t = 19.0 + void + np.random.default_rng(9).normal(0.0, 0.05, void.shape)
        res = analyse(make_frame(t), _one_region(19.0 + void), make_meta(camera={"pixel_m": pixel}))
        assert len(res.anomalies) == 1
        areas.append(res.anomalies[0].area_m2)
    assert areas[0] == pytest.approx(areas[1], rel=0.1)
    assert areas[0] == pytest.approx(0.3 * 0.4, rel=0.1)  # a symmetric ramp holds half at its middle [HALF]
