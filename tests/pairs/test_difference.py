"""Drift removal, smoothing noise and leak detection of a pair, on constructed difference maps."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import ndimage

from irseg.pairs import EXTENT_FRACTION, analyse_pair, remove_drift
from irseg.pairs._difference import smooth_nan, smoothed_noise
from irseg.types import ThermalFrame


def _frame(t: np.ndarray, name: str) -> ThermalFrame:
    t = np.asarray(t, np.float32)
    return ThermalFrame(path=name, temperature_c=t, mask=np.zeros(t.shape, bool))


def _blob(shape, centre, sigma_px, peak_k):
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    return peak_k * np.exp(-((rows - centre[0]) ** 2 + (cols - centre[1]) ** 2) / (2 * sigma_px**2))


def test_the_drift_plane_is_removed_despite_a_fifth_of_the_pixels_changed(rng):
    shape = (120, 160)
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    plane = -0.3 + 0.002 * (cols - 79.5) - 0.001 * (rows - 59.5)
    change = plane + rng.normal(0.0, 0.05, shape)
    change[20:60, 30:110] -= 1.5  # 17 % of the frame cooled by leaks
    change[100:110, :] = np.nan   # not covered by the reference
    difference, drift = remove_drift(change)
    # [C] the plane is known by construction; Tukey's biweight ignores the cooled fifth
    assert drift == pytest.approx(-0.3, abs=0.01)
    sound = np.isfinite(difference) & ~((rows >= 20) & (rows < 60) & (cols >= 30) & (cols < 110))
    assert abs(float(np.mean(difference[sound]))) < 0.01
    assert float(np.std(difference[sound])) == pytest.approx(0.05, rel=0.1)
    assert np.isnan(difference[105, 5])


def test_the_noise_after_smoothing_is_that_of_a_gaussian_filter(rng):
    # [C] white noise of σ after a 2-D Gaussian of s pixels has σ / (2 √π s) (the filter's energy,
    # ∑ g² = 1/(4π s²));
    # checked against scipy.ndimage.gaussian_filter on a large noise field
    noise = rng.normal(0.0, 1.0, (600, 600))
    for s in (1.0, 2.0):
        measured = float(np.std(ndimage.gaussian_filter(noise, s)[20:-20, 20:-20]))
        assert smoothed_noise(1.0, s) == pytest.approx(measured, rel=0.05)
        ours = smooth_nan(noise.astype(np.float32), s)
        assert float(np.std(ours[20:-20, 20:-20])) == pytest.approx(measured, rel=0.05)


def _pair(rng, *, leaks, defect_k=0.0, view_sign=1, drift_k=-0.25):
    shape = (200, 260)
    base = 18.5 + ndimage.gaussian_filter(rng.normal(0.0, 1.0, shape), 5.0) * 0.6
    base[40:45, :] -= 1.0  # a junction: structure to register on
    base[:, 200:208] -= 0.5  # a stud
    if defect_k:
        base[120:170, 40:100] -= defect_k  # missing insulation, in both shots
    base = ndimage.gaussian_filter(base, 1.0)
    reference = base + rng.normal(0.0, 0.05, shape)
    pressed = base + drift_k + rng.normal(0.0, 0.05, shape)
    truth = []
    for centre, sigma, peak in leaks:
        blob = _blob(shape, centre, sigma, peak)
        pressed -= view_sign * blob
        truth.append(blob >= EXTENT_FRACTION * peak)
    return reference, pressed, truth


def _iou(a, b):
    return float((a & b).sum()) / float((a | b).sum())


def test_each_leak_is_one_anomaly_with_the_documented_extent(rng):
    leaks = [((90, 80), 8.0, 1.5), ((100, 170), 6.0, 1.0)]
    reference, pressed, truth = _pair(rng, leaks=leaks)
    result = analyse_pair(_frame(reference, "r.npy"), _frame(pressed, "p.npy"), pressure_pa=50.0, minutes=10.0,
                          first_id=4, pixel_area_m2=1e-4)
    assert [a.anomaly for a in result.anomalies] == [4, 5]
    assert result.drift_k == pytest.approx(-0.25, abs=0.02)
    for a, mask in zip(result.anomalies, truth):
        region = result.labels == a.anomaly
        # [C] the extent rule: pixels at >= 30 % of the peak; the Gaussians' own contour by construction
        assert _iou(region, mask) >= 0.85
        assert a.cause == "air_leakage" and a.kind == "cold" and a.pressure_pa == 50.0
        assert a.cooling_k > 0 and a.cooling_max_k >= a.cooling_k
        assert a.area_m2 == pytest.approx(a.area_px * 1e-4)
        assert "50 Pa" in a.reason and "after 10 min" in a.reason
    assert result.anomalies[0].cooling_max_k == pytest.approx(1.5, abs=0.1)


def test_a_defect_present_in_both_and_the_drift_are_not_leakage(rng):
    reference, pressed, _ = _pair(rng, leaks=[], defect_k=2.5, drift_k=-0.4)
    result = analyse_pair(_frame(reference, "r.npy"), _frame(pressed, "p.npy"), pressure_pa=50.0)
    assert result.anomalies == ()
    assert not result.labels.any()


def test_an_outside_view_looks_for_warming(rng):
    leaks = [((90, 80), 8.0, 1.2)]
    reference, pressed, truth = _pair(rng, leaks=leaks, view_sign=-1)
    result = analyse_pair(_frame(reference, "r.npy"), _frame(pressed, "p.npy"), pressure_pa=50.0, view="exterior")
    assert len(result.anomalies) == 1
    a = result.anomalies[0]
    assert a.kind == "warm" and "warmed" in a.reason
    assert a.cooling_k < 0 and a.cooling_max_k < 0  # warming reads as negative cooling
    assert _iou(result.labels == a.anomaly, truth[0]) >= 0.85
    # the same pair seen as an inside view has no cooling to find
    inside = analyse_pair(_frame(reference, "r.npy"), _frame(pressed, "p.npy"), pressure_pa=50.0, view="interior")
    assert inside.anomalies == ()


def test_a_weak_change_within_the_noise_is_not_found(rng):
    # [CP] a peak of 0.1 K is below MIN_PEAK_K (0.3 K) although it stands 5 σ out of the smoothed noise
    reference, pressed, _ = _pair(rng, leaks=[((90, 80), 10.0, 0.1)])
    result = analyse_pair(_frame(reference, "r.npy"), _frame(pressed, "p.npy"), pressure_pa=50.0)
    assert result.anomalies == ()
    assert math.isfinite(result.noise_k) and result.noise_k == pytest.approx(0.05 * math.sqrt(2), rel=0.3)


def test_a_leak_names_the_images_own_anomalies_it_covers(rng):
    reference, pressed, _ = _pair(rng, leaks=[((90, 80), 8.0, 1.5), ((100, 170), 6.0, 1.0)])
    own = np.zeros(pressed.shape, np.int32)
    own[85:95, 75:85] = 3  # the image alone outlined the first leak's core as its anomaly 3
    result = analyse_pair(_frame(reference, "r.npy"), _frame(pressed, "p.npy"), pressure_pa=50.0, first_id=4,
                          own_labels=own)
    first, second = result.anomalies
    assert first.reason.endswith("the image alone shows this place as anomaly 3")
    assert "image alone" not in second.reason


def test_a_noisy_pair_is_smoothed_more_but_never_beyond_three_pixels():
    from irseg.pairs._difference import TARGET_NOISE_K, smoothing_px

    assert smoothing_px(0.05 * math.sqrt(2)) == 1.0  # a usual camera (NETD 0.05 K per image): 1 px
    s = smoothing_px(0.2)
    # [C] the σ that leaves TARGET_NOISE_K of white noise: σ_noise / (2 √π s) = target
    assert smoothed_noise(0.2, s) == pytest.approx(TARGET_NOISE_K)
    assert smoothing_px(5.0) == 3.0


def test_invalid_pixels_of_either_shot_are_left_out(rng):
    reference, pressed, _ = _pair(rng, leaks=[((90, 80), 8.0, 1.5)])
    pressed_frame = _frame(pressed, "p.npy")
    mask = np.zeros(pressed.shape, bool)
    mask[150:170, 150:170] = True  # dead or excluded pixels of the pressurised shot
    pressed_frame = ThermalFrame(path="p.npy", temperature_c=pressed_frame.temperature_c, mask=mask)
    reference_frame = _frame(reference, "r.npy")
    ref_mask = np.zeros(reference.shape, bool)
    ref_mask[20:30, 200:230] = True
    reference_frame = ThermalFrame(path="r.npy", temperature_c=reference_frame.temperature_c, mask=ref_mask)
    result = analyse_pair(reference_frame, pressed_frame, pressure_pa=50.0)
    assert np.isnan(result.difference_k[mask]).all()
    assert np.isnan(result.difference_k[22:28, 205:225]).all()  # the reference's invalid pixels, registered
    assert len(result.anomalies) == 1 and not result.labels[mask].any()


def test_shots_of_different_sizes_fail_with_both_sizes_named(rng):
    from irseg.errors import InputError

    reference, pressed, _ = _pair(rng, leaks=[])
    with pytest.raises(InputError, match=r"differ in size \(\(200, 200\) and \(200, 260\)\)"):
        analyse_pair(_frame(reference, "r.npy"), _frame(pressed[:, :200], "p.npy"), pressure_pa=50.0)
