"""Radiometry checks against Planck's law (scipy), check values computed from it, and physics."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants as sc
from scipy import integrate, optimize

from irseg.errors import CalibrationError, ConfigError, InputError, MetadataWarning
from irseg.metadata import load_metadata
from irseg.radiometry import (
    apparent_to_object,
    band_radiance,
    band_temperature,
    calibrate,
    fill_masked,
    mask_dead_pixels,
    object_to_apparent,
)
from irseg.types import Air, Camera, RawFrame, Surface, SurveyMeta

BANDS = [(7.5, 14.0), (8.0, 14.0), (3.0, 5.0)]


def planck_quad(t_k: float, band_um: tuple[float, float]) -> float:
    """Reference library: scipy.integrate.quad of Planck's law with scipy.constants (CODATA)."""
    c1 = 2 * sc.h * sc.c**2
    c2 = sc.h * sc.c / sc.k

    def spectral(lam: float) -> float:
        return c1 / (lam**5 * math.expm1(c2 / (lam * t_k)))

    val, _ = integrate.quad(spectral, band_um[0] * 1e-6, band_um[1] * 1e-6, epsabs=0, epsrel=1e-12, limit=200)
    return val


# ----------------------------------------------------------------------------- band radiance


@pytest.mark.parametrize("band", BANDS)
@pytest.mark.parametrize("t_c", [-60.0, -20.0, 0.0, 20.0, 37.3, 80.0, 150.0])
def test_band_radiance_matches_quad(band, t_c):
    # reference library: scipy.integrate.quad + scipy.constants
    ref = planck_quad(t_c + 273.15, band)
    assert band_radiance(t_c + 273.15, band_um=band) == pytest.approx(ref, rel=1e-7)


def test_band_radiance_outside_table_matches_quad():
    # reference library: quad; 100 K and 900 K lie outside the interpolation table
    for t_k in (100.0, 900.0):
        assert band_radiance(t_k) == pytest.approx(planck_quad(t_k, (7.5, 14.0)), rel=1e-9)


@pytest.mark.parametrize(
    ("t_c", "l_75", "l_8", "l_35"),
    [
        # band radiance, W m-2 sr-1: Planck's law integrated over each band, CODATA 2018 constants [C]
        (-20.0, 25.216, 23.825, 0.2545),
        (0.0, 37.533, 35.152, 0.6443),
        (10.0, 44.919, 41.891, 0.9787),
        (20.0, 53.161, 49.373, 1.4475),
        (30.0, 62.280, 57.611, 2.0895),
    ],
)
def test_band_radiance_reference_table(t_c, l_75, l_8, l_35):
    t_k = t_c + 273.15
    assert band_radiance(t_k, band_um=(7.5, 14.0)) == pytest.approx(l_75, abs=6e-4)
    assert band_radiance(t_k, band_um=(8.0, 14.0)) == pytest.approx(l_8, abs=6e-4)
    assert band_radiance(t_k, band_um=(3.0, 5.0)) == pytest.approx(l_35, abs=6e-5)


def test_band_fraction_of_sigma_t4():
    # Planck band integral / Stefan-Boltzmann sigma T^4 / pi: 7.5-14 um at 20 °C carries 0.399 [C]
    t_k = 293.15
    frac = band_radiance(t_k) / band_radiance(t_k, method="broadband")
    assert frac == pytest.approx(0.399, abs=5e-4)
    # broadband is sigma T^4 / pi with CODATA sigma (scipy.constants)
    assert band_radiance(t_k, method="broadband") == pytest.approx(sc.Stefan_Boltzmann * t_k**4 / math.pi, rel=1e-12)


@pytest.mark.parametrize("band", BANDS)
def test_inversion_within_10_mk(band):
    # requirement: inversion error <= 10 mK over -60...+150 °C; reference: brentq on quad radiance
    for t_c in np.linspace(-60.0, 150.0, 9):
        ref_l = planck_quad(t_c + 273.15, band)
        t_k = band_temperature(ref_l, band_um=band)
        assert abs(t_k - (t_c + 273.15)) < 0.010
    # dense self-consistency over the range (vectorised path)
    t = np.linspace(-60.0, 150.0, 2001) + 273.15
    back = band_temperature(band_radiance(t, band_um=band), band_um=band)
    assert np.max(np.abs(back - t)) < 0.010


def test_inversion_against_brentq_independent():
    # reference library: scipy.optimize.brentq (Brent's method) on [150 K, 600 K]
    target = 47.0
    ref = optimize.brentq(lambda t: planck_quad(t, (7.5, 14.0)) - target, 150.0, 600.0, xtol=1e-9)
    assert band_temperature(target) == pytest.approx(ref, abs=1e-3)


def test_bad_band_and_method():
    with pytest.raises(ConfigError, match="band_um"):
        band_radiance(300.0, band_um=(14.0, 7.5))
    with pytest.raises(ConfigError, match="broadband"):
        band_radiance(300.0, method="sigma")


# ----------------------------------------------------------------------------- measurement equation


def test_worked_round_trip():
    # Planck's law over 7.5-14 um (CODATA 2018) in L = eps L_b(T_obj) + (1 - eps) L_b(T_refl) (opaque
    # grey surface, Kirchhoff's law), tau 1: eps 0.93, 15 °C, reflected 20 °C -> apparent 15.359 °C [C]
    app = object_to_apparent(15.0, emissivity=0.93, reflected_c=20.0)
    assert app == pytest.approx(15.359, abs=1e-3)
    # ... and inverting returns 15.000 °C (error < 1 mK) [C]
    assert apparent_to_object(app, emissivity=0.93, reflected_c=20.0) == pytest.approx(15.000, abs=1e-3)


@pytest.mark.parametrize(
    ("t_obj", "t_refl", "eps", "t_app", "t_sigma"),
    [
        # apparent T from Planck's law over 7.5-14 um (CODATA 2018), then inverted with the broadband
        # form T^4 = (T_app^4 - (1 - eps) T_refl^4) / eps (Stefan-Boltzmann law) [C]
        (15.0, 20.0, 0.93, 15.359, 15.000),
        (2.0, -20.0, 0.90, 0.053, 2.027),
        (2.0, -40.0, 0.90, -1.289, 2.113),
        (20.0, -30.0, 0.84, 13.727, 20.121),
        (5.0, -40.0, 0.50, -14.09, 5.78),
    ],
)
def test_broadband_error_table(t_obj, t_refl, eps, t_app, t_sigma):
    app = object_to_apparent(t_obj, emissivity=eps, reflected_c=t_refl)
    tol = 0.01 if len(str(t_app).split(".")[1]) == 2 else 1.5e-3
    assert app == pytest.approx(t_app, abs=tol)
    sig = apparent_to_object(app, emissivity=eps, reflected_c=t_refl, method="broadband")
    assert sig == pytest.approx(t_sigma, abs=tol)
    assert apparent_to_object(app, emissivity=eps, reflected_c=t_refl) == pytest.approx(t_obj, abs=1e-3)


def test_glass_and_aluminium_examples():
    # measurement equation with Planck's law over 7.5-14 um (CODATA 2018), tau 1, reflected 20 °C [C]
    assert object_to_apparent(10.0, emissivity=0.84, reflected_c=20.0) == pytest.approx(11.67, abs=0.01)
    assert object_to_apparent(10.0, emissivity=0.10, reflected_c=20.0) == pytest.approx(19.05, abs=0.01)


def test_emissivity_sensitivity():
    # measurement equation, Planck 7.5-14 um [C]: true 15 °C wall (eps 0.93, refl 20) processed with
    # 0.90 -> 14.83, 0.95 -> 15.11
    app = object_to_apparent(15.0, emissivity=0.93, reflected_c=20.0)
    assert apparent_to_object(app, emissivity=0.90, reflected_c=20.0) == pytest.approx(14.83, abs=0.01)
    assert apparent_to_object(app, emissivity=0.95, reflected_c=20.0) == pytest.approx(15.11, abs=0.01)


def test_isothermal_enclosure_reads_true_temperature():
    # physics (Kirchhoff): object, surroundings and path at one temperature -> apparent = object, any eps, tau
    for eps, tau in [(0.3, 1.0), (0.93, 0.8), (0.6, 0.5)]:
        app = object_to_apparent(12.0, emissivity=eps, reflected_c=12.0, transmittance=tau, atmosphere_c=12.0)
        assert app == pytest.approx(12.0, abs=1e-4)


def test_transmittance_round_trip_and_direction():
    app = object_to_apparent(30.0, emissivity=0.9, reflected_c=5.0, transmittance=0.85, atmosphere_c=5.0)
    # physics: a cooler path and surroundings pull the reading down
    assert app < 30.0
    back = apparent_to_object(app, emissivity=0.9, reflected_c=5.0, transmittance=0.85, atmosphere_c=5.0)
    assert back == pytest.approx(30.0, abs=1e-3)


def test_out_of_range_emissivity_and_transmittance():
    # physics: emissivity and transmittance are fractions in (0, 1]; both conversions check them
    for convert in (object_to_apparent, apparent_to_object):
        with pytest.raises(ConfigError, match=r"transmittance = 1.5 is outside \(0, 1\]; give"):
            convert(10.0, emissivity=0.9, reflected_c=20.0, transmittance=1.5)
        with pytest.raises(ConfigError, match=r"emissivity = 0.0 is outside \(0, 1\]"):
            convert(10.0, emissivity=0.0, reflected_c=20.0)


def test_unphysical_reading_is_nan():
    # a reading far colder than eps 0.1 with 20 °C surroundings allows has negative object radiance
    assert math.isnan(apparent_to_object(-30.0, emissivity=0.1, reflected_c=20.0))


# ----------------------------------------------------------------------------- calibrate


def _frame(data, name="img.npy") -> RawFrame:
    return RawFrame(path=name, data=np.asarray(data), format="npy")


def _meta(**camera) -> SurveyMeta:
    return SurveyMeta(camera=Camera(**camera), surface=Surface(emissivity=0.93, reflected_c=20.0))


def test_calibrate_celsius_float(rng):
    app = 15.359 + rng.normal(0, 0.01, (12, 14))
    f = calibrate(_frame(app.astype(np.float32)), _meta())
    # measurement equation, Planck 7.5-14 um (CODATA 2018): 15.359 apparent -> 15.000 °C with eps 0.93,
    # refl 20 [C]
    assert np.median(f.temperature_c) == pytest.approx(15.0, abs=0.01)
    # the correction inverts the measurement equation: forward again, the reading comes back [C]
    np.testing.assert_allclose(object_to_apparent(f.temperature_c, emissivity=0.93, reflected_c=20.0), app, atol=1e-5)
    assert f.n_dead == 0 and f.n_nan == 0 and not f.mask.any()


def test_calibrate_kelvin_units():
    app = np.full((8, 8), 15.359 + 273.15)
    f = calibrate(_frame(app), _meta(units="kelvin"))
    assert np.allclose(f.temperature_c, 15.0, atol=1e-3)


def test_kelvin_values_with_celsius_units_is_an_error():
    with pytest.raises(CalibrationError, match='units = "kelvin"'):
        calibrate(_frame(np.full((8, 8), 290.0)), _meta(units="celsius"))


def test_celsius_values_with_kelvin_units_is_an_error():
    with pytest.raises(CalibrationError, match='units = "celsius"'):
        calibrate(_frame(np.full((8, 8), 18.0)), _meta(units="kelvin"))


def test_integer_scale_offset():
    # value = raw * scale + offset: 0.01 K counts with offset -273.15 (kelvin counts to °C)
    t_c = np.array([[10.0, 15.0, 20.0], [25.0, 12.5, 0.0], [-5.0, 3.25, 8.0]])
    raw = np.round((t_c + 273.15) / 0.01).astype(np.uint16)
    meta = SurveyMeta(camera=Camera(scale=0.01, offset=-273.15), surface=Surface(emissivity=1.0))
    f = calibrate(_frame(raw), meta)
    np.testing.assert_allclose(f.temperature_c, t_c, atol=0.006)  # eps 1: object = apparent


def test_integer_without_scale_hints_at_scale():
    raw = np.full((8, 8), 29000, dtype=np.uint16)
    with pytest.raises(CalibrationError, match="scale"):
        calibrate(_frame(raw), SurveyMeta())


def test_scale_ignored_for_float_with_warning():
    f = calibrate(_frame(np.full((6, 6), 20.0)), SurveyMeta(camera=Camera(scale=0.01), surface=Surface(emissivity=1.0)))
    assert np.allclose(f.temperature_c, 20.0)
    assert any("scale/offset" in w for w in f.warnings)


def test_undo_export_emissivity():
    # camera exported object temperature with eps 0.95 and refl 18 °C; re-processing with the same
    # values must give the same temperatures back, and with emissivity 1 the eps=1 reading itself
    true_c = np.linspace(5.0, 25.0, 64).reshape(8, 8)
    meta = SurveyMeta(
        camera=Camera(export_emissivity=0.95, export_reflected_c=18.0),
        surface=Surface(emissivity=0.95, reflected_c=18.0),
    )
    f = calibrate(_frame(true_c), meta)
    np.testing.assert_allclose(f.temperature_c, true_c, atol=1e-3)
    as_read = calibrate(_frame(true_c), SurveyMeta(camera=meta.camera, surface=Surface(emissivity=1.0, reflected_c=18.0)))
    np.testing.assert_allclose(as_read.temperature_c, object_to_apparent(true_c, emissivity=0.95, reflected_c=18.0),
                               atol=2e-5)


def test_export_emissivity_needs_reflected():
    meta = SurveyMeta(camera=Camera(export_emissivity=0.95))
    with pytest.raises(CalibrationError, match="export_reflected_c"):
        calibrate(_frame(np.full((5, 5), 15.0)), meta)


def test_reflected_from_the_metadata_and_the_same_rule_for_hand_built_metadata(tmp_path):
    app = np.full((6, 6), 15.0)
    # load_metadata resolves the reflected temperature (interior view: the inside air) and records it
    (tmp_path / "survey.toml").write_text("[surface]\nemissivity = 0.93\nview = 'interior'\n[air]\ninside_c = 21.0\n")
    with pytest.warns(MetadataWarning, match="reflected temperature taken as the inside air temperature, 21 °C"):
        loaded = load_metadata(tmp_path / "a.npy")
    f_loaded = calibrate(_frame(app), loaded)
    expected_in = apparent_to_object(15.0, emissivity=0.93, reflected_c=21.0)
    assert f_loaded.temperature_c[0, 0] == pytest.approx(expected_in)
    # a hand-built SurveyMeta without reflected_c gets the same rule (irseg._defaults.resolve_reflected_c)
    interior = SurveyMeta(surface=Surface(view="interior"), air=Air(inside_c=21.0, outside_c=-3.0))
    exterior = SurveyMeta(surface=Surface(view="exterior"), air=Air(inside_c=21.0, outside_c=-3.0))
    f_in = calibrate(_frame(app), interior)
    f_out = calibrate(_frame(app), exterior)
    assert f_in.temperature_c[0, 0] == pytest.approx(expected_in)
    assert f_out.temperature_c[0, 0] == pytest.approx(apparent_to_object(15.0, emissivity=0.93, reflected_c=-3.0))
    f_none = calibrate(_frame(app), SurveyMeta())
    assert f_none.temperature_c[0, 0] == pytest.approx(apparent_to_object(15.0, emissivity=0.93, reflected_c=20.0))
    # the assumption is announced once, by the metadata stage; calibrate adds no warning of its own
    assert not f_loaded.warnings and not f_in.warnings and not f_out.warnings and not f_none.warnings


def test_frame_is_data_only():
    f = calibrate(_frame(np.full((4, 4), 15.0)), _meta())
    assert not hasattr(f, "meta")  # settings travel explicitly as the SurveyMeta argument of each stage


def test_broadband_method_differs_outdoors():
    meta = SurveyMeta(surface=Surface(emissivity=0.84, reflected_c=-30.0))
    app = np.full((5, 5), 13.727)
    planck = calibrate(_frame(app), meta)
    broad = calibrate(_frame(app), meta, method="broadband")
    # Planck 7.5-14 um versus the broadband sigma T^4 inversion [C]: 20 °C true, sigma T^4 gives 20.121 °C
    assert planck.temperature_c[0, 0] == pytest.approx(20.0, abs=2e-3)
    assert broad.temperature_c[0, 0] == pytest.approx(20.121, abs=2e-3)
    with pytest.raises(ConfigError):
        calibrate(_frame(app), meta, method="nope")


def test_nan_pixels_masked_and_filled(rng):
    img = 20.0 + rng.normal(0, 0.05, (20, 20))
    img[3, 4] = np.nan
    img[10:12, 10:13] = np.nan
    f = calibrate(_frame(img), _meta())
    assert f.n_nan == 7
    assert f.mask[3, 4] and f.mask[10:12, 10:13].all()
    assert np.isfinite(f.temperature_c).all()
    # an apparent 20 °C under reflected 20 °C is a 20 °C surface whatever the emissivity [C]
    assert abs(f.temperature_c[3, 4] - 20.0) < 0.3


def test_all_nan_is_input_error():
    with pytest.raises(InputError, match="no finite pixel"):
        calibrate(_frame(np.full((5, 5), np.nan)), _meta())


def test_constant_image_is_fine():
    f = calibrate(_frame(np.full((10, 10), 18.0)), _meta())
    assert f.n_dead == 0 and not f.mask.any()
    assert np.ptp(f.temperature_c) == 0.0


# ----------------------------------------------------------------------------- dead pixels


def test_dead_pixels_found_and_real_features_kept(rng):
    img = 20.0 + rng.normal(0, 0.05, (40, 50))
    img[5:15, 5:20] += 3.0  # a warm region: its corners and edges must survive
    img[25:27, 30:32] += 6.0  # a real 2x2 hot spot
    img[33, 5:45] += 4.0  # a thin warm line (pipe)
    dead = [(20, 40), (2, 45), (0, 0), (39, 49), (30, 10)]
    img[20, 40] = 80.0  # hot pixel
    img[2, 45] = -15.0  # dead (cold) pixel
    img[0, 0] = 35.0  # corner of the image
    img[39, 49] = 5.0
    img[30, 10] = 26.0
    found = mask_dead_pixels(img)
    assert sorted(map(tuple, np.argwhere(found).tolist())) == sorted(dead)
    f = calibrate(_frame(img), _meta())
    assert f.n_dead == 5
    assert not f.mask[25:27, 30:32].any() and not f.mask[5:15, 5:20].any() and not f.mask[33].any()
    # filled with the local median: close to the background, not to the dead value
    assert abs(f.temperature_c[20, 40] - 20.0) < 0.3


def test_fill_masked_local_median():
    img = np.arange(25, dtype=float).reshape(5, 5)
    mask = np.zeros_like(img, dtype=bool)
    mask[2, 2] = True
    img[2, 2] = 1e6
    out = fill_masked(img, mask)
    # neighbours of (2,2) after nearest fill: 6,7,8,11,(fill = 7, 11, 13 or 17),13,16,17,18 -> median 11 or 13
    assert 11.0 <= out[2, 2] <= 13.0
    assert out[0, 0] == 0.0


@settings(max_examples=150, deadline=None)
@given(
    t_obj=st.floats(-60.0, 150.0),
    t_refl=st.floats(-60.0, 150.0),
    eps=st.floats(0.3, 1.0),
    band=st.sampled_from(BANDS),
)
def test_round_trip_property(t_obj, t_refl, eps, band):
    # requirement: inversion within 10 mK over -60...+150 °C, any emissivity and surroundings
    app = object_to_apparent(t_obj, emissivity=eps, reflected_c=t_refl, band_um=band)
    back = apparent_to_object(app, emissivity=eps, reflected_c=t_refl, band_um=band)
    assert abs(back - t_obj) < 0.010
    # physics: the reading lies between the object and its surroundings
    assert min(t_obj, t_refl) - 1e-3 <= app <= max(t_obj, t_refl) + 1e-3


def test_fast_3x3_median_matches_scipy_reference(rng):
    # reference library: scipy.ndimage.median_filter(size=3, mode="mirror") on building-range temperatures
    from scipy import ndimage

    from irseg.radiometry._dead_pixels import _rad_median3

    image = 18.0 + rng.normal(0.0, 0.5, (37, 53))
    image[10, 10] = 80.0  # a hot pixel must not move the medians around it beyond their neighbours'
    expected = ndimage.median_filter(image, size=3, mode="mirror")
    np.testing.assert_allclose(_rad_median3(image), expected, atol=1e-5)


# ----------------------------------------------------------------------------- plausible values (issue 15)
# A building survey sees temperatures between -100 °C (a clear night sky reads about -50 °C, colder in
# polar climates) and +150 °C (hot pipes, flue outlets) (common practice; irseg.metadata._bounds.SURFACE_C). Up to 1 % of the pixels outside are
# masked with a warning, more is refused naming the settings to check.


def _wall(rng, shape=(30, 40), centre=18.0):
    return centre + rng.normal(0.0, 0.05, shape)


def test_a_225_c_wall_is_refused_naming_units_scale_and_offset(rng):
    # issue 15's example: "walls" at 225 °C; float values, so the message names the units
    with pytest.raises(CalibrationError) as info:
        calibrate(_frame(_wall(rng, centre=225.0)), _meta())
    msg = str(info.value)
    assert msg.startswith("img.npy: 100 % of the valid pixels read outside the plausible -100…150 °C")
    assert "median 225" in msg and '[camera] units = "celsius"' in msg and "cannot be surface temperatures" in msg
    assert 'the values look like kelvin' in msg  # 225 K would be -48 °C, a plausible temperature
    # integer counts: the message names scale and offset with their values (value = raw * scale + offset)
    raw = np.full((20, 20), 5000, dtype=np.uint16)  # 5000 * 0.1 + 0 = 500 °C, neither °C nor K of a surface
    with pytest.raises(CalibrationError, match=r"scale = 0\.1, offset = 0; these cannot be surface temperatures; "
                                               r"check \[camera\] scale and offset"):
        calibrate(_frame(raw), _meta(scale=0.1))


def test_a_few_absurd_pixels_are_masked_as_implausible_not_blamed_on_the_surroundings(rng):
    # issue 15 item 19: 1e30 °C pixels were reported as "colder than the reflected surroundings allow"
    img = _wall(rng)
    img[4, 5] = 1e30
    img[20, 30] = -400.0  # below absolute zero (SI: 0 K = -273.15 °C)
    img[10, 10:13] = 450.0  # a small flue outlet, hotter than any building surface
    f = calibrate(_frame(img), _meta())
    assert f.mask[4, 5] and f.mask[20, 30] and f.mask[10, 10:13].all()
    assert f.n_dead == 5 and f.n_nan == 0
    (warning,) = f.warnings
    assert warning.startswith("5 pixel(s) read outside the plausible -100…150 °C (as far as 1e+30 °C)")
    assert '[camera] units = "celsius"' in warning and "colder than" not in warning
    assert np.all(np.abs(f.temperature_c - 18.0) < 1.0)  # filled from their neighbours


def test_more_than_one_percent_implausible_pixels_refuse_the_image(rng):
    img = _wall(rng, (20, 50))  # 1000 pixels: 10 may be masked, 11 may not
    img[0, :10] = 300.0
    assert calibrate(_frame(img), _meta()).mask[0, :10].all()
    img[1, 0] = 300.0
    with pytest.raises(CalibrationError, match=r"^img.npy: 1\.1 % of the valid pixels read outside"):
        calibrate(_frame(img), _meta())


def test_kelvin_hint_kept_for_whole_images(rng):
    # 291 K stored with units celsius: the message says what to set (SI: T/K = t/°C + 273.15)
    with pytest.raises(CalibrationError, match='the values look like kelvin: set \\[camera\\] units = "kelvin"'):
        calibrate(_frame(_wall(rng, centre=291.0)), _meta())


def test_corrected_temperatures_are_checked_too(rng):
    # emissivity 0.05 with 20 °C surroundings: an apparent 35 °C reading is a surface of about 191 °C
    # (measurement equation with Planck's law over 7.5-14 µm; reference: scipy quad + brentq); the
    # message names the emissivity, not the units
    band = (7.5, 14.0)
    l_obj = (planck_quad(308.15, band) - 0.95 * planck_quad(293.15, band)) / 0.05
    t_obj = optimize.brentq(lambda t: planck_quad(t, band) - l_obj, 300.0, 600.0) - 273.15
    assert t_obj == pytest.approx(191.3, abs=0.1) and t_obj > 150.0
    app = _wall(rng, centre=35.0)
    meta = SurveyMeta(surface=Surface(emissivity=0.05, reflected_c=20.0))
    with pytest.raises(CalibrationError) as info:
        calibrate(_frame(app), meta)
    msg = str(info.value)
    assert "after the emissivity correction" in msg and "[surface] emissivity = 0.05, reflected_c = 20 °C" in msg


def test_a_bad_band_is_named_not_blamed_on_emissivity(rng):
    # issue 15 item 19: a band outside the thermal infrared made every pixel "unphysical", blamed on emissivity
    for band in ((0.01, 0.02), (0.3, 0.5), (7.5, 1000.0), (14.0, 7.5)):
        meta = SurveyMeta(camera=Camera(band_um=band), surface=Surface(emissivity=0.93, reflected_c=20.0))
        with pytest.raises(CalibrationError) as info:
            calibrate(_frame(_wall(rng)), meta)
        msg = str(info.value)
        assert "[camera] band_um" in msg and "2-20 µm" in msg and "emissivity" not in msg, band


def test_surface_far_from_the_air_temperatures_warns(rng):
    # envelope surfaces lie between the inside and outside air in the heating season (conduction, ISO 6946
    # steady state); 60 °C with 20 °C inside and 0 °C outside is more than 20 K beyond both
    meta = SurveyMeta(surface=Surface(emissivity=1.0, reflected_c=20.0), air=Air(inside_c=20.0, outside_c=0.0))
    f = calibrate(_frame(_wall(rng, centre=60.0)), meta)
    (warning,) = f.warnings
    assert warning.startswith("the median surface temperature 60.0 °C lies more than 20 K outside the air")
    assert "inside 20 °C, outside 0 °C, reflected 20 °C" in warning
    assert not calibrate(_frame(_wall(rng, centre=15.0)), meta).warnings
