"""The ``[costs]`` section: read from survey.toml, refused in a sidecar, bad values named by key."""

from __future__ import annotations

import numpy as np
import pytest

from irseg.errors import MetadataError, MetadataWarning
from irseg.metadata import load_metadata, meta_from_dict, meta_to_dict, parse_metadata_text
from irseg.types import Costs

COSTS_TOML = """\
[costs]
currency = "EUR"
energy_price_per_kwh = 0.12
missing_insulation_per_m2 = 85.0
moisture_per_m2 = 120
thermal_bridge_per_m = 60.0
air_leakage_per_item = 150.0
uncertainty = 0.25
"""


def test_costs_of_survey_toml_reach_the_metadata_and_round_trip(tmp_path):
    (tmp_path / "survey.toml").write_text(COSTS_TOML, encoding="utf-8")
    np.save(tmp_path / "a.npy", np.zeros((4, 4), np.float32))
    with pytest.warns(MetadataWarning):  # the assumed emissivity/view/reflected temperature are announced
        meta = load_metadata(tmp_path / "a.npy")
    assert meta.costs == Costs("EUR", 0.12, 85.0, 120.0, 60.0, 150.0, 0.25)
    data = meta_to_dict(meta)
    assert data["costs"]["moisture_per_m2"] == 120.0
    assert meta_from_dict(data).costs == meta.costs


def test_no_costs_section_means_no_prices(tmp_path):
    np.save(tmp_path / "a.npy", np.zeros((4, 4), np.float32))
    with pytest.warns(MetadataWarning):
        meta = load_metadata(tmp_path / "a.npy")
    assert meta.costs == Costs() and meta.costs.missing_insulation_per_m2 is None
    assert meta_to_dict(meta)["costs"] == {}


def test_costs_in_a_sidecar_are_refused(tmp_path):
    (tmp_path / "a.toml").write_text(COSTS_TOML, encoding="utf-8")
    np.save(tmp_path / "a.npy", np.zeros((4, 4), np.float32))
    with pytest.raises(MetadataError, match=r"a.toml: \[costs\].*survey.toml"):
        load_metadata(tmp_path / "a.npy")


@pytest.mark.parametrize("line, key", [
    ("moisture_per_m2 = -5.0", "moisture_per_m2"),
    ('energy_price_per_kwh = "cheap"', "energy_price_per_kwh"),
    ("air_leakage_per_item = true", "air_leakage_per_item"),
    ("uncertainty = 1.5", "uncertainty"),
    ("uncertainty = -0.1", "uncertainty"),
    ("thermal_bridge_per_m2 = 40.0", "thermal_bridge_per_m2"),
    ("currency = 3", "currency"),
    ("missing_insulation_per_m2 = nan", "missing_insulation_per_m2"),
])
def test_bad_costs_fail_naming_the_key(line, key):
    with pytest.raises(MetadataError) as err:
        parse_metadata_text(f"[costs]\n{line}\n", source="survey.toml")
    message = str(err.value)
    assert message.startswith("survey.toml: [costs]") and key in message


def test_an_unknown_key_suggests_the_nearest():
    with pytest.raises(MetadataError, match="did you mean 'thermal_bridge_per_m'"):
        parse_metadata_text("[costs]\nthermal_bridge_per_m2 = 40.0\n", source="survey.toml")


def test_the_survey_uses_the_first_prices_and_warns_about_others():
    from irseg.repairs import survey_costs

    first = {"currency": "EUR", "moisture_per_m2": 120.0}
    chosen, notes = survey_costs([("a.tif", {}), ("b.tif", first), ("c.tif", {"moisture_per_m2": 99.0}),
                                  ("d.tif", first), ("e.tif", {"moisture_per_m2": -1.0})])
    assert chosen.moisture_per_m2 == 120.0 and chosen.currency == "EUR"
    assert [image for image, _ in notes] == ["c.tif", "e.tif"]
    assert "b.tif" in notes[0][1] and "moisture_per_m2" in notes[1][1]
    assert survey_costs([("a.tif", None), ("b.tif", {})]) == (None, [])
