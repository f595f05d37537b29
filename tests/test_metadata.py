"""Survey metadata: layering, validation messages, JSON round trip."""

from __future__ import annotations

import json

import pytest

from irseg.errors import MetadataError
from irseg.metadata import (
    check_overrides,
    load_metadata,
    meta_from_dict,
    meta_to_dict,
    parse_metadata_text,
)
from irseg.types import SurveyMeta

# the schema example of the survey-metadata issue (common practice values of an interior survey)
EXAMPLE = """
[camera]
hfov_deg = 45.0
distance_m = 3.6
tilt_deg = 0.0
units = "celsius"
scale = 0.01
offset = -273.15
band_um = [7.5, 14.0]
[surface]
emissivity = 0.93
reflected_c = 19.5
view = "interior"
[air]
inside_c = 20.0
outside_c = 0.0
wind_m_s = 1.0
"""


def test_parse_full_example():
    tree = parse_metadata_text(EXAMPLE, source="survey.toml")
    assert tree["camera"]["band_um"] == (7.5, 14.0)
    assert tree["surface"]["emissivity"] == 0.93
    assert tree["air"]["outside_c"] == 0.0


def test_int_accepted_for_float():
    tree = parse_metadata_text("[camera]\ndistance_m = 4\n[surface]\nemissivity = 1", source="s.toml")
    assert tree["camera"]["distance_m"] == 4.0 and isinstance(tree["camera"]["distance_m"], float)


def _err(text: str) -> str:
    with pytest.raises(MetadataError) as info:
        parse_metadata_text(text, source="survey.toml")
    return str(info.value)


def test_unknown_key_suggests_nearest():
    msg = _err("[surface]\nemissivty = 0.9")
    assert msg.startswith("survey.toml: [surface]")
    assert "'emissivty'" in msg and "did you mean 'emissivity'" in msg


@pytest.mark.parametrize(
    ("text", "needles"),
    [
        ("[camera]\nemissivity = 0.9", ["belongs in [surface]"]),
        ("[camra]\nunits = 'celsius'", ["unknown section [camra]", "did you mean [camera]"]),
        ("emissivity = 0.9", ["outside any section", "[surface]"]),
        ("colour = 3", ["outside any section and is not a metadata key", "[camera]"]),
        ('[surface]\nemissivity = "high"', ['emissivity = "high"', "not a number"]),
        ("[camera]\ndistance_m = true", ["boolean", "not a number"]),
    ],
)
def test_schema_and_type_errors(text, needles):
    msg = _err(text)
    for needle in needles:
        assert needle in msg


def test_out_of_range_emissivity_message():
    # the brief's message example
    msg = _err("[surface]\nemissivity = 1.7")
    assert msg == (
        "survey.toml: [surface] emissivity = 1.7 is outside (0, 1]; use the material's long-wave emissivity"
    )


@pytest.mark.parametrize(
    ("text", "needle"),
    [
        ("[surface]\nemissivity = 0.0", "emissivity = 0.0 is outside (0, 1]"),
        ("[camera]\ndistance_m = -2.0", "distance_m = -2.0 is outside (0, inf]"),
        ("[camera]\nhfov_deg = 180", "hfov_deg = 180 is outside (0, 180)"),
        ("[camera]\ntilt_deg = 85", "tilt_deg = 85 is outside [0, 80]"),
        ("[camera]\npixel_m = 0", "pixel_m = 0 is outside"),
        ("[camera]\ntransmittance = 1.2", "transmittance = 1.2 is outside (0, 1]"),
        ("[camera]\nnetd_k = 0", "netd_k = 0 is outside"),
        ("[camera]\nscale = 0", "scale = 0 is zero"),
        ('[camera]\nunits = "fahrenheit"', "not a valid choice"),
        ('[surface]\nview = "inside"', 'use one of "interior", "exterior", "roof"'),
        ('[surface]\nheat_flow = "up"', "heat_flow"),
        ("[analysis]\ndegree_days = -1", "degree_days = -1 is outside [0"),
        ("[analysis]\nfrsi_limit = 1.0", "frsi_limit = 1.0 is outside (0, 1)"),
        ("[analysis]\nh_uncertainty = -0.1", "h_uncertainty = -0.1 is outside [0"),
        ("[analysis]\nseed = 1.5", "seed = 1.5 is a float, not an integer"),
        ("[segment]\nnoise_k = 0", "noise_k = 0 is outside (0"),
        ("[segment]\nmin_step_k = -1", "min_step_k = -1 is outside (0"),
        ("[segment]\nmin_feature_px = 0.5", "min_feature_px = 0.5 is outside [1"),
        ("[camera]\nband_um = [14.0, 7.5]", "increasing pair"),
        ("[camera]\nband_um = [7.5]", "not a list of two numbers"),
        ("[camera]\nband_um = [-1, 5]", "increasing pair"),
        ("[air]\ninside_c = 293.15", "looks like kelvin, use 20.00"),
        ("[air]\nwind_m_s = -3", "wind_m_s = -3 is outside [0"),
        ("[camera]\noffset = nan", "not finite"),
    ],
)
def test_value_errors(text, needle):
    msg = _err(text)
    assert msg.startswith("survey.toml: [")
    assert needle in msg


def test_choice_suggests_nearest():
    msg = _err('[surface]\nview = "exteror"')
    assert 'did you mean "exterior"' in msg


def test_toml_syntax_error_names_line():
    msg = _err("[camera]\nunits = 'celsius'\nhfov_deg = = 3\n")
    assert msg.startswith("survey.toml: TOML syntax error") and "line 3" in msg


def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_sidecar_overrides_folder_key_by_key(tmp_path):
    _write(tmp_path / "survey.toml", "[surface]\nemissivity = 0.90\nview = 'exterior'\n[air]\noutside_c = 2.0\n")
    _write(tmp_path / "wall_03.toml", "[surface]\nemissivity = 0.95\n")
    meta = load_metadata(tmp_path / "wall_03.tiff")
    assert meta.surface.emissivity == 0.95  # sidecar wins
    assert meta.surface.view == "exterior"  # folder value kept
    assert meta.air.outside_c == 2.0
    assert meta.sources == (str(tmp_path / "survey.toml"), str(tmp_path / "wall_03.toml"))
    # another image in the folder sees only the defaults
    assert load_metadata(tmp_path / "wall_04.tiff").surface.emissivity == 0.90


def test_overrides_override_sidecar(tmp_path):
    _write(tmp_path / "survey.toml", "[surface]\nemissivity = 0.90\n")
    _write(tmp_path / "a.toml", "[surface]\nemissivity = 0.95\n[camera]\ndistance_m = 3.0\n")
    meta = load_metadata(tmp_path / "a.png", overrides={"surface": {"emissivity": 0.80}})
    assert meta.surface.emissivity == 0.80
    assert meta.camera.distance_m == 3.0
    assert meta.sources[-1] == "command line"


def test_overrides_validated_with_source_name():
    with pytest.raises(MetadataError, match=r"^command line: \[surface\] emissivity = 0 is outside"):
        check_overrides({"surface": {"emissivity": 0}})
    with pytest.raises(MetadataError, match="did you mean 'distance_m'"):
        check_overrides({"camera": {"distanc_m": 3}})


def test_no_files_gives_defaults(tmp_path):
    meta = load_metadata(tmp_path / "x.npy")
    assert meta == SurveyMeta()
    assert meta.camera.hfov_deg is None  # missing geometry is not an error here


def test_error_in_sidecar_names_the_sidecar(tmp_path):
    side = _write(tmp_path / "b.toml", "[surface]\nemissivity = 2\n")
    with pytest.raises(MetadataError) as info:
        load_metadata(tmp_path / "b.tif")
    assert str(info.value).startswith(f"{side}: [surface] emissivity = 2 is outside (0, 1]")


def test_not_utf8_names_line(tmp_path):
    (tmp_path / "survey.toml").write_bytes(b"[surface]\nemissivity = 0.9\n# \xff\xfe\n")
    with pytest.raises(MetadataError, match="line 3 is not valid UTF-8"):
        load_metadata(tmp_path / "c.csv")


def test_meta_to_dict_json_round_trip(tmp_path):
    _write(tmp_path / "survey.toml", EXAMPLE)
    meta = load_metadata(tmp_path / "img.tif")
    d = meta_to_dict(meta)
    text = json.dumps(d)  # JSON-ready
    assert json.loads(text)["camera"]["band_um"] == [7.5, 14.0]
    assert meta_from_dict(json.loads(text)) == meta
