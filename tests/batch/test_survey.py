"""End-to-end survey runs through the real stages (irseg.batch.run_survey).

Synthetic walls with a cold patch of known position (see tests/support/survey.py).
External checks: the pinhole-camera footprint of a pixel, RFC 4180 for the CSV,
the PNG format's 16-bit greyscale, and the output contract of the brief.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
from pathlib import Path

import cv2
import numpy as np
import pytest
from tests.support.survey import (
    SHAPE,
    data_files,
    hash_tree,
    make_bad_inputs,
    make_survey,
    wall_image,
)

from irseg import io as outputs
from irseg.report import rank_key
from irseg.batch import ANOMALY_COLUMNS, run_survey
from irseg.errors import InputError, IrsegError, OutputError

CONTRACT_COLUMNS = (
    "image, anomaly, kind, cause, reason, area_m2, area_low_m2, area_high_m2, mean_c, min_c, max_c, "
    "reference_c, delta_k, excess_w, excess_low_w, excess_high_w, excess_kwh_year, f_rsi, mould_risk, "
    "centroid_row, centroid_col, bbox_row0, bbox_col0, bbox_row1, bbox_col1, rank"
).split(", ")


def _rows(out: Path) -> list[dict[str, str]]:
    text = (out / "anomalies.csv").read_bytes().decode("utf-8")
    return list(csv.DictReader(io.StringIO(text, newline="")))


def test_clean_run_meets_the_output_contract(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)
    out = tmp_path / "out"
    result = run_survey([survey], out, jobs=1)
    assert (result.n_ok, result.n_failed) == (3, 0)
    assert not (out / "failures.csv").exists()

    header = (out / "anomalies.csv").read_bytes().split(b"\r\n")[0].decode()
    # uid first (issue 13: the anomaly's survey-wide name), the contract's columns in its order, then the
    # extra area_px (known even without geometry), then the review and the image's details (issue 13),
    # then a linear thermal bridge's length and psi with its band (issue 12), then the figures of leaks
    # found by a pair under pressure (issue 16)
    assert header.split(",") == ["uid", *CONTRACT_COLUMNS, "area_px", "review", "note", "title",
                                 "element", "length_m", "psi_w_mk", "psi_low_w_mk",
                                 "psi_high_w_mk", "pressure_pa", "cooling_k", "cooling_max_k"] == list(ANOMALY_COLUMNS)
    rows = _rows(out)
    assert [r["image"] for r in rows] == [p.name for p in paths]  # input order, one patch each

    # Each patch was drawn at rows 20..36, cols 30..50 (tests.support.survey.wall_image).
    for row in rows:
        assert row["kind"] == "cold"
        assert abs(int(row["bbox_row0"]) - 20) <= 1 and abs(int(row["bbox_row1"]) - 36) <= 1
        assert abs(int(row["bbox_col0"]) - 30) <= 1 and abs(int(row["bbox_col1"]) - 50) <= 1

    # Survey rank: a permutation 1..K, ordered by irseg.report.rank_key (the documented rule) over the records.
    records = [json.loads((out / p.stem / "result.json").read_text()) for p in paths]
    keyed = sorted(result.anomalies, key=rank_key)
    assert sorted(int(r["rank"]) for r in rows) == list(range(1, len(rows) + 1))
    assert [a.rank for a in keyed] == sorted(a.rank for a in keyed)

    # Pixel footprint of a pinhole camera: 2 d tan(hfov / 2) / N columns
    # (d = 3 m, hfov = 45 deg, N = 80 from survey.toml; plane geometry).
    pixel_m = 2 * 3.0 * math.tan(math.radians(45.0) / 2) / SHAPE[1]
    for record in records:
        assert record["analysis"]["pixel_m"] == pytest.approx(pixel_m, rel=1e-6)
        assert record["fingerprint"].startswith("sha256:") and len(record["fingerprint"]) == 71
        assert record["metadata"]["sources"] == ["survey.toml"]
        assert record["irseg_version"] and record["pixels"]["n_nan"] == 0

    # labels.png: 16-bit, the image's size, pixel = anomaly id; its pixel count is area_px.
    for path, record in zip(paths, records):
        labels = cv2.imread(str(out / path.stem / "labels.png"), cv2.IMREAD_UNCHANGED)
        assert labels.dtype == np.uint16 and labels.shape == SHAPE
        for a in record["anomalies"]:
            assert int((labels == a["anomaly"]).sum()) == a["area_px"]
        overlay = cv2.imread(str(out / path.stem / "overlay.png"), cv2.IMREAD_UNCHANGED)
        assert overlay.ndim == 3 and overlay.shape[2] == 3

    summary = json.loads((out / "summary.json").read_text())
    assert set(summary) >= {"irseg_version", "images", "totals_by_cause", "totals", "anomalies",
                            "failures", "warnings", "cautions"}
    assert [i["image"] for i in summary["images"]] == [p.name for p in paths]
    assert summary["images"][0]["overlay"] == f"{paths[0].stem}/overlay.png"
    assert [a["rank"] for a in summary["anomalies"]] == sorted(int(r["rank"]) for r in rows)
    total_w = math.fsum(float(a["excess_w"]) for a in summary["anomalies"])
    assert summary["totals"]["excess_w"] == pytest.approx(total_w, rel=1e-6)
    # the CSV's W is rounded to 0.1 W (issue 14), the summary keeps full precision
    assert math.fsum(float(r["excess_w"]) for r in rows) == pytest.approx(total_w, abs=0.05 * len(rows) + 1e-9)
    assert summary["totals"]["count"] == len(rows)
    assert any("estimate" in c for c in summary["cautions"])
    assert (out / "report.html").read_text(encoding="utf-8").lstrip().lower().startswith("<!doctype html")

    # No absolute path (nor the temp folder) in any data file.
    for name, blob in data_files(out).items():
        assert str(tmp_path).encode() not in blob, name


def test_job_counts_give_identical_bytes(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 4)
    run_survey([survey], tmp_path / "j1", jobs=1)
    run_survey([survey], tmp_path / "j2", jobs=2)
    one, two = data_files(tmp_path / "j1"), data_files(tmp_path / "j2")
    assert one.keys() == two.keys() and len(one) == 2 + 2 + 4  # + repairs.csv, confirm_points.csv (issue 17)
    assert one == two
    for stem in ("wall_00", "wall_03"):
        for png in ("labels.png", "overlay.png"):
            assert (tmp_path / "j1" / stem / png).read_bytes() == (tmp_path / "j2" / stem / png).read_bytes()


def test_mixed_folder_fails_bad_files_alone(tmp_path):
    clean = tmp_path / "clean" / "survey"
    make_survey(clean, 3)
    run_survey([clean], tmp_path / "clean_out", jobs=1)

    mixed = tmp_path / "mixed" / "survey"
    make_survey(mixed, 3)
    expected = make_bad_inputs(mixed)
    big = wall_image(11, shape=(100, 120))  # 12 000 pixels, over the 10 000 budget below
    np.save(mixed / "too_big.npy", big)
    expected["too_big.npy"] = "read"
    before = hash_tree(mixed)

    result = run_survey([mixed], tmp_path / "mixed_out", jobs=2, max_pixels=10_000)
    assert hash_tree(mixed) == before  # inputs never modified
    assert result.n_ok == 3 and result.n_failed == len(expected)

    with open(tmp_path / "mixed_out" / "failures.csv", newline="", encoding="utf-8") as handle:
        failures = {row["file"]: row for row in csv.DictReader(handle)}
    assert set(failures) == set(expected)
    for name, stage in expected.items():
        assert failures[name]["stage"] == stage, (name, failures[name])
        message = failures[name]["message"]
        assert message and "\n" not in message and "Traceback" not in message
    assert "pixel budget of 10000" in failures["too_big.npy"]["message"]
    assert "max_pixels" in failures["too_big.npy"]["message"]
    assert "emissivity" in failures["bad_eps.npy"]["message"]
    assert "distance_m" in failures["bad_distance.npy"]["message"]
    assert "radiometric" in failures["photo.png"]["message"]

    # The good images' results are byte-identical to the clean run.
    clean_files = data_files(tmp_path / "clean_out")
    mixed_files = data_files(tmp_path / "mixed_out")
    assert mixed_files["anomalies.csv"] == clean_files["anomalies.csv"]
    for name in ("wall_00/result.json", "wall_01/result.json", "wall_02/result.json"):
        clean_record = json.loads(clean_files[name])
        mixed_record = json.loads(mixed_files[name])
        # only the settings differ (max_pixels), hence parameters and fingerprint
        for record in (clean_record, mixed_record):
            record.pop("fingerprint")
            record["parameters"].pop("settings")
        assert clean_record == mixed_record
    summary = json.loads(mixed_files["summary.json"])
    assert {f["file"] for f in summary["failures"]} == set(expected)
    assert sum(i["status"] == "failed" for i in summary["images"]) == len(expected)


def test_limited_inputs_are_processed_with_warnings(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    np.save(survey / "flat.npy", np.full(SHAPE, 18.0, np.float32))
    np.save(survey / "same_air.npy", wall_image(5))
    (survey / "same_air.toml").write_text("[air]\ninside_c = 10.0\noutside_c = 10.0\n", encoding="utf-8")
    nogeo = survey / "nogeo"
    nogeo.mkdir()
    np.save(nogeo / "nogeo.npy", wall_image(6))
    (nogeo / "survey.toml").write_text("[air]\ninside_c = 20.0\noutside_c = 0.0\n", encoding="utf-8")

    result = run_survey([survey], tmp_path / "out", jobs=1)
    assert result.n_failed == 0 and result.n_ok == 4
    rows = {r["image"]: r for r in _rows(tmp_path / "out")}
    assert rows["nogeo.npy"]["area_m2"] == "" and rows["nogeo.npy"]["excess_w"] == ""
    assert rows["same_air.npy"]["excess_kwh_year"] == "" and rows["same_air.npy"]["f_rsi"] == ""
    assert "flat.npy" not in rows
    warnings = {}
    for w in json.loads((tmp_path / "out" / "summary.json").read_text())["warnings"]:
        warnings.setdefault(w["image"], []).append(w["message"])
    assert any("geometry" in m for m in warnings["nogeo.npy"])
    assert any("10" in m for m in warnings["same_air.npy"])
    assert any("uniform" in m for m in warnings["flat.npy"])


def test_resume_recomputes_only_what_changed(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    reference = data_files(out)

    again = run_survey([survey], out, jobs=1, resume=True)
    assert again.n_skipped == 3 and data_files(out) == reference

    (out / paths[1].stem / "result.json").unlink()  # as after a kill before the marker
    (out / "summary.json").unlink()
    again = run_survey([survey], out, jobs=1, resume=True)
    assert again.n_skipped == 2 and data_files(out) == reference

    (survey / f"{paths[0].stem}.toml").write_text("[surface]\nemissivity = 0.9\n", encoding="utf-8")
    again = run_survey([survey], out, jobs=1, resume=True)
    assert again.n_skipped == 2  # a new sidecar changes that image's fingerprint
    assert data_files(out)["anomalies.csv"] != reference["anomalies.csv"]

    again = run_survey([survey], out, jobs=1, resume=True, overrides={"air": {"inside_c": 21.0}})
    assert again.n_skipped == 0  # new settings: everything is recomputed


def test_odd_names_never_escape_out(tmp_path):
    survey = tmp_path / "in"
    survey.mkdir()
    (survey / "survey.toml").write_text("[air]\ninside_c = 20.0\noutside_c = 0.0\n", encoding="utf-8")
    names = ["..evil.npy", "a;b $(c) `d`.npy", "-rf.npy", "x..y.npy", "wall\nnewline.npy", "ünï cödé.npy", "CON.npy"]
    for k, name in enumerate(names):
        np.save(survey / name, wall_image(k))
    out = tmp_path / "out"
    outside_before = sorted(p.name for p in tmp_path.iterdir())
    result = run_survey([survey / n for n in names], out, jobs=1)
    assert result.n_ok == len(names)
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([*outside_before, "out"])
    stems = set()
    for entry in out.rglob("*"):
        assert out.resolve() in entry.resolve().parents
        if entry.is_dir():
            assert entry.parent == out and not entry.name.startswith(".")
            stems.add(entry.name)
    assert len(stems) == len(names)
    # names kept verbatim in the data, except that a CSV text cell starting like a formula
    # ("-rf.npy") gets a leading quote (OWASP "CSV Injection"; see tests/batch/test_hostile_folders.py)
    assert {r["image"] for r in _rows(out)} == {("'" + n if n.startswith("-") else n) for n in names}
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert {i["image"] for i in summary["images"]} == set(names)


def test_fail_fast_stops_and_names_the_file(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 2)
    (survey / "aa_broken.npy").write_bytes(b"not an array")
    with pytest.raises(IrsegError, match=r"aa_broken\.npy.*fail_fast setting"):
        run_survey([survey], tmp_path / "out", jobs=1, fail_fast=True)
    assert not (tmp_path / "out" / "summary.json").exists()


def test_unexpected_stage_error_fails_one_image(tmp_path, monkeypatch):
    import irseg.analysis

    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)
    real = irseg.analysis.analyse

    def flaky(frame, seg, meta):
        if Path(frame.path).name == paths[1].name:
            raise ZeroDivisionError("division by zero")
        return real(frame, seg, meta)

    monkeypatch.setattr(irseg.analysis, "analyse", flaky)
    result = run_survey([survey], tmp_path / "out", jobs=1)
    assert result.n_ok == 2
    (failure,) = result.failures
    assert failure.image == paths[1].name and failure.stage == "analyse"
    assert "ZeroDivisionError" in failure.message and "verbose setting" in failure.message
    assert "Traceback" in failure.traceback


def test_write_failure_is_an_output_error_without_partial_files(tmp_path, monkeypatch):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)
    out = tmp_path / "out"
    real_replace = os.replace
    calls = {"n": 0}

    def full_disk(src, dst):
        calls["n"] += 1
        if calls["n"] == 5:  # image 2's overlay: after image 1's three files and image 2's labels
            raise OSError(28, "No space left on device")
        return real_replace(src, dst)

    monkeypatch.setattr(os, "replace", full_disk)
    with pytest.raises(OutputError, match="disk is full"):
        run_survey([survey], out, jobs=1)
    leftovers = [p for p in out.rglob("*") if p.name.startswith(outputs.TEMP_PREFIX)]
    assert leftovers == []
    assert (out / paths[0].stem / "result.json").is_file()
    assert not (out / paths[1].stem / "result.json").exists()
    assert not (out / "summary.json").exists()


def test_bad_settings_fail_before_any_image(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 1)
    with pytest.raises(IrsegError, match="emissivity"):
        run_survey([survey], tmp_path / "out", overrides={"surface": {"emissivity": 1.7}})
    with pytest.raises(IrsegError, match="colour map"):
        run_survey([survey], tmp_path / "out", cmap="rainbowish")
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_out_inside_the_survey_is_never_read_back(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 2)
    out = survey / "results"
    first = run_survey([survey], out, jobs=1)
    second = run_survey([survey], out, jobs=1, resume=True)  # overlay.png/labels.png are not inputs
    assert len(first.outcomes) == len(second.outcomes) == 2 and second.n_skipped == 2


def test_out_must_not_be_the_survey_folder(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 1)
    for out in (survey, tmp_path):
        with pytest.raises(IrsegError, match="separate output folder"):
            run_survey([survey], out, jobs=1)
    assert sorted(p.name for p in survey.iterdir()) == ["survey.toml", "wall_00.tif"]


def test_unreadable_input_fails_alone(tmp_path, monkeypatch):
    import irseg.batch._resume

    survey = tmp_path / "survey"
    paths = make_survey(survey, 2)
    real = irseg.batch.fingerprint_input

    def denied(path, settings):
        if Path(path).name == paths[0].name:
            raise InputError(f"{paths[0].name}: cannot read the file (Permission denied)")
        return real(path, settings)

    monkeypatch.setattr(irseg.batch._resume, "fingerprint_input", denied)
    result = run_survey([survey], tmp_path / "out", jobs=1)
    assert result.n_ok == 1 and [(f.image, f.stage) for f in result.failures] == [(paths[0].name, "read")]


def test_a_dying_worker_fails_only_its_image():
    from tests.support.survey import crash_on_second

    from irseg.batch._pool import run_in_pool

    tasks = [{"index": i, "image": f"img{i}.npy", "stem": f"img{i}"} for i in range(4)]
    seen = []
    run_in_pool(crash_on_second, tasks, n_workers=2, accept=seen.append)
    survivors = sorted(x for x in seen if isinstance(x, int))
    died = [x for x in seen if not isinstance(x, int)]
    assert survivors == [0, 2, 3]
    assert [(d.image, d.status, d.failure.stage) for d in died] == [("img1.npy", "failed", "worker")]


def test_named_files_keep_unknown_suffixes_but_never_metadata(tmp_path):
    survey = tmp_path / "survey"
    (path,) = make_survey(survey, 1, tiff=False)
    (survey / f"{path.stem}.toml").write_text("[surface]\nemissivity = 0.9\n", encoding="utf-8")
    (survey / "notes.xyz").write_bytes(b"not a thermogram")
    named = [path, survey / f"{path.stem}.toml", survey / "survey.toml", survey / "notes.xyz"]
    result = run_survey(named, tmp_path / "out", jobs=1)
    assert [o.image for o in result.outcomes] == [path.name, "notes.xyz"]  # the .toml files are metadata
    assert result.n_ok == 1 and [(f.image, f.stage) for f in result.failures] == [("notes.xyz", "read")]


def test_contradicting_outside_air_between_images_is_a_survey_warning(tmp_path):
    # Issue 15 item 9: one session's outside air cannot differ by 7 K between two walls of the same
    # folder (a survey session lasts hours; air changes by a degree or two: common practice).
    paths = make_survey(tmp_path / "s", 2, tiff=False)
    paths[1].with_suffix(".toml").write_text("[air]\noutside_c = 8.0\n", encoding="utf-8")
    result = run_survey([tmp_path / "s"], tmp_path / "out", jobs=1)
    texts = [w["message"] for w in result.summary["warnings"] if w["image"] == "survey"]
    assert len(texts) == 1 and "outside_c" in texts[0] and "8 °C" in texts[0]
    assert "outside_c differs" in (tmp_path / "out" / "run.log").read_text(encoding="utf-8")
    # the same survey with agreeing sidecars gives no such warning
    paths[1].with_suffix(".toml").write_text("[air]\noutside_c = 0.5\n", encoding="utf-8")
    again = run_survey([tmp_path / "s"], tmp_path / "out2", jobs=1)
    assert not [w for w in again.summary["warnings"] if w["image"] == "survey"]
