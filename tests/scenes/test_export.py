"""Every export format, with its TOML metadata, reads back to the simulated temperatures."""

from __future__ import annotations

import tomllib

import numpy as np
import pytest

from irseg.errors import ConfigError, MetadataError, OutputError
from irseg.io import read_thermogram
from irseg.io import (
    format_metadata_toml,
    npz_bytes,
    png16_bytes,
    quantise_u16,
    write_npz,
    write_png16,
    write_tiff_u16,
)
from irseg.metadata import load_metadata
from irseg.radiometry import calibrate
from irseg.scenes import (
    CameraModel,
    Conditions,
    encode_values,
    missing_bay,
    shoot,
    simulate_scene,
    timber_frame_wall,
    write_image,
    write_toml,
)


@pytest.fixture(scope="module")
def shot():
    el = timber_frame_wall(width_m=1.2, height_m=0.9, cell_m=0.03)
    sc = simulate_scene(el, (missing_bay(el, 1),), Conditions(outside_exposure="ventilated"), view="interior")
    cam = CameraModel(n_cols=64, n_rows=48, hfov_deg=45.0, distance_m=1.2, psf_sigma_px=0.0, netd_k=0.0,
                      column_sigma_k=0.0, shading=0.0)
    return sc, shoot(sc, cam)


CASES = [
    # fmt, units, scale, offset, delimiter, decimal, export_emissivity, tolerance K (quantisation step / 2 + margin)
    ("tiff-float", "celsius", 1.0, 0.0, ",", ".", 1.0, 1e-4),
    ("tiff-u16", "kelvin", 0.01, 0.0, ",", ".", 1.0, 0.006),
    ("png16", "celsius", 0.01, -50.0, ",", ".", 1.0, 0.006),
    ("csv", "celsius", 1.0, 0.0, ";", ",", 1.0, 0.006),
    ("csv", "celsius", 1.0, 0.0, ",", ".", 0.95, 0.006),
    ("npy", "kelvin", 1.0, 0.0, ",", ".", 1.0, 1e-3),
]


@pytest.mark.parametrize(("fmt", "units", "scale", "offset", "delim", "dec", "e_exp", "tol"), CASES)
def test_round_trip_through_readers_and_calibration(tmp_path, shot, fmt, units, scale, offset, delim, dec, e_exp,
                                                    tol):
    sc, sh = shot
    vals = encode_values(sh.apparent_c, units=units, export_emissivity=e_exp, export_reflected_c=20.0)
    path = write_image(tmp_path, "img", vals, fmt=fmt, scale=scale, offset=offset, delimiter=delim, decimal=dec)
    camera = {"hfov_deg": 45.0, "distance_m": 1.2, "units": units}
    if fmt in ("tiff-u16", "png16"):
        camera.update(scale=scale, offset=offset)
    if e_exp != 1.0:
        camera.update(export_emissivity=e_exp, export_reflected_c=20.0)
    write_toml(tmp_path / "img.toml", {
        "camera": camera,
        "surface": {"emissivity": sc.conditions.emissivity, "reflected_c": sh.reflected_c, "view": "interior"},
        "air": {"inside_c": 20.0, "outside_c": 0.0, "wind_m_s": 1.0},
    })
    raw = read_thermogram(path)
    frame = calibrate(raw, load_metadata(path))
    # the calibrated surface temperature is the simulated one (noise and blur were off)
    assert np.abs(frame.temperature_c - sh.object_c).max() < tol + 1e-3


def test_integer_range_overflow_is_refused(tmp_path):
    with pytest.raises(ConfigError, match="16 bits"):
        write_image(tmp_path, "x", np.full((4, 4), 80.0), fmt="png16", scale=0.001, offset=0.0)
    with pytest.raises(ConfigError, match="decimal"):
        write_image(tmp_path, "x", np.full((4, 4), 20.0), fmt="csv", delimiter=",", decimal=",")


def test_write_toml_refuses_metadata_irseg_would_reject(tmp_path):
    # the metadata schema (irseg.types / irseg.metadata): [surface] emissivity must lie in (0, 1]
    with pytest.raises(MetadataError, match="emissivity"):
        write_toml(tmp_path / "bad.toml", {"surface": {"emissivity": 1.7}})
    with pytest.raises(MetadataError, match="hfov"):
        write_toml(tmp_path / "bad.toml", {"camera": {"hfov": 45.0}})
    assert not (tmp_path / "bad.toml").exists()


def test_toml_text_parses_and_skips_none():
    text = format_metadata_toml({"camera": {"band_um": (7.5, 14.0), "scale": 0.01, "units": "kelvin", "x": None},
                      "surface": {"view": 'say "roof"'}, "empty": {"a": None}}, header="two\nlines")
    data = tomllib.loads(text)
    assert data == {"camera": {"band_um": [7.5, 14.0], "scale": 0.01, "units": "kelvin"},
                    "surface": {"view": 'say "roof"'}}
    assert text.startswith("# two\n# lines\n")


def test_csv_with_decimal_comma_layout(tmp_path):
    p = write_image(tmp_path, "c", np.array([[1.234, -2.5], [3.0, 4.0]]), fmt="csv", delimiter=";", decimal=",")
    assert p.read_text() == "1,23;-2,50\n3,00;4,00\n"


def test_metadata_toml_escapes_strings_and_quotes_keys():
    # TOML v1.0.0, "String" (basic strings escape " and \ and every control character) and "Keys"
    # (bare keys are A-Za-z0-9_-, anything else is quoted) [M]; the check is Python's own TOML 1.0
    # parser, tomllib, reading the text back to the same values.
    odd = 'back\\slash "quoted"\nnew line\ttab \x01 bell \x7f del 20 °C'
    text = format_metadata_toml({"surface": {"view": odd, "odd key.x": 1, "n": [True, 2, 0.5]},
                                 "my table": {"note": "é"}}, header="title with\ttab")
    assert tomllib.loads(text) == {"surface": {"view": odd, "odd key.x": 1, "n": [True, 2, 0.5]},
                                   "my table": {"note": "é"}}


def test_metadata_toml_refuses_what_toml_cannot_hold():
    with pytest.raises(ConfigError, match=r"\[camera\] scale"):
        format_metadata_toml({"camera": {"scale": float("nan")}})
    with pytest.raises(ConfigError, match=r"\[camera\] band_um"):
        format_metadata_toml({"camera": {"band_um": (7.5, None)}})
    with pytest.raises(ConfigError, match="control character"):
        format_metadata_toml({"camera": {"scale": 1.0}}, header="bad\x00header")


def test_integer_writers_store_the_counts(tmp_path):
    import cv2
    import tifffile

    # value = raw*scale + offset, so raw = (value - offset)/scale; 20.00 °C at 0.01 K/count and
    # offset -50 °C is count 7000 [C]. Read back by the reference decoders (OpenCV, tifffile).
    vals = np.array([[20.0, -50.0], [605.35, 0.004]])
    expected = np.array([[7000, 0], [65535, 5000]], dtype=np.uint16)
    assert np.array_equal(quantise_u16(vals, scale=0.01, offset=-50.0), expected)
    png = write_png16(tmp_path / "a.png", vals, scale=0.01, offset=-50.0)
    tif = write_tiff_u16(tmp_path / "a.tif", vals, scale=0.01, offset=-50.0)
    back = cv2.imread(str(png), cv2.IMREAD_UNCHANGED)
    assert back.dtype == np.uint16 and np.array_equal(back, expected)
    assert np.array_equal(tifffile.imread(tif), expected)
    with pytest.raises(ConfigError, match="NaN"):
        quantise_u16(np.array([[np.nan]]))
    with pytest.raises(ConfigError, match="positive"):
        quantise_u16(np.zeros((2, 2)), scale=0.0)
    with pytest.raises(OutputError, match="uint16"):
        png16_bytes(np.zeros((2, 2), np.uint8))


def test_npz_is_deterministic_and_loads_with_numpy(tmp_path):
    import zipfile

    arrays = {"b": np.eye(3, dtype=bool), "a": np.arange(6, dtype=np.float32).reshape(2, 3)}
    assert npz_bytes(arrays) == npz_bytes(dict(reversed(arrays.items())))
    path = write_npz(tmp_path / "m.npz", arrays)
    with zipfile.ZipFile(path) as zf:
        assert [i.filename for i in zf.infolist()] == ["a.npy", "b.npy"]
        assert {i.date_time for i in zf.infolist()} == {(2026, 1, 1, 0, 0, 0)}
    with np.load(path) as back:  # numpy's own reader
        assert back["b"].dtype == bool and np.array_equal(back["b"], arrays["b"])
        assert np.array_equal(back["a"], arrays["a"])
