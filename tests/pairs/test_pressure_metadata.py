"""``[pressure]``: checked like every section, but a problem fails the pair, never the image."""

from __future__ import annotations

import numpy as np
import pytest

from irseg.metadata import PRESSURE_BOUNDS, load_metadata, meta_from_dict, meta_to_dict, pressure_reference
from irseg.types import Pressure

GOOD = '[pressure]\nreference = "lounge_0pa"\ndifference_pa = 50\nminutes = 15\n'
#: Everything else an image needs, so that no value is assumed (and no warning raised)
BASE = '[surface]\nemissivity = 0.93\nreflected_c = 20.0\nview = "interior"\n[air]\ninside_c = 20.0\noutside_c = 0.0\n'


def _image(folder, stem="lounge_50pa", sidecar=GOOD, survey=None):
    np.save(folder / f"{stem}.npy", np.full((8, 8), 20.0, np.float32))
    (folder / f"{stem}.toml").write_text(BASE + sidecar, encoding="utf-8")
    if survey is not None:
        (folder / "survey.toml").write_text(survey, encoding="utf-8")
    return folder / f"{stem}.npy"


def test_a_good_section_is_read(tmp_path):
    meta = load_metadata(_image(tmp_path))
    assert meta.pressure == Pressure(reference="lounge_0pa", difference_pa=50.0, minutes=15.0)
    assert meta_from_dict(meta_to_dict(meta)).pressure == meta.pressure
    assert meta_to_dict(meta)["pressure"] == {"reference": "lounge_0pa", "difference_pa": 50.0, "minutes": 15.0}


def test_an_image_without_the_section_has_no_pair(tmp_path):
    meta = load_metadata(_image(tmp_path, sidecar=""))
    assert meta.pressure is None
    assert "pressure" not in meta_to_dict(meta)


def test_the_bounds_are_those_of_the_issue():
    # ISO 9972 tests at 50 Pa [M]; the issue's interface: a difference of 1-100 Pa, minutes >= 0
    assert (PRESSURE_BOUNDS["difference_pa"].lo, PRESSURE_BOUNDS["difference_pa"].hi) == (1.0, 100.0)
    assert (PRESSURE_BOUNDS["minutes"].lo, PRESSURE_BOUNDS["minutes"].hi) == (0.0, None)


@pytest.mark.parametrize("section, words", [
    ('reference = "a"\ndifference_pa = 0.5\n', ["lounge_50pa.toml", "[pressure] difference_pa = 0.5",
                                                  "outside [1, 100] Pa", "e.g. 50"]),
    ('reference = "a"\ndifference_pa = 150\n', ["difference_pa = 150", "outside [1, 100] Pa"]),
    ('reference = "a"\ndifference_pa = 50\nminutes = -5\n', ["[pressure] minutes = -5", "outside [0, inf] min",
                                                              "leave it out"]),
    ('difference_pa = 50\n', ["[pressure] needs reference", "at ambient pressure"]),
    ('reference = "a"\n', ["[pressure] needs difference_pa"]),
    ('reference = "a"\ndifference_pa = "fifty"\n', ["difference_pa = \"fifty\"", "not a number"]),
    ('reference = "../other/a"\ndifference_pa = 50\n', ["reference = \"../other/a\"", "same folder"]),
    ('reference = "a"\ndifference_pa = 50\npascal = 3\n', ["no key 'pascal'", "valid keys"]),
])
def test_a_bad_section_is_a_problem_of_the_pair_not_of_the_image(tmp_path, section, words):
    meta = load_metadata(_image(tmp_path, sidecar="[pressure]\n" + section))  # does not raise
    assert meta.pressure is not None and meta.pressure.problem is not None
    for word in words:
        assert word in meta.pressure.problem
    again = meta_from_dict(meta_to_dict(meta))  # a result.json record stays a failed pair
    assert again.pressure is not None and again.pressure.problem is not None


def test_the_section_in_the_folder_file_fails_every_pair_it_would_make(tmp_path):
    meta = load_metadata(_image(tmp_path, sidecar="", survey=GOOD))
    assert meta.pressure is not None
    assert "survey.toml: [pressure] describes one image" in meta.pressure.problem
    assert "sidecar" in meta.pressure.problem


def test_the_planner_reads_the_reference_leniently():
    assert pressure_reference([("survey.toml", "[surface]\n"), ("a.toml", GOOD)]) == "lounge_0pa"
    assert pressure_reference([("a.toml", "[pressure\n")]) is None  # broken TOML: the metadata stage reports it
    assert pressure_reference([("a.toml", "[pressure]\nreference = 3\n")]) is None
