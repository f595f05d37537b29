"""Review (issue 13): review.toml entries, their checks, and their application without recomputing images.

External checks: RFC 4180 for the CSV (the standard library's csv module), sha256 of the per-image
files (nothing rewritten), math.fsum for the totals, and the rank rule of the survey
(mould risk, then kWh/year, W, area: the ordering documented in docs/guide.md).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from pathlib import Path

import pytest
from click.testing import CliRunner
from tests.support.survey import make_survey

from irseg.analysis import severity_key
from irseg.batch import run_survey
from irseg.cli.main import cli
from irseg.controls import ReviewEntry, apply_review, parse_review_text
from irseg.errors import MetadataError
from irseg.report import SurveyAnomaly

# --------------------------------------------------------------------------- parsing

EXAMPLE = """
[[review]]
image = "lf01_lounge_north_wall.tiff"
at = [119, 71]
action = "reject"
note = "tripod leg"

[[review]]
image = "lf02_bedroom1_west_wall.png"
anomaly = 2
action = "relabel"
cause = "thermal_bridge"
"""


def test_review_tables_become_entries():
    first, second = parse_review_text(EXAMPLE)
    assert first == ReviewEntry(1, "lf01_lounge_north_wall.tiff", "reject", at=(119, 71), note="tripod leg")
    assert second == ReviewEntry(2, "lf02_bedroom1_west_wall.png", "relabel", anomaly=2, cause="thermal_bridge")
    assert parse_review_text("") == ()


@pytest.mark.parametrize(
    "table, message",
    [
        ('image = "a.tif"\nat = [1, 2]\naction = "delete"', "action = 'delete' is not one of reject, accept, relabel"),
        ('image = "a.tif"\nat = [1, 2]\naction = "relabel"', "relabel needs a cause"),
        ('image = "a.tif"\nat = [1, 2]\naction = "relabel"\ncause = "thermal bridge"',
         'did you mean "thermal_bridge"?'),
        ('image = "a.tif"\naction = "reject"', "names no anomaly; add at = [row, col]"),
        ('image = "a.tif"\nat = [1.5, 2]\naction = "reject"', "is not a [row, col] pixel"),
        ('image = "a.tif"\nanomaly = 0\naction = "reject"', "anomaly = 0 is not an anomaly id"),
        ('at = [1, 2]\naction = "reject"', "needs image"),
        ('image = "a.tif"\nat = [1, 2]\naction = "accept"\ncause = "moisture"', 'cause is read with action = "relabel"'),
        ('image = "a.tif"\nat = [1, 2]\naction = "reject"\nnotes = "x"', "did you mean 'note'?"),
    ],
)
def test_review_errors_name_the_file_the_entry_and_the_fix(table, message):
    with pytest.raises(MetadataError) as info:
        parse_review_text("[[review]]\n" + table + "\n", source="review.toml")
    text = str(info.value)
    assert text.startswith("review.toml: [[review]] entry 1: ")
    assert message in text


def test_a_review_file_holds_review_tables_only():
    with pytest.raises(MetadataError, match="holds \\[\\[review\\]\\] tables only"):
        parse_review_text("[surface]\nemissivity = 0.9\n")
    with pytest.raises(MetadataError, match="line 1"):
        parse_review_text("[[review]\n")


# --------------------------------------------------------------------------- applying


def _anomalies() -> list[SurveyAnomaly]:
    return [
        SurveyAnomaly("a.tif", 1, cause="missing_insulation", reason="compact cold area", excess_w=5.0),
        SurveyAnomaly("a.tif", 2, cause="thermal_bridge", reason="narrow band", excess_w=1.0),
        SurveyAnomaly("b.tif", 1, cause="moisture", reason="wet patch", excess_w=2.0),
    ]


def _label_at(image: str, row: int, col: int) -> int:
    # a.tif: anomaly 1 on rows 0-9, anomaly 2 on rows 10-19 (cols 0-9); b.tif: anomaly 1 everywhere in 10 x 10
    if not (0 <= row < 20 and 0 <= col < 10):
        raise LookupError("the pixel is outside the image")
    if image == "a.tif":
        return 1 if row < 10 else 2
    return 1 if row < 10 else 0


def test_reject_accept_relabel_by_pixel_and_by_id():
    entries = parse_review_text(
        '[[review]]\nimage = "a.tif"\nat = [12, 3]\naction = "reject"\nnote = "tripod leg"\n'
        '[[review]]\nimage = "a.tif"\nanomaly = 1\naction = "accept"\nnote = "confirmed"\n'
        '[[review]]\nimage = "b.tif"\nat = [2, 2]\naction = "relabel"\ncause = "air_leakage"\nnote = "draught"\n'
    )
    result = apply_review(_anomalies(), entries, label_at=_label_at)
    a1, a2, b1 = result.anomalies
    assert (a1.review, a1.note, a1.cause) == ("accepted", "confirmed", "missing_insulation")
    assert (a2.review, a2.note) == ("rejected", "tripod leg")
    assert (b1.review, b1.cause, b1.note) == ("relabelled", "air_leakage", "draught")
    assert b1.reason == "wet patch; relabelled by review from moisture"
    assert result.applied == 3 and result.warnings == ()


def test_unmatched_entries_are_warnings_naming_the_entry():
    entries = parse_review_text(
        '[[review]]\nimage = "c.tif"\nanomaly = 1\naction = "reject"\n'  # unknown image
        '[[review]]\nimage = "b.tif"\nat = [15, 2]\naction = "reject"\n'  # pixel in no anomaly
        '[[review]]\nimage = "b.tif"\nanomaly = 7\naction = "reject"\n'  # unknown id
        '[[review]]\nimage = "b.tif"\nat = [40, 2]\naction = "reject"\n'  # outside the image
        '[[review]]\nimage = "a.tif"\nat = [1, 1]\nanomaly = 2\naction = "accept"\n'  # pixel wins, with a warning
        '[[review]]\nimage = "a.tif"\nanomaly = 1\naction = "reject"\n'  # overrides entry 5
    )
    result = apply_review(_anomalies(), entries, label_at=_label_at)
    w = result.warnings
    assert len(w) == 6
    assert w[0].startswith('review.toml entry 1 (image "c.tif", anomaly 1, reject): no analysed image')
    assert 'did you mean "a.tif"?' in w[0] or 'did you mean "b.tif"?' in w[0]
    assert w[1].startswith('review.toml entry 2 (image "b.tif", at [15, 2], reject): the pixel is inside no anomaly')
    assert w[2].startswith("review.toml entry 3") and "has no anomaly 7" in w[2]
    assert w[3].startswith("review.toml entry 4") and "outside the image" in w[3]
    assert w[4].startswith("review.toml entry 5") and "inside anomaly 1, not 2" in w[4]
    assert w[5].startswith("review.toml entry 6") and "overrides entry 5" in w[5]
    assert [a.review for a in result.anomalies] == ["rejected", None, None]  # the later entry wins
    assert result.applied == 1


# --------------------------------------------------------------------------- a survey, then a review


def _rows(out: Path) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO((out / "anomalies.csv").read_bytes().decode("utf-8"), newline="")))


def _per_image_hashes(out: Path) -> dict[str, str]:
    return {p.relative_to(out).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(out.glob("*/*")) if p.is_file()}


def _number(text: str) -> float | None:
    return None if text == "" else float(text)


@pytest.mark.slow
def test_a_review_pass_recomputes_no_image_and_recomputes_totals_and_ranks(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)  # three walls, each with a cold patch at rows 20-36, cols 30-50
    out = tmp_path / "out"
    first = run_survey([survey], out, jobs=1)
    before_rows = _rows(out)
    before_files = _per_image_hashes(out)
    ids = {r["image"]: int(r["anomaly"]) for r in before_rows}
    assert len(before_rows) == 3 and first.n_anomalies == 3

    names = [p.name for p in paths]
    (survey / "review.toml").write_text(
        f'[[review]]\nimage = "{names[0]}"\nat = [28, 40]\naction = "reject"\nnote = "a tripod leg"\n'
        f'[[review]]\nimage = "{names[1]}"\nanomaly = {ids[names[1]]}\naction = "relabel"\ncause = "air_leakage"\n'
        'note = "draught at the socket"\n'
        f'[[review]]\nimage = "{names[2]}"\nat = [21, 31]\naction = "accept"\n'
        '[[review]]\nimage = "wall_99.npy"\nanomaly = 1\naction = "reject"\n'
        f'[[review]]\nimage = "{names[2]}"\nat = [2, 2]\naction = "reject"\n',
        encoding="utf-8",
    )
    second = run_survey([survey], out, jobs=1, resume=True)

    # no image computed again: every outcome resumed, no stage time, per-image files byte for byte the same
    assert all(o.skipped for o in second.outcomes) and second.n_skipped == 3
    assert set(second.timings) == {"wall"}
    assert _per_image_hashes(out) == before_files
    log = (out / "run.log").read_text(encoding="utf-8")
    assert "3 resumed" in log and ": ok" not in log

    rows = {r["image"]: r for r in _rows(out)}
    assert list(_rows(out)[0])[0] == "uid" and rows[names[0]]["uid"] == f"{paths[0].stem}#{ids[names[0]]}"
    rejected, relabelled, accepted = (rows[n] for n in names)
    assert (rejected["review"], rejected["note"], rejected["severity"]) == ("rejected", "a tripod leg", "")
    assert (relabelled["review"], relabelled["cause"]) == ("relabelled", "air_leakage")
    assert accepted["review"] == "accepted" and accepted["note"] == ""
    # every other value of the rejected row is kept
    before = {r["image"]: r for r in before_rows}[names[0]]
    assert {k: v for k, v in rejected.items() if k not in ("review", "note", "severity")} == {
        k: v for k, v in before.items() if k not in ("review", "note", "severity")}

    # totals count no rejected anomaly (sums by math.fsum of the CSV's own figures)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    kept = [relabelled, accepted]
    assert summary["totals"]["count"] == 2 == second.n_anomalies
    assert summary["totals"]["excess_w"] == pytest.approx(math.fsum(float(r["excess_w"]) for r in kept), rel=1e-6)
    assert summary["totals_by_cause"]["air_leakage"]["count"] == 1
    assert summary["totals_by_cause"]["missing_insulation"]["count"] == 1
    assert summary["review"] == {"file": "review.toml", "entries": 5, "applied": 3, "rejected": 1,
                                 "warnings": summary["review"]["warnings"]}
    # ranks 1..2 among the kept anomalies, in the survey's order (mould risk, kWh/year, W, area)
    order = sorted(kept, key=lambda r: severity_key(SurveyAnomaly(
        r["image"], int(r["anomaly"]), mould_risk=r["mould_risk"] == "true", excess_kwh_year=_number(
            r["excess_kwh_year"]), excess_w=_number(r["excess_w"]), area_m2=_number(r["area_m2"]),
        area_px=int(r["area_px"]))))
    assert [int(r["severity"]) for r in order] == [1, 2]

    # unmatched entries: warnings in run.log, summary.json and the report, never a failure
    warnings = summary["review"]["warnings"]
    assert len(warnings) == 2 and second.n_failed == 0
    assert warnings[0].startswith('review.toml entry 4 (image "wall_99.npy", anomaly 1, reject)')
    assert warnings[1].startswith(f'review.toml entry 5 (image "{names[2]}", at [2, 2], reject): the pixel')
    assert all(w in log for w in warnings)
    report = (out / "report.html").read_text(encoding="utf-8")
    assert 'id="rejected-table"' in report and "a tripod leg" in report
    assert "review.toml entry 4 (image &#34;wall_99.npy&#34;" in report


@pytest.mark.slow
def test_the_review_option_names_a_file_anywhere(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 2, tiff=False)
    out = tmp_path / "out"
    runner = CliRunner()
    assert runner.invoke(cli, ["segment", str(survey), "-o", str(out), "-j", "1", "-q"]).exit_code == 0
    review = tmp_path / "my-review.toml"
    review.write_text(f'[[review]]\nimage = "{paths[0].name}"\nat = [28, 40]\naction = "reject"\n')
    res = runner.invoke(cli, ["segment", str(survey), "-o", str(out), "-j", "1", "--resume", "--review", str(review)])
    assert res.exit_code == 0, res.output
    assert "2 of 2 images ok (2 resumed); 1 anomalies" in res.output
    rows = _rows(out)
    assert [r["review"] for r in rows] == ["rejected", ""]
    assert json.loads((out / "summary.json").read_text())["review"]["file"] == "my-review.toml"
    bad = tmp_path / "bad.toml"
    bad.write_text('[[review]]\nimage = "x"\nat = [1, 1]\naction = "remove"\n')
    res = runner.invoke(cli, ["segment", str(survey), "-o", str(out), "--resume", "--review", str(bad)])
    assert res.exit_code == 1
    assert "bad.toml: [[review]] entry 1: action = 'remove' is not one of reject, accept, relabel" in res.output
