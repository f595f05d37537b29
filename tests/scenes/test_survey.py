"""Sample survey recipes: determinism, valid metadata, the bundled copy is what the code makes."""

from __future__ import annotations

import json
import subprocess
import sys
import warnings
from pathlib import Path

import pytest
from click.testing import CliRunner

from irseg.cli.scene import scene_cmd
from irseg.metadata import load_metadata
from irseg.scenes import SAMPLE_RECIPES, export_image, make_sample_survey

BUNDLED = Path(__file__).resolve().parents[2] / "sample_images"


def _small_recipe():
    (r,) = [r for r in SAMPLE_RECIPES if r.fmt == "csv" and r.decimal == ","]
    return r


def test_export_is_deterministic_and_matches_bundled_copy(tmp_path):
    r = _small_recipe()
    a = export_image(r, tmp_path / "a")
    export_image(r, tmp_path / "b")
    for name in (a["image"], f"{r.stem}.toml"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
        assert (tmp_path / "a" / name).read_bytes() == (BUNDLED / name).read_bytes()
    truth = json.loads((BUNDLED / "truth.json").read_text())
    (rec,) = [i for i in truth["images"] if i["image"] == a["image"]]
    assert rec["defects"] == a["defects"]


def test_sidecars_load_without_warnings():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for r in SAMPLE_RECIPES:
            img = next(p for p in BUNDLED.iterdir() if p.stem == r.stem and p.suffix != ".toml")
            meta = load_metadata(img)
            assert meta.surface.view in ("interior", "exterior", "roof")
            assert meta.air.inside_c is not None and meta.camera.distance_m == r.camera.distance_m


def test_sample_survey_is_mixed_and_small():
    files = [p for p in BUNDLED.iterdir() if p.suffix in (".tif", ".tiff", ".png", ".csv", ".npy")]
    # 6-10 images in every readable format, under 5 MB in all: the project's sample-survey
    # requirement (not a physical value)
    assert 6 <= len(files) <= 10
    assert {p.suffix for p in files} >= {".tiff", ".tif", ".png", ".csv", ".npy"}
    assert sum(p.stat().st_size for p in BUNDLED.iterdir()) < 5_000_000
    truth = json.loads((BUNDLED / "truth.json").read_text())
    views = {i["view"] for i in truth["images"]}
    assert views == {"interior", "exterior", "roof"}
    causes = {d["cause"] for i in truth["images"] for d in i["defects"]}
    assert causes == {"missing_insulation", "thermal_bridge", "moisture"}


def test_cli_make_writes_image_sidecar_and_truth(tmp_path):
    res = CliRunner().invoke(scene_cmd, ["make", "ceiling", str(tmp_path), "--size-px", "120", "160",
                                         "--writer", "png16", "--seed", "3"])
    assert res.exit_code == 0, res.output
    assert {p.name for p in tmp_path.iterdir()} == {"ceiling.png", "ceiling.toml", "ceiling.truth.json"}
    rec = json.loads((tmp_path / "ceiling.truth.json").read_text())
    assert rec["defects"] and rec["defects"][0]["excess_w"] > 0
    bad = CliRunner().invoke(scene_cmd, ["make", "igloo", str(tmp_path)])
    assert bad.exit_code == 2


def test_cli_choices_match_the_scene_package():
    # the CLI keeps its own copies so that --help loads no physics; they must name what irseg.scenes makes
    from irseg.cli.scene import _FORMATS, _KINDS
    from irseg.scenes import FORMATS, PRESETS

    assert _FORMATS == FORMATS
    assert _KINDS == tuple(PRESETS)


def test_module_entry_point_reports_an_error_in_one_line(tmp_path):
    # `python -m irseg.scenes OUT` goes through the irseg command line's error map: an output folder
    # that cannot be made (its parent is a file) is one "Error: ..." line and exit status 1, no traceback
    blocker = tmp_path / "a_file"
    blocker.write_text("not a folder")
    res = subprocess.run([sys.executable, "-m", "irseg.scenes", str(blocker / "out")], capture_output=True,
                         text=True, timeout=120)
    assert res.returncode == 1, res.stderr
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: ") and "a_file" in lines[0], res.stderr
    assert not (blocker.parent / "out").exists()


@pytest.mark.slow
def test_whole_sample_survey_remakes_byte_identical(tmp_path):
    reported: list[str] = []
    make_sample_survey(tmp_path, on_image=reported.append)
    made = sorted(p.name for p in tmp_path.iterdir())
    # every image written is reported once (the pair under pressure included): the command's count
    images = sorted(p.stem for p in tmp_path.iterdir() if p.suffix in {".tiff", ".tif", ".png", ".csv", ".npy"})
    assert sorted(reported) == images and len(images) == 10
    bundled = sorted(p.name for p in BUNDLED.iterdir())
    assert made == bundled
    for name in made:
        assert (tmp_path / name).read_bytes() == (BUNDLED / name).read_bytes(), name


def test_preset_options_are_checked():
    from irseg.errors import ConfigError
    from irseg.scenes import make_preset

    with pytest.raises(ConfigError, match="outsid_c"):
        make_preset("timber-wall", outsid_c=3.0)
    with pytest.raises(ConfigError, match="unknown timber-wall defect"):
        make_preset("timber-wall", defects=("hole:1",))
    with pytest.raises(ConfigError, match="igloo"):
        make_preset("igloo")
