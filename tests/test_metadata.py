"""Survey metadata: layering, validation messages, defaults resolved once, renamed keys, JSON round trip."""

from __future__ import annotations

import dataclasses
import json
import os
import re
import threading
from pathlib import Path

import pytest

from irseg._defaults import resolve_reflected_c
from irseg.errors import MetadataError, MetadataWarning
from irseg.metadata import (
    BOUNDS,
    check_overrides,
    load_metadata,
    merge_metadata,
    meta_from_dict,
    meta_to_dict,
    parse_metadata_text,
    survey_condition_warnings,
)
from irseg.types import Air, Assumption, Surface, SurveyMeta

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
        ("[camera]\ndistance_m = -2.0", "distance_m = -2.0 is outside (0, 150] m"),
        ("[camera]\nhfov_deg = 180", "hfov_deg = 180 is outside [1, 120] °"),
        ("[camera]\ntilt_deg = 85", "tilt_deg = 85 is outside [0, 80]"),
        ("[camera]\npixel_m = 0", "pixel_m = 0 is outside"),
        ("[camera]\ntransmittance = 1.2", "transmittance = 1.2 is outside [0.5, 1]"),
        ("[camera]\nnetd_k = 0", "netd_k = 0 is outside"),
        ("[camera]\nscale = 0", "scale = 0 is zero"),
        ('[camera]\nunits = "fahrenheit"', "not a valid choice"),
        ('[surface]\nview = "inside"', 'use one of "interior", "exterior", "roof"'),
        ('[surface]\nheat_flow = "up"', "heat_flow"),
        ("[analysis]\ndegree_days = -1", "degree_days = -1 is outside [0"),
        ("[analysis]\nfrsi_limit = 1.0", "frsi_limit = 1.0 is outside [0.4, 0.95]"),
        ("[analysis]\nh_uncertainty_rel = -0.1", "h_uncertainty_rel = -0.1 is outside [0"),
        ("[analysis]\ndistance_uncertainty_rel = -1", "distance_uncertainty_rel = -1 is outside [0"),
        ("[surface]\nemissivity_uncertainty_abs = 1", "emissivity_uncertainty_abs = 1 is outside [0, 0.2]"),
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


# a folder file giving the three [surface] keys whose absence is an assumption, for tests about other things
FULL_SURFACE = "[surface]\nemissivity = 0.90\nreflected_c = 19.0\nview = 'interior'\n"


def test_sidecar_overrides_folder_key_by_key(tmp_path):
    _write(tmp_path / "survey.toml", "[surface]\nemissivity = 0.90\nview = 'exterior'\nreflected_c = -5.0\n[air]\noutside_c = 2.0\n")
    _write(tmp_path / "wall_03.toml", "[surface]\nemissivity = 0.95\n")
    meta = load_metadata(tmp_path / "wall_03.tiff")
    assert meta.surface.emissivity == 0.95  # sidecar wins
    assert meta.surface.view == "exterior"  # folder value kept
    assert meta.air.outside_c == 2.0
    assert meta.sources == (str(tmp_path / "survey.toml"), str(tmp_path / "wall_03.toml"))
    # another image in the folder sees only the defaults
    assert load_metadata(tmp_path / "wall_04.tiff").surface.emissivity == 0.90


def test_overrides_override_sidecar(tmp_path):
    _write(tmp_path / "survey.toml", FULL_SURFACE)
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


def test_no_files_gives_defaults_and_records_what_was_assumed(tmp_path):
    with pytest.warns(MetadataWarning) as record:
        meta = load_metadata(tmp_path / "x.npy")
    # the documented defaults (irseg.types): interior view, emissivity 0.93 [CP: painted and mineral
    # building surfaces are 0.90-0.95, from memory], reflected 20 °C room temperature [CP]
    assumed = {a.key: a.value for a in meta.assumed}
    assert assumed == {"surface.view": "interior", "surface.emissivity": 0.93, "surface.reflected_c": 20.0}
    assert meta == dataclasses.replace(
        SurveyMeta(), surface=Surface(reflected_c=20.0), assumed=meta.assumed
    )  # nothing else differs from the defaults
    assert meta.camera.hfov_deg is None  # missing geometry is not an error here
    messages = [str(w.message) for w in record]
    assert len(messages) == 3
    assert any('view taken as "interior"' in m for m in messages)
    assert any("emissivity taken as 0.93" in m for m in messages)
    assert any("reflected temperature taken as 20 °C" in m for m in messages)


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


def test_meta_round_trip_keeps_the_assumptions(tmp_path):
    with pytest.warns(MetadataWarning):
        meta = load_metadata(tmp_path / "img.tif", overrides={"air": {"inside_c": 21.5}})
    record = json.loads(json.dumps(meta_to_dict(meta)))
    (entry,) = [a for a in record["assumed"] if a["key"] == "surface.reflected_c"]
    assert entry["value"] == 21.5 and "inside air temperature, 21.5 °C" in entry["reason"]
    assert meta_from_dict(record) == meta  # every key is in the record: nothing assumed again, no warning


def test_meta_from_dict_refuses_a_malformed_assumed_list():
    with pytest.raises(MetadataError, match="assumed entry"):
        meta_from_dict({"surface": {"emissivity": 0.9, "view": "interior", "reflected_c": 20.0},
                        "assumed": [{"key": "surface.view"}]})


# ----------------------------------------------------------------------------- defaults resolved once
# The rule (docs/radiometry.md, irseg._defaults): [surface] reflected_c when given, else the air on the
# camera's side (inside air for an interior view, outside air for exterior and roof views), else 20 °C.
# Using the air temperature as a stand-in for the surroundings is common practice [CP] when the
# reflected temperature was not measured (ASTM E1862 describes how to measure it, from memory).


def _surface_toml(view: str | None) -> str:
    return "[surface]\nemissivity = 0.92\n" + (f'view = "{view}"\n' if view else "")


@pytest.mark.parametrize(
    ("view", "expected", "side"),
    [("interior", 19.5, "inside"), ("exterior", -2.5, "outside"), ("roof", -2.5, "outside")],
)
def test_reflected_assumed_from_the_air_on_the_camera_side(tmp_path, view, expected, side):
    _write(tmp_path / "survey.toml", _surface_toml(view) + "[air]\ninside_c = 19.5\noutside_c = -2.5\n")
    with pytest.warns(MetadataWarning) as record:
        meta = load_metadata(tmp_path / "a.tif")
    assert meta.surface.reflected_c == expected
    (message,) = [str(w.message) for w in record]  # one warning, naming the value taken and the fix
    assert message == (
        f"no [surface] reflected_c: reflected temperature taken as the {side} air temperature, "
        f"{expected:g} °C; measure it (reflector method) for an accurate estimate"
    )
    assert meta.assumed == (Assumption("surface.reflected_c", expected, message),)
    # later stages see the resolved value and, through the record, that it was not given
    assert resolve_reflected_c(meta) == (expected, message)


def test_reflected_assumed_20_c_without_air_on_the_camera_side(tmp_path):
    # only the outside air is known, but the camera is inside: the room-temperature default [CP]
    _write(tmp_path / "survey.toml", _surface_toml("interior") + "[air]\noutside_c = -2.5\n")
    with pytest.warns(MetadataWarning, match=r"no air temperature on the camera's side: reflected temperature taken as 20"):
        meta = load_metadata(tmp_path / "a.tif")
    assert meta.surface.reflected_c == 20.0
    assert [a.key for a in meta.assumed] == ["surface.reflected_c"]


def test_given_reflected_is_kept_and_nothing_is_assumed(tmp_path, recwarn):
    _write(tmp_path / "survey.toml", _surface_toml("roof") + "reflected_c = -18.0\n[air]\noutside_c = 1.0\n")
    meta = load_metadata(tmp_path / "a.tif")
    assert meta.surface.reflected_c == -18.0 and meta.assumed == ()
    assert not [w for w in recwarn if issubclass(w.category, MetadataWarning)]


def test_reflected_none_in_overrides_means_not_given(tmp_path):
    _write(tmp_path / "survey.toml", _surface_toml("interior") + "reflected_c = 18.0\n[air]\ninside_c = 21.0\n")
    with pytest.warns(MetadataWarning, match="taken as the inside air temperature, 21 °C"):
        meta = load_metadata(tmp_path / "a.tif", overrides={"surface": {"reflected_c": None}})
    assert meta.surface.reflected_c == 21.0


def test_view_and_emissivity_assumed_only_when_no_layer_gives_them():
    with pytest.warns(MetadataWarning) as record:
        meta = merge_metadata({"surface": {"reflected_c": 20.0}}, {"surface": {"emissivity": 0.95}})
    assert meta.assumed == (Assumption("surface.view", "interior", "the default"),)
    assert [str(w.message) for w in record] == [
        'no [surface] view given: view taken as "interior" (the default); '
        'set view = "exterior" or "roof" for shots taken from outside'
    ]
    with pytest.warns(MetadataWarning, match=r"emissivity taken as 0.93 \(the default"):
        meta = merge_metadata({"surface": {"reflected_c": 20.0, "view": "exterior"}})
    assert [a.key for a in meta.assumed] == ["surface.emissivity"]


def test_resolve_reflected_c_on_hand_built_metadata():
    # the same rule for a SurveyMeta built without load_metadata
    assert resolve_reflected_c(SurveyMeta(surface=Surface(reflected_c=-30.0))) == (-30.0, None)
    air = Air(inside_c=21.0, outside_c=-3.0)
    for view, expected in (("interior", 21.0), ("exterior", -3.0), ("roof", -3.0)):
        value, reason = resolve_reflected_c(SurveyMeta(surface=Surface(view=view), air=air))
        assert value == expected and reason is not None and f"{expected:g} °C" in reason
    value, reason = resolve_reflected_c(SurveyMeta(surface=Surface(view="roof"), air=Air(inside_c=21.0)))
    assert value == 20.0 and "taken as 20 °C" in reason
    # a resolved value recorded as assumed keeps its reason: "None" always means "given"
    recorded = Assumption("surface.reflected_c", 21.0, "why")
    assert resolve_reflected_c(SurveyMeta(surface=Surface(reflected_c=21.0), assumed=(recorded,))) == (21.0, "why")


# ----------------------------------------------------------------------------- renamed keys


@pytest.mark.parametrize(
    ("section", "old", "new", "value"),
    [
        ("analysis", "distance_uncertainty", "distance_uncertainty_rel", 0.1),
        ("analysis", "h_uncertainty", "h_uncertainty_rel", 0.3),
        ("surface", "emissivity_uncertainty", "emissivity_uncertainty_abs", 0.04),
    ],
)
def test_old_key_names_still_read_with_a_warning(section, old, new, value):
    with pytest.warns(MetadataWarning, match=rf"^survey.toml: \[{section}\] {old} is renamed: use {new}"):
        tree = parse_metadata_text(f"[{section}]\n{old} = {value}\n", source="survey.toml")
    assert tree == {section: {new: value}}
    with pytest.warns(MetadataWarning, match=f"renamed: use {new}"):
        assert check_overrides({section: {old: value}}) == {section: {new: value}}
    assert parse_metadata_text(f"[{section}]\n{new} = {value}\n", source="s.toml") == {section: {new: value}}


def test_old_and_new_name_together_is_an_error():
    with pytest.raises(MetadataError, match="gives both h_uncertainty .* keep only h_uncertainty_rel"):
        parse_metadata_text("[analysis]\nh_uncertainty = 0.2\nh_uncertainty_rel = 0.3\n", source="s.toml")


def test_old_name_in_the_wrong_section_points_to_its_section():
    msg = _err("[surface]\nh_uncertainty = 0.2")
    assert "belongs in [analysis]" in msg


def test_renamed_fields_on_the_dataclasses(tmp_path):
    _write(tmp_path / "survey.toml", FULL_SURFACE + "emissivity_uncertainty_abs = 0.03\n"
           "[analysis]\ndistance_uncertainty_rel = 0.1\nh_uncertainty_rel = 0.25\n")
    meta = load_metadata(tmp_path / "a.tif")
    assert meta.surface.emissivity_uncertainty_abs == 0.03
    assert (meta.analysis.distance_uncertainty_rel, meta.analysis.h_uncertainty_rel) == (0.1, 0.25)


# ----------------------------------------------------------------------------- bounded metadata reads


def test_fifo_sidecar_fails_that_image_without_blocking(tmp_path):
    if not hasattr(os, "mkfifo"):
        pytest.skip("named pipes need a POSIX system")
    _write(tmp_path / "survey.toml", FULL_SURFACE)
    os.mkfifo(tmp_path / "wall.toml")
    outcome: list[BaseException | object] = []

    def load() -> None:
        try:
            outcome.append(load_metadata(tmp_path / "wall.tif"))
        except BaseException as exc:  # noqa: BLE001 - handed to the test thread
            outcome.append(exc)

    worker = threading.Thread(target=load, daemon=True)
    worker.start()
    worker.join(60.0)  # a hang guard, not a speed check: a blocking open of the pipe never returns
    if worker.is_alive():  # release the blocked reader so the test ends, then fail
        os.close(os.open(tmp_path / "wall.toml", os.O_WRONLY | os.O_NONBLOCK))
        worker.join()
        pytest.fail("load_metadata blocked on a named pipe")
    (exc,) = outcome
    assert isinstance(exc, MetadataError)
    assert str(exc).startswith(f"{tmp_path / 'wall.toml'}: the metadata file is not a regular file")
    # the other images of the folder are not affected
    assert load_metadata(tmp_path / "other.tif").surface.emissivity == 0.90


def test_oversized_survey_file_is_refused(tmp_path):
    blob = FULL_SURFACE + ("# " + "x" * 98 + "\n") * 20_000  # 2 MB of comments: valid TOML, too large
    _write(tmp_path / "survey.toml", blob)
    with pytest.raises(MetadataError, match=r"survey.toml: the metadata file is \d+ bytes, more than the 1048576"):
        load_metadata(tmp_path / "a.tif")


def test_folder_named_like_a_sidecar_is_refused(tmp_path):
    (tmp_path / "x.toml").mkdir()
    with pytest.raises(MetadataError, match=r"x.toml: the metadata file is not a regular file \(a folder"):
        load_metadata(tmp_path / "x.tif")


# ----------------------------------------------------------------------------- bounds (issue 15)
# Every number has the range a building survey can have (irseg.metadata.BOUNDS, listed in the guide).


@pytest.mark.parametrize(
    ("text", "needle"),
    [
        # the values of issue 15: each gave an absurd result (4.5e12 W, 982 MB of memory) without a word
        ("[camera]\ndistance_m = 1e6", "distance_m = 1000000.0 is outside (0, 150] m"),
        ("[camera]\nhfov_deg = 179.999", "hfov_deg = 179.999 is outside [1, 120] °"),
        ("[segment]\nmin_feature_px = 30000", "min_feature_px = 30000 is outside [1, 100] px"),
        ("[segment]\nmin_feature_px = 1e9", "min_feature_px = 1000000000.0 is outside [1, 100] px"),
        ("[air]\nwind_m_s = 100", "wind_m_s = 100 is outside [0, 40] m/s"),
        ("[air]\noutside_c = -80", "outside_c = -80 is outside [-60, 60] °C"),
        ("[surface]\nreflected_c = 150", "reflected_c = 150 is outside [-100, 100] °C"),
        ("[camera]\npixel_m = 3", "pixel_m = 3 is outside (0, 1] m"),
        ("[camera]\nnetd_k = 5", "netd_k = 5 is outside (0, 2] K"),
        ("[camera]\nscale = 1e9", "scale = 1000000000.0 is outside [-1000, 1000] per count"),
        ("[camera]\noffset = 1e5", "offset = 100000.0 is outside [-1000, 1000]"),
        ("[analysis]\ndegree_days = 20000", "degree_days = 20000 is outside [0, 15000] K·d"),
        ("[analysis]\nmin_delta_t_k = 80", "min_delta_t_k = 80 is outside [0, 50] K"),
        ("[segment]\nmin_step_k = 60", "min_step_k = 60 is outside (0, 50] K"),
        ("[segment]\nnoise_k = 10", "noise_k = 10 is outside (0, 5] K"),
        ("[camera]\nband_um = [0.4, 0.7]", "is outside the thermal infrared, 2-20 µm"),
        ("[camera]\nband_um = [8.0, 1000.0]", "is outside the thermal infrared, 2-20 µm"),
    ],
)
def test_implausible_values_are_refused_naming_file_key_and_fix(text, needle):
    msg = _err(text)
    assert msg.startswith("survey.toml: [") and needle in msg
    assert msg.count(";") >= 1 and msg.split(";", 1)[1].strip()  # a fix follows the reason


@pytest.mark.parametrize(
    ("section", "key", "value"),
    [
        ("camera", "distance_m", 120.0),  # drone ceiling, EU Regulation 2019/947 open category (from memory)
        ("camera", "hfov_deg", 6.0),  # a telephoto thermal lens (common practice)
        ("camera", "hfov_deg", 90.0),  # a wide-angle thermal lens (common practice)
        ("camera", "netd_k", 0.1),  # a recommended minimum NETD for building surveys (common practice)
        ("camera", "transmittance", 0.95),  # long-wave path of some tens of metres (common practice)
        ("camera", "offset", -273.15),  # kelvin counts to °C (SI Brochure, 9th edition)
        ("surface", "reflected_c", -50.0),  # a clear night sky at mid latitudes (common practice)
        ("air", "outside_c", -60.0),  # a Siberian winter night (WMO extremes, from memory)
        ("air", "outside_c", 55.0),  # a desert summer (WMO extremes, from memory)
        ("air", "wind_m_s", 32.7),  # the lower edge of Beaufort force 12 (WMO, from memory)
        ("analysis", "degree_days", 5665.0),  # Finland's 1979-2021 average, Eurostat
        ("analysis", "frsi_limit", 0.70),  # DIN 4108-2
        ("analysis", "frsi_limit", 0.75),  # UK practice
        ("analysis", "min_delta_t_k", 10.0),  # EN 13187 / ASTM C1060
        ("analysis", "max_wind_m_s", 6.7),  # ASTM C1060
    ],
)
def test_values_real_surveys_have_are_accepted(section, key, value):
    assert check_overrides({section: {key: value}}) == {section: {key: value}}


def test_every_bound_is_enforced_at_its_ends():
    # the schema applies each range of BOUNDS as written: open ends refused, closed ends accepted
    assert set(BOUNDS) == {"camera", "surface", "air", "analysis", "segment"}
    for section, keys in BOUNDS.items():
        for key, bound in keys.items():
            for end, is_open, step in ((bound.lo, bound.lo_open, -1.0), (bound.hi, bound.hi_open, 1.0)):
                if end is None:
                    continue
                outside = end + step * max(1e-6, abs(end) * 1e-6)
                with pytest.raises(MetadataError, match=re.escape(f"is outside {bound.text()}")):
                    check_overrides({section: {key: outside}})
                if end == 0.0 and key == "scale":
                    continue  # zero scale has its own message (test_value_errors)
                if is_open:
                    with pytest.raises(MetadataError, match=re.escape(f"[{section}] {key} = ")):
                        check_overrides({section: {key: end}})
                else:
                    assert check_overrides({section: {key: end}}) == {section: {key: end}}


def test_every_bound_has_a_reason_and_is_listed_in_the_guide():
    # "every tunable has a documented range" (issue 15): docs/guide.md lists each range as BOUNDS has it
    guide = (Path(__file__).resolve().parents[1] / "docs" / "guide.md").read_text(encoding="utf-8")
    rows = {}
    for line in guide.splitlines():
        cells = [c.strip() for c in line.replace("\\|", "/").strip().strip("|").split("|")]
        if len(cells) >= 5 and cells[0].startswith("`") and cells[0].endswith("`"):
            rows[cells[0].strip("`")] = cells
    for section, keys in BOUNDS.items():
        for key, bound in keys.items():
            assert len(bound.reason) > 20, (section, key)
            assert key in rows, f"[{section}] {key} is not in a key table of docs/guide.md"
            assert rows[key][3] == bound.text(), (key, rows[key][3], bound.text())
            assert f"`{key}`: " in guide, f"the guide gives no reason for the range of {key}"


def test_a_400_digit_integer_is_a_metadata_error():
    # issue 15 item 17: it gave "unexpected OverflowError"; Python floats end near 1.8e308 (IEEE 754 double)
    msg = _err("[camera]\ndistance_m = " + "9" * 400)
    assert msg.startswith("survey.toml: [camera] distance_m = <an integer of 400 digits> is too large")
    assert "write a plain number" in msg
    with pytest.raises(MetadataError, match=r"^command line: \[analysis\] degree_days = <an integer of 401"):
        check_overrides({"analysis": {"degree_days": 10**400}})
    # beyond 4300 digits Python refuses to convert the text at all (sys.get_int_max_str_digits)
    msg = _err("[camera]\ndistance_m = " + "9" * 5000)
    assert msg.startswith("survey.toml: a TOML value cannot be read") and "plain numbers" in msg


def test_a_deeply_nested_value_is_a_metadata_error():
    nested: list = [7.5, 14.0]
    for _ in range(5000):
        nested = [nested]
    with pytest.raises(MetadataError, match=r"band_um = <a deeply nested list> is not a list of two numbers"):
        check_overrides({"camera": {"band_um": nested}})


# ----------------------------------------------------------------------------- conditions across a survey


def _air_meta(inside=None, outside=None) -> SurveyMeta:
    return SurveyMeta(air=Air(inside_c=inside, outside_c=outside))


def test_sample_survey_outside_air_contradiction_is_reported():
    # the bundled sample survey (issue 15's example): walls at 1.0 °C outside, roof sidecars at 8.71 °C;
    # the outside air of one night session moves by a degree or two (common practice), not 7.7 K
    samples = Path(__file__).resolve().parents[1] / "sample_images"
    metas = {p.name: load_metadata(p) for p in sorted(samples.glob("lf0*")) if p.suffix != ".toml"}
    assert len(metas) == 8
    (msg,) = survey_condition_warnings(metas)
    assert msg.startswith("[air] outside_c differs by 7.7 K between the images (1 °C in lf01_lounge_north_wall.tiff")
    assert "8.71 °C in lf07_extension_roof_west.tiff, lf08_extension_roof_east.png" in msg
    assert "more than the 3 K" in msg and "check outside_c in survey.toml and the sidecars" in msg


def test_survey_condition_warnings_limits_and_folders():
    ok = {"a/1.tif": _air_meta(20.0, 1.0), "a/2.tif": _air_meta(22.0, 3.5), "a/3.tif": _air_meta()}
    assert survey_condition_warnings(ok) == []  # 2.5 K outside, 2 K inside: within one session
    # different folders are different sessions: no comparison across them
    assert survey_condition_warnings({"n/1.tif": _air_meta(20.0, 1.0), "s/1.tif": _air_meta(20.0, 9.0)}) == []
    bad = {"a/1.tif": _air_meta(15.0, 1.0), "a/2.tif": _air_meta(21.0, 4.5), "b/1.tif": _air_meta(20.0, 1.0)}
    out = survey_condition_warnings(bad)
    assert len(out) == 2
    assert out[0].startswith("[air] outside_c differs by 3.5 K between the images of a "
                             "(1 °C in 1.tif; 4.5 °C in 2.tif)")
    assert out[1].startswith("[air] inside_c differs by 6.0 K between the images of a "
                             "(15 °C in 1.tif; 21 °C in 2.tif)")
    assert "more than the 5 K" in out[1]
    many = {f"c/{k}.tif": _air_meta(None, 1.0) for k in range(6)} | {"c/z.tif": _air_meta(None, 8.0)}
    (msg,) = survey_condition_warnings(many)
    assert "1 °C in 0.tif, 1.tif, 2.tif and 3 more; 8 °C in z.tif" in msg
