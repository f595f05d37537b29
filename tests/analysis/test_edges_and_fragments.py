"""Where an anomaly's edge lies, and pieces of one anomaly that a segmentation cuts apart.

- Edge position: a blurred step's edge is at the peak of the gradient along its
  normal, its inflection point (Canny, "A computational approach to edge detection",
  IEEE Trans. PAMI 8(6), 1986) [V]; for a symmetric blur of a step between two plateaus
  that is the half-way level [C]. The camera
  point-spread function and lateral conduction in the lining both act as such a blur
  [CP]. An empty bay beside colder-than-sound studs must therefore not grow onto the
  studs, as a half-of-the-reference-contrast level would make it.
- Fragments: a jump smaller than the step threshold is not a step (the segmentation
  itself only keeps jumps above ``min_step_k``), so a same-sign piece of similar
  temperature touching a larger anomaly is part of it [CP]; two touching regions of
  clearly different temperature stay apart (issue 2).
- Rim slivers: a thin piece of a larger anomaly's soft rim is that anomaly's edge, not
  a defect of its own [CP] (practice: defects are judged on their own pattern); its
  heat still belongs to the anomaly's thermal region (issue 4).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg
from scipy import ndimage

from irseg.analysis import analyse

PIXEL_M = 0.01
SOUND_C = 19.3


def _bay_between_cold_studs(blur: float):
    """Sound wall, two 8 px studs 1 K colder, the 40 × 80 px bay between them 4 K colder; blurred."""
    t = np.full((120, 160), SOUND_C)
    t[:, 52:60] -= 1.0  # studs: a smaller contrast than the bay (ISO 10211 type linear bridge) [CP]
    t[:, 100:108] -= 1.0
    t[20:100, 60:100] = SOUND_C - 4.0
    return ndimage.gaussian_filter(t, blur, mode="nearest")


def test_bay_beside_cold_studs_ends_at_the_edge_not_on_the_studs():
    t = _bay_between_cold_studs(blur=2.5)
    d = np.zeros(t.shape, int)
    d[:, 52:60] = 2
    d[:, 100:108] = 3
    d[17:103, 57:103] = 1  # the segmentation hands the jump band (3 px) to the bay
    seg = make_seg(d, u=t)
    band = ndimage.binary_dilation(seg.edges, iterations=3)  # a jump band several pixels wide, as AT gives
    seg = replace(seg, edges=band, v=np.where(band, 0.0, 1.0))
    res = analyse(make_frame(t), seg, make_meta(camera={"pixel_m": PIXEL_M}))
    bay = res.anomalies[int(res.labels[60, 80]) - 1]
    assert bay.cause == "missing_insulation"
    cols = np.flatnonzero(res.labels[60] == bay.anomaly)
    # the true edges are between columns 59|60 and 99|100; one pixel of tolerance for the ridge pixel
    assert abs(int(cols[0]) - 60) <= 1 and abs(int(cols[-1]) - 99) <= 1
    assert bay.area_px == pytest.approx(40 * 80, rel=0.03)
    # the heat integral still takes the whole soft rim: h·Σ(reference − T) over the region and its rim
    assert bay.excess_w > res.h_w_m2k * 4.0 * 40 * 80 * PIXEL_M**2 * 0.9


def _patch_with_piece(piece_delta: float, piece: tuple[slice, slice]):
    t = np.full((100, 140), SOUND_C)
    d = np.zeros(t.shape, int)
    t[20:70, 30:90] = SOUND_C - 3.0
    d[20:70, 30:90] = 1
    t[piece] = SOUND_C + piece_delta
    d[piece] = 2
    return t, d


def test_fragment_of_similar_temperature_inside_an_anomaly_is_part_of_it():
    # the segmentation split off a 6 × 6 px piece 0.2 K warmer than the patch (below the 0.5 K step)
    t, d = _patch_with_piece(-2.8, (slice(40, 46), slice(50, 56)))
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": PIXEL_M}))
    (a,) = res.anomalies
    assert a.area_px == 50 * 60
    assert a.cause == "missing_insulation", a.reason


def test_touching_region_of_different_temperature_stays_an_anomaly():
    # a 12 × 20 px strip 1.5 K warmer than the patch it touches (3x the 0.5 K step): two anomalies (issue 2)
    t, d = _patch_with_piece(-1.5, (slice(20, 32), slice(90, 110)))
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": PIXEL_M}))
    assert len(res.anomalies) == 2
    assert sorted(a.area_px for a in res.anomalies) == [12 * 20, 50 * 60]


def test_sliver_of_a_soft_rim_is_not_a_separate_anomaly():
    t = np.full((120, 160), SOUND_C)
    t[20:100, 60:100] = SOUND_C - 3.5
    t = ndimage.gaussian_filter(t, 3.0, mode="nearest")  # lateral conduction rim [CP]
    d = (t < SOUND_C - 1.75).astype(int)
    dist = ndimage.distance_transform_edt(d == 0)
    sliver = (dist >= 1) & (dist <= 5) & (np.arange(120)[:, None] >= 50) & (np.arange(120)[:, None] < 70)
    sliver &= np.arange(160)[None, :] < 80  # the left flank only: 5 px × 20 px, 3 % of the bay
    d[sliver] = 2
    assert SOUND_C - float(t[sliver].mean()) > 0.5  # a significant contrast on its own
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": PIXEL_M}))
    (a,) = res.anomalies
    assert not (res.labels[sliver] > 0).any()
    # its heat stays in the bay's thermal region: the total h·Σ(reference − T) of the image
    total = res.h_w_m2k * float((SOUND_C - t).sum()) * PIXEL_M**2
    assert a.excess_w == pytest.approx(total, rel=0.03)


def test_absorbed_fragment_on_the_edge_does_not_count_the_shared_rim_twice():
    # a 10 × 10 px piece 0.2 K warmer at the patch's corner; a 2 px rim of 0.5 K contrast around both
    t, d = _patch_with_piece(-2.8, (slice(20, 30), slice(30, 40)))
    patch = d > 0
    ring = ndimage.binary_dilation(patch, structure=np.ones((3, 3), bool), iterations=2) & ~patch
    t[ring] = SOUND_C - 0.5
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": PIXEL_M}))
    (a,) = res.anomalies
    # h·Σ(reference − T) over region and rim, each rim pixel once (issue 4; exact for this step scene)
    loss_kpx = 3.0 * (50 * 60 - 100) + 2.8 * 100 + 0.5 * int(ring.sum())
    assert a.excess_w == pytest.approx(res.h_w_m2k * loss_kpx * PIXEL_M**2, rel=1e-9)
