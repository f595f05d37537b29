"""A survey folder with pairs under pressure, end to end: outputs, numbering, failures of pairs alone, resume."""

from __future__ import annotations

import csv
import io
import json
import shutil

import cv2
import numpy as np
import pytest

from irseg.batch import run_survey
from irseg.scenes._pairs import SAMPLE_PAIR, export_pair, make_pair
from irseg.scenes._export import write_image

REF, PRESSED = SAMPLE_PAIR[0], SAMPLE_PAIR[1]

#: Pressurised images whose pair must fail, and a word of the message each must give.
BAD = {
    "p_range": ('reference = "{ref}"\ndifference_pa = 150\n', "outside [1, 100] Pa"),
    "p_minutes": ('reference = "{ref}"\ndifference_pa = 50\nminutes = -3\n', "minutes = -3"),
    "p_missing": ('reference = "no_such_view"\ndifference_pa = 50\n', "names no image of this survey in its folder"),
    "p_chained": ('reference = "{pressed}"\ndifference_pa = 50\n', "is itself an image taken under a pressure"),
    "p_far": ('reference = "{ref}"\ndifference_pa = 50\n', "cannot register"),
}


def _sidecar(text: str, pressure: str) -> str:
    return text.split("[pressure]")[0] + "[pressure]\n" + pressure


@pytest.fixture(scope="module")
def survey(tmp_path_factory):
    folder = tmp_path_factory.mktemp("pairs") / "in"
    folder.mkdir()
    truth = export_pair(folder)
    text = (folder / f"{PRESSED}.toml").read_text(encoding="utf-8")
    far = make_pair(SAMPLE_PAIR[2], n_rows=240, n_cols=320, far=True)
    for stem, (pressure, _) in BAD.items():
        if stem == "p_far":
            write_image(folder, stem, far.pressed_c, fmt="tiff-float")
        else:
            shutil.copy(folder / f"{PRESSED}.tiff", folder / f"{stem}.tiff")
        sidecar = _sidecar(text, pressure.format(ref=REF, pressed=PRESSED))
        (folder / f"{stem}.toml").write_text(sidecar, encoding="utf-8")
    out = folder.parent / "out"
    result = run_survey([folder], out, jobs=1)
    return folder, out, result, truth


def _rows(out):
    return list(csv.DictReader(io.StringIO((out / "anomalies.csv").read_text(encoding="utf-8"))))


@pytest.mark.slow
def test_every_image_keeps_its_own_results_and_bad_pairs_fail_alone(survey):
    folder, out, result, _ = survey
    assert result.n_ok == 2 + len(BAD)  # every image analysed, whatever its pair
    pair_failures = {f.image: f for f in result.failures if f.stage == "pair"}
    assert set(pair_failures) == {f"{stem}.tiff" for stem in BAD}
    assert len(result.failures) == len(BAD)
    for stem, (_, words) in BAD.items():
        message = pair_failures[f"{stem}.tiff"].message
        assert words in message, (stem, message)
        record = json.loads((out / stem / "result.json").read_text(encoding="utf-8"))
        assert record["pair"]["status"] == "failed" and "registration" not in record
        assert not (out / stem / "difference.png").exists() and not (out / stem / "pair_labels.png").exists()
        assert record["anomalies"]  # the single-image analysis ran
    rows = list(csv.DictReader(io.StringIO((out / "failures.csv").read_text(encoding="utf-8"))))
    assert {r["stage"] for r in rows} == {"pair"} and len(rows) == len(BAD)
    # the file and key are named, the fix given
    assert "p_range.toml: [pressure] difference_pa = 150" in pair_failures["p_range.tiff"].message
    assert "p_missing.toml: [pressure] reference" in pair_failures["p_missing.tiff"].message


@pytest.mark.slow
def test_pair_rows_follow_the_image_rows_in_one_id_sequence(survey):
    _, out, _, truth = survey
    rows = [r for r in _rows(out) if r["image"] == f"{PRESSED}.tiff"]
    own = [r for r in rows if r["pressure_pa"] == ""]
    pair = [r for r in rows if r["pressure_pa"] != ""]
    assert own and len(pair) == len(truth["leaks"])  # one anomaly per simulated leak
    ids = sorted(int(r["anomaly"]) for r in rows)
    assert ids == list(range(1, len(rows) + 1))
    assert max(int(r["anomaly"]) for r in own) < min(int(r["anomaly"]) for r in pair)
    for r in pair:
        assert r["cause"] == "air_leakage" and float(r["pressure_pa"]) == 50.0
        assert 0 < float(r["cooling_k"]) <= float(r["cooling_max_k"])
        assert "50 Pa" in r["reason"]
    others = [r for r in _rows(out) if r["image"] != f"{PRESSED}.tiff" and r["image"] not in
              {f"{stem}.tiff" for stem in BAD}]
    assert others and all(r["pressure_pa"] == r["cooling_k"] == r["cooling_max_k"] == "" for r in others)


@pytest.mark.slow
def test_pair_pictures_and_registration(survey):
    folder, out, _, truth = survey
    labels = cv2.imread(str(out / PRESSED / "pair_labels.png"), cv2.IMREAD_UNCHANGED)
    own = cv2.imread(str(out / PRESSED / "labels.png"), cv2.IMREAD_UNCHANGED)
    assert labels.dtype == np.uint16 and labels.shape == own.shape == (240, 320)
    record = json.loads((out / PRESSED / "result.json").read_text(encoding="utf-8"))
    pair_ids = sorted(a["anomaly"] for a in record["anomalies"] if "pressure_pa" in a)
    assert sorted(int(v) for v in np.unique(labels) if v) == pair_ids
    for a in record["anomalies"]:
        if "pressure_pa" in a:
            assert int((labels == a["anomaly"]).sum()) == a["area_px"]
    reg = record["registration"]
    assert set(reg) == {"shift_px", "rotation_deg", "scale", "rms_px", "overlap"}
    # [C] the camera move the scene maker applied (irseg.scenes._pairs): shift of the centre, rotation, zoom
    assert reg["shift_px"] == pytest.approx(truth["shift_px"], abs=0.3)
    assert reg["rotation_deg"] == pytest.approx(truth["rotation_deg"], abs=0.1)
    assert reg["scale"] == pytest.approx(truth["zoom"], abs=0.003)
    assert 0.9 < reg["overlap"] <= 1.0
    assert record["outputs"]["difference"] == f"{PRESSED}/difference.png"
    difference = cv2.imread(str(out / PRESSED / "difference.png"), cv2.IMREAD_UNCHANGED)
    assert difference.ndim == 3 and difference.shape[2] == 3
    reference = json.loads((out / REF / "result.json").read_text(encoding="utf-8"))
    assert "registration" not in reference and "pair" not in reference  # the reference is a plain image
    assert not (out / REF / "difference.png").exists()


@pytest.mark.slow
def test_the_report_has_a_section_per_pair(survey):
    _, out, _, _ = survey
    html = (out / "report.html").read_text(encoding="utf-8")
    assert '<section id="pairs">' in html and 'href="#pairs"' in html
    section = html[html.index('<section id="pairs">'):]
    section = section[:section.index("</section>")]
    assert section.count('<article class="pair"') == 1 + len(BAD)
    first = section[:section.index("</article>")]
    assert first.count("data:image/png;base64,") == 3  # both images side by side and the difference
    assert "At ambient pressure" in first and "Under the pressure difference" in first
    assert "could not be compared" in section
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert [p["status"] for p in summary["pairs"]].count("ok") == 1


@pytest.mark.slow
def test_resume_follows_the_reference(survey, tmp_path):
    folder, _, _, _ = survey
    copy = tmp_path / "in"
    shutil.copytree(folder, copy)
    for stem in BAD:
        for suffix in (".tiff", ".toml"):
            (copy / f"{stem}{suffix}").unlink()
    out = tmp_path / "out"
    run_survey([copy], out, jobs=1)
    again = run_survey([copy], out, jobs=1, resume=True)
    assert all(o.skipped for o in again.outcomes)
    # the reference's sidecar changes: the pressurised image is computed again with its pair
    sidecar = copy / f"{REF}.toml"
    sidecar.write_text(sidecar.read_text(encoding="utf-8") + "\n# checked again\n", encoding="utf-8")
    third = run_survey([copy], out, jobs=1, resume=True)
    computed = {o.image for o in third.outcomes if not o.skipped}
    assert computed == {f"{REF}.tiff", f"{PRESSED}.tiff"}
    assert (out / PRESSED / "difference.png").is_file()


@pytest.mark.slow
def test_the_dask_path_and_a_process_pool_write_the_same_pair(survey, tmp_path):
    # the worker function is shared (irseg.batch._worker.run_task): every back-end gives the same files
    folder, out, _, _ = survey
    copy = tmp_path / "in"
    copy.mkdir()
    for stem in (REF, PRESSED):
        for suffix in (".tiff", ".toml"):
            shutil.copy(folder / f"{stem}{suffix}", copy / f"{stem}{suffix}")
    for name, kwargs in (("dask", {"jobs": 1, "scheduler": "local"}), ("pool", {"jobs": 2})):
        run_survey([copy], tmp_path / name, **kwargs)
        for file in ("pair_labels.png", "difference.png", "result.json"):
            ours = (tmp_path / name / PRESSED / file).read_bytes()
            theirs = (out / PRESSED / file).read_bytes()
            if file == "result.json":  # the fingerprints differ: the survey folders hold other images
                ours, theirs = (json.loads(b) for b in (ours, theirs))
                ours.pop("fingerprint"), theirs.pop("fingerprint")
                ours["parameters"].pop("settings"), theirs["parameters"].pop("settings")
            assert ours == theirs, (name, file)


def test_the_command_line_names_a_failed_pair_apart_from_failed_images(tmp_path):
    from click.testing import CliRunner

    from irseg.cli.main import cli

    folder = tmp_path / "in"
    folder.mkdir()
    export_pair(folder)
    text = (folder / f"{PRESSED}.toml").read_text(encoding="utf-8")
    (folder / f"{PRESSED}.toml").write_text(_sidecar(text, 'reference = "nope"\ndifference_pa = 50\n'),
                                            encoding="utf-8")
    result = CliRunner().invoke(cli, ["segment", str(folder), "-o", str(tmp_path / "out"), "-j", "1"])
    assert result.exit_code == 3, result.output  # some inputs failed (cli/_exit.py)
    assert "2 of 2 images ok, 1 pair under pressure failed (see" in result.output
