"""irseg.process_array: an array in memory gives the same result object as the same array in a file."""

from __future__ import annotations

import numpy as np
import pytest

import irseg
from irseg.errors import InputError, MetadataError

TOML = """
[surface]
view = "interior"
emissivity = 0.93
reflected_c = 20.0
[air]
inside_c = 20.0
outside_c = 0.0
[camera]
distance_m = 3.0
hfov_deg = 45.0
units = "celsius"
"""
TABLES = {"surface": {"view": "interior", "emissivity": 0.93, "reflected_c": 20.0},
          "air": {"inside_c": 20.0, "outside_c": 0.0}, "camera": {"distance_m": 3.0, "hfov_deg": 45.0}}


def wall() -> np.ndarray:
    rng = np.random.default_rng(7)
    t = 19.0 + rng.normal(0.0, 0.05, (96, 128))
    t[30:66, 40:90] -= 3.5  # a cold bay, 36 x 50 pixels
    return t


def test_array_in_memory_matches_the_same_array_read_from_a_file(tmp_path):
    t = wall()
    np.save(tmp_path / "wall.npy", t)
    (tmp_path / "wall.toml").write_text(TOML, encoding="utf-8")
    from_file = irseg.process_image(tmp_path / "wall.npy")
    from_dict = irseg.process_array(t, TABLES, name="wall.npy")
    from_text = irseg.process_array(t, TOML, name="wall.npy")
    assert type(from_dict) is type(from_file)
    strip = lambda rows: [{k: v for k, v in r.items() if k != "image"} for r in rows]  # noqa: E731
    assert strip(from_dict.to_records()) == strip(from_text.to_records()) == strip(from_file.to_records())
    rows = from_dict.to_records()
    assert len(rows) == 1 and rows[0]["image"] == "wall.npy" and rows[0]["area_px"] > 0
    # 36 x 50 pixels of a pinhole camera at 3 m, 45 deg over 128 columns: pixel = 2 d tan(hfov/2) / N [C]
    pixel_m = 2 * 3.0 * np.tan(np.radians(45.0) / 2) / 128
    assert rows[0]["area_m2"] == pytest.approx(36 * 50 * pixel_m**2, rel=0.25)
    # records for pandas.DataFrame: one mapping per anomaly, every key a column
    assert list(rows[0])[:2] == ["image", "anomaly"]
    rendered = irseg.render_result(from_dict)
    assert rendered.overlay_png.startswith(b"\x89PNG\r\n\x1a\n")  # PNG signature (ISO/IEC 15948, 5.2) [V]


def test_bad_arrays_and_metadata_fail_with_irseg_errors():
    with pytest.raises(InputError, match="2-D"):
        irseg.process_array(np.zeros(5), TABLES)
    with pytest.raises(MetadataError):
        irseg.process_array(wall(), {"surface": {"emissivity": 1.5}})
    with pytest.raises(MetadataError):
        irseg.process_array(wall(), "[surface\nview = 1")
