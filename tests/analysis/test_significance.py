"""Checks of the contrast-at-scale detector against statistics and closed-form fields.

Sources named beside each check value:
- [LIN] the output of a linear filter with weights h on white noise of variance σ² has
  variance σ²·Σh² (e.g. A. Papoulis, *Probability, Random Variables and Stochastic
  Processes*, 3rd ed., McGraw-Hill 1991, linear systems with stochastic inputs; from memory);
- [GAU] for the unit-mass 2-D Gaussian of std s, ∫g² = 1/(4πs²) (closed-form integral);
- [TAIL] the Gaussian tail probability, computed with scipy.stats.norm;
- [HALF] a Gaussian bump A·exp(−r²/2s²) is at least A/2 inside r² ≤ 2s²·ln 2, an area of
  2π·ln2·s² (closed form).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats
from scipy.optimize import minimize_scalar

from irseg.analysis._significance import (
    contrast_at_scales,
    detect_regions,
    gaussian_noise_factor,
    min_detectable_contrast_k,
)
from irseg.analysis._sound_surface import fit_sound_surface

PIXEL_M = 0.004


def _background(m: int, n: int) -> np.ndarray:
    """Smooth sound surface: plane, curvature and 1.5 K of radial lens shading (r², r⁴)."""
    yy, xx = np.mgrid[:m, :n].astype(float)
    y = (yy - (m - 1) / 2) / ((m - 1) / 2)
    x = (xx - (n - 1) / 2) / ((n - 1) / 2)
    r2 = (x**2 + y**2) / 2
    return 18.0 + 0.6 * x + 0.4 * y**2 - 0.2 * x * y - 1.5 * (0.7 * r2 + 0.3 * r2**2)


@pytest.mark.parametrize("s", [1.0, 2.0, 3.0])
def test_discrete_noise_factor_tends_to_the_continuum_formula(s):
    # [LIN]+[GAU]: σ_s/σ = sqrt(Σh²) → 1/(2·sqrt(π)·s); the truncated discrete kernel is within 2 % from s = 1 px
    assert gaussian_noise_factor(s) == pytest.approx(1.0 / (2.0 * math.sqrt(math.pi) * s), rel=0.02)


@pytest.mark.parametrize("s", [2.0, 5.7, 11.3])
def test_smoothed_white_noise_has_the_predicted_sigma(s):
    rng = np.random.default_rng(11)
    sigma = 0.1
    noise = rng.normal(0.0, sigma, (600, 800))
    field = contrast_at_scales(noise, np.ones(noise.shape, bool), (s,))[0]
    inner = field[40:-40, 40:-40]
    predicted = sigma / (2.0 * math.sqrt(math.pi) * s)  # [LIN]+[GAU]
    # sampling error of a std from ~(560·720)/(4πs²) independent values: < 5 % at s = 11.3 px; the
    # block-reduced path (s > 3 px) approximates the window, within 10 %
    tol = 0.04 if s <= 3 else 0.10
    assert float(inner.std()) == pytest.approx(predicted, rel=tol)


def test_per_pixel_exceedance_on_white_noise_matches_the_gaussian_tail():
    rng = np.random.default_rng(5)
    sigma, s, k = 0.05, 2.0, 2.0
    noise = rng.normal(0.0, sigma, (500, 500))
    field = contrast_at_scales(noise, np.ones(noise.shape, bool), (s,))[0]
    z = field[20:-20, 20:-20] / (sigma * gaussian_noise_factor(s))
    expected = 2.0 * stats.norm.sf(k)  # [TAIL]: 0.0455 for |z| > 2
    assert float(np.mean(np.abs(z) > k)) == pytest.approx(expected, rel=0.1)


def test_pure_white_noise_gives_no_anomaly():
    expected_seeds = 0.0
    for seed in range(5):
        rng = np.random.default_rng(100 + seed)
        t = 20.0 + rng.normal(0.0, 0.1, (240, 320))
        labels, _, info = detect_regions(t, None, noise_k=0.1, pixel_m=PIXEL_M, min_contrast_k=0.0)
        assert labels.max() == 0, info.regions
        # [TAIL]+[GAU]: a smoothed field of std s holds about N/(4πs²) independent values, each past k_hi
        # with probability 2·(1 − Φ(k_hi)) (5.7e-7 at 5σ)
        expected_seeds += sum(2.0 * stats.norm.sf(info.k_hi) * t.size / (4 * math.pi * s * s) for s in info.scales_px)
    assert expected_seeds < 0.05


def test_gaussian_bump_area_is_its_half_peak_area():
    m, n, s, amp = 240, 320, 12.0, -1.0
    yy, xx = np.mgrid[:m, :n].astype(float)
    bump = amp * np.exp(-((yy - 110) ** 2 + (xx - 170) ** 2) / (2 * s * s))
    rng = np.random.default_rng(3)
    t = _background(m, n) + bump + rng.normal(0.0, 0.05, (m, n))
    labels, _, info = detect_regions(t, None, noise_k=0.05, pixel_m=PIXEL_M)
    assert labels.max() == 1
    analytic = 2.0 * math.pi * math.log(2.0) * s * s  # [HALF]: 627 px
    assert float((labels == 1).sum()) == pytest.approx(analytic, rel=0.10)
    assert info.regions[0].peak_k == pytest.approx(amp, rel=0.10)


def test_smooth_background_with_lens_shading_gives_no_anomaly():
    rng = np.random.default_rng(8)
    m, n = 240, 320
    t = _background(m, n) + rng.normal(0.0, 0.05, (m, n))
    labels, surface, _ = detect_regions(t, None, noise_k=0.05, pixel_m=PIXEL_M)
    assert labels.max() == 0
    assert float(np.abs(surface - _background(m, n)).max()) < 0.05  # 1 σ of one pixel


def test_a_defect_of_a_quarter_of_the_frame_survives_the_sound_surface():
    rng = np.random.default_rng(9)
    m, n = 240, 320
    defect = np.zeros((m, n), bool)
    side_r, side_c = int(0.5 * m), int(0.5 * n)  # 25 % of the frame
    defect[50:50 + side_r, 90:90 + side_c] = True
    t = _background(m, n) - 0.5 * defect + rng.normal(0.0, 0.05, (m, n))
    sound = fit_sound_surface(t, length_px=0.2 / PIXEL_M, noise_k=0.05, edge_length_px=0.2 / PIXEL_M)
    # the surface passes under the defect: within 0.05 K (a tenth of its contrast) of the true sound surface
    assert float(np.abs(sound.surface - _background(m, n))[defect].max()) < 0.05
    labels, _, _ = detect_regions(t, None, noise_k=0.05, pixel_m=PIXEL_M)
    assert labels.max() == 1
    assert float((labels == 1).sum()) == pytest.approx(float(defect.sum()), rel=0.05)


def test_graded_area_is_one_region_and_touching_plateaus_stay_two():
    rng = np.random.default_rng(10)
    m, n = 240, 320
    yy, xx = np.mgrid[:m, :n].astype(float)
    r = np.hypot(yy - 120, (xx - 160) / 1.3)
    taper = np.clip((75 - r) / 40, 0, 1)
    graded = 1.2 * (0.5 - 0.5 * np.cos(np.pi * taper))  # plateau core, cosine taper to zero
    t = _background(m, n) + graded + rng.normal(0.0, 0.05, (m, n))
    labels, _, _ = detect_regions(t, None, noise_k=0.05, pixel_m=PIXEL_M)
    assert labels.max() == 1
    a = np.zeros((m, n), bool)
    b = np.zeros((m, n), bool)
    a[70:170, 80:160] = True
    b[70:170, 160:240] = True
    t = _background(m, n) - 2.0 * a - 0.7 * b + rng.normal(0.0, 0.05, (m, n))
    labels, _, _ = detect_regions(t, None, noise_k=0.05, pixel_m=PIXEL_M)
    assert labels.max() == 2
    for truth in (a, b):
        ids, counts = np.unique(labels[truth], return_counts=True)
        assert ids[np.argmax(counts)] > 0 and counts.max() >= 0.95 * truth.sum()


def test_matched_gain_constant_of_the_stated_contrast_limit():
    # the disk-through-Gaussian SNR (1 − e^(−u))/sqrt(u) is largest at u* ≈ 1.256 with value 0.638 (closed
    # form, maximised numerically here); the stated limit 1.11·k·NETD·p/sqrt(A) follows
    res = minimize_scalar(lambda u: -(1 - math.exp(-u)) / math.sqrt(u), bounds=(0.1, 5.0), method="bounded")
    assert res.x == pytest.approx(1.256, abs=0.01)
    gain = math.sqrt(2.0) * -res.fun  # sqrt(2π)·0.638/sqrt(π)
    expected = 5.0 * 0.05 * 0.0039 / (gain * math.sqrt(0.05))
    assert min_detectable_contrast_k(area_m2=0.05, netd_k=0.05, pixel_m=0.0039) == pytest.approx(expected, rel=1e-3)


def test_a_large_masked_area_leaves_the_defect_beside_it_found_without_warnings():
    # A third of the frame is masked (NaN: an excluded window or heat source). Deep inside it no valid
    # pixel reaches the Gaussian weights of the coarse scales (their sum is 0); the detection must not
    # divide by that (RuntimeWarning, an error under the suite's filterwarnings) and must still find a
    # 3.5 K cold bay on the valid part. Check value: the bay's area is its pixel count times the pixel
    # footprint of a pinhole camera, (2 d tan(hfov/2) / N)^2 [physics: pinhole geometry].
    import irseg

    rng = np.random.default_rng(11)
    t = 19.0 + rng.normal(0.0, 0.05, (240, 320))
    t[:, 200:] = np.nan  # 37.5 % of the frame masked
    t[80:160, 40:120] -= 3.5  # a cold bay, 80 x 80 pixels
    meta = {"surface": {"view": "interior", "emissivity": 0.93, "reflected_c": 20.0},
            "air": {"inside_c": 20.0, "outside_c": 0.0}, "camera": {"distance_m": 3.0, "hfov_deg": 45.0}}
    res = irseg.process_array(t, meta, name="masked.npy")
    cold = [a for a in res.analysis.anomalies if a.delta_k < -1.0]
    assert len(cold) == 1
    pixel_m = 2 * 3.0 * np.tan(np.radians(45.0) / 2) / 320
    assert cold[0].area_m2 == pytest.approx(80 * 80 * pixel_m**2, rel=0.15)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_grey_reconstruction_agrees_with_scikit_image(seed):
    # reference library: skimage.morphology.reconstruction (method "dilation", 3×3 footprint); the
    # domes of the extent rule are f − reconstruction(f − h, f), so they must agree value for value
    from skimage.morphology import reconstruction

    from irseg.analysis._scales import _reconstruct

    rng = np.random.default_rng(seed)
    m, n = 37 + 11 * seed, 53 - 7 * seed
    yy, xx = np.mgrid[:m, :n]
    field = np.sin(yy / 5.0) * np.cos(xx / 7.0) + 0.3 * rng.normal(size=(m, n))
    field[::9, :] = field.min()  # flat valleys cutting the domes apart
    for h in (0.05, 0.3, 1.0):
        expected = reconstruction(field - h, field, method="dilation")
        assert np.array_equal(_reconstruct(field - h, field), expected)


def test_contrast_fields_reuse_their_valid_weights_unchanged():
    # the weights kept for one set of valid pixels (second pass, fine fields) give the fields a fresh call gives
    rng = np.random.default_rng(3)
    valid = np.ones((120, 170), bool)
    valid[30:60, 40:90] = False
    scales = (1.0, 2.8, 4.5, 9.0)
    weights: dict = {}
    first = rng.normal(0.0, 0.1, valid.shape)
    contrast_at_scales(first, valid, scales, [], weights=weights)
    second = rng.normal(0.0, 0.1, valid.shape)
    gains_kept: list = []
    kept = contrast_at_scales(second, valid, scales, gains_kept, weights=weights)
    gains_fresh: list = []
    fresh = contrast_at_scales(second, valid, scales, gains_fresh)
    for a, b in zip(kept + gains_kept, fresh + gains_fresh):
        assert np.array_equal(a, b)


def test_opencv_components_are_scipys():
    # reference library: scipy.ndimage.label (8-connectivity for label8, its default 4-connectivity for
    # long_lines, whose rule is the components' bounding boxes from scipy.ndimage.find_objects)
    from scipy import ndimage

    from irseg.analysis._scales import label8, long_lines

    rng = np.random.default_rng(12)
    for shape, density in (((1, 1), 0.5), ((1, 40), 0.5), ((33, 1), 0.5), ((64, 90), 0.45), ((120, 80), 0.6)):
        mask = rng.random(shape) < density
        ours = label8(mask)
        ref, k = ndimage.label(mask, structure=np.ones((3, 3), bool))
        assert ((ours > 0) == mask).all()
        pairs = set(zip(ours[mask].tolist(), ref[mask].tolist()))  # a one-to-one map between the labellings
        assert len(pairs) == k == len({a for a, _ in pairs}) == len({b for _, b in pairs})
        for line_px in (0.5, 2.0, 7.0):
            lab, _ = ndimage.label(mask)
            keep = np.zeros(lab.max() + 1, bool)
            for i, sl in enumerate(ndimage.find_objects(lab), start=1):
                keep[i] = max(sl[0].stop - sl[0].start, sl[1].stop - sl[1].start) >= 3.0 * line_px
            assert np.array_equal(long_lines(mask, line_px), keep[lab] if lab.max() else mask)
