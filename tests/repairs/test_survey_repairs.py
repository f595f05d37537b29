"""A survey run writes the repair plan with the other survey files (irseg.batch.run_survey end to end).

Checks: RFC 4180 CSV read back with the csv module; the issue-17 interface (repairs.csv and
confirm_points.csv columns, summary.json's ``repairs``); the arithmetic of issue 17 [C] on the
figures the survey itself wrote to anomalies.csv.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from pathlib import Path

import pytest
from tests.support.survey import SURVEY_TOML, make_survey

from irseg.batch import run_survey
from irseg.repairs import CONFIRM_COLUMNS, REPAIR_COLUMNS

COSTS = """
[costs]
currency = "EUR"
energy_price_per_kwh = 0.10
missing_insulation_per_m2 = 80.0
uncertainty = 0.2
"""


def _csv(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    text = path.read_bytes().decode("utf-8")
    reader = csv.DictReader(io.StringIO(text, newline=""))
    return list(reader.fieldnames or []), list(reader)


def _run(tmp_path: Path, extra: str) -> tuple[Path, list[dict[str, str]], list[dict[str, str]]]:
    survey = tmp_path / "survey"
    make_survey(survey, 2, tiff=False)
    (survey / "survey.toml").write_text(SURVEY_TOML + extra, encoding="utf-8")
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    header, rows = _csv(out / "repairs.csv")
    assert tuple(header) == REPAIR_COLUMNS
    _, anomalies = _csv(out / "anomalies.csv")
    return out, rows, anomalies


def test_a_priced_survey_writes_costs_savings_and_payback(tmp_path):
    out, rows, anomalies = _run(tmp_path, COSTS)
    by_uid = {a["uid"]: a for a in anomalies}
    assert rows and all(r["cause"] == "missing_insulation" and r["unit"] == "m2" for r in rows)
    assert [int(r["rank"]) for r in rows] == list(range(1, len(rows) + 1))
    for row in rows:
        a = by_uid[row["uid"]]
        area, kwh = float(a["area_m2"]), float(a["excess_kwh_year"])
        # [C] issue 17: quantity = area × 1.2; cost = quantity × 80; saving = kWh × 0.10; payback = cost / saving
        assert float(row["quantity"]) == pytest.approx(area * 1.2, abs=1e-3)
        assert float(row["cost"]) == pytest.approx(area * 1.2 * 80.0, abs=0.01)
        assert float(row["cost_high"]) == pytest.approx(float(a["area_high_m2"]) * 1.2 * 80.0 * 1.2, abs=0.01)
        assert float(row["saving_per_year"]) == pytest.approx(kwh * 0.10, abs=0.01)
        assert float(row["payback_years"]) == pytest.approx(area * 96.0 / (kwh * 0.10), abs=0.06)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    repairs = summary["repairs"]
    assert repairs["currency"] == "EUR" and repairs["priced"] and repairs["n_items"] == len(rows)
    assert repairs["totals"]["cost"] == pytest.approx(math.fsum(float(r["cost"]) for r in rows), abs=0.02)
    assert repairs["by_element"][0]["element"] is None  # the synthetic images name no element
    report = (out / "report.html").read_text(encoding="utf-8")
    assert 'id="repairs"' in report and "to be confirmed on site" in report
    # both files join the survey's one set: in the manifest with their sha256
    manifest = json.loads((out / ".irseg-outputs").read_text(encoding="utf-8"))
    for name in ("repairs.csv", "confirm_points.csv"):
        digest = "sha256:" + hashlib.sha256((out / name).read_bytes()).hexdigest()
        assert manifest["survey_files"][name] == digest and name in manifest["files"]
    header, points = _csv(out / "confirm_points.csv")
    assert tuple(header) == CONFIRM_COLUMNS and points == []  # walls seen from inside: nothing to core


def test_a_survey_without_costs_gives_quantities_only(tmp_path):
    out, rows, _ = _run(tmp_path, "")
    assert rows
    money = ("cost", "cost_low", "cost_high", "saving_per_year", "payback_years", "payback_low_years",
             "payback_high_years")
    assert all(r[c] == "" for r in rows for c in money)
    assert all(float(r["quantity"]) > 0 and float(r["saving_kwh_year"]) > 0 for r in rows)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary["repairs"]["priced"] is False and summary["repairs"]["totals"]["cost"] is None


def test_confirm_rows_keep_only_the_plans_moisture_items():
    from irseg.report import SurveyAnomaly
    from irseg.repairs import repair_plan
    from irseg.repairs._survey import confirm_rows

    roof = [SurveyAnomaly(image="r.tif", anomaly=k, uid=f"r#{k}", cause="moisture", severity=k, area_m2=1.0,
                          review="rejected" if k == 2 else None) for k in (1, 2)]
    recorded = [{"anomaly": k, "point": 3 * (k - 1) + j, "kind": kind, "row": 5, "col": 6, "x_m": 0.123456,
                 "y_m": None} for k in (1, 2) for j, kind in enumerate(("wet", "edge", "dry"), start=1)]
    rows = confirm_rows([("r", recorded)], repair_plan(roof))
    assert [(r["uid"], r["point"], r["kind"]) for r in rows] == [("r#1", 1, "wet"), ("r#1", 2, "edge"), ("r#1", 3, "dry")]
    assert tuple(rows[0]) == CONFIRM_COLUMNS and rows[0]["x_m"] == 0.123 and rows[0]["y_m"] is None


def test_the_sample_roofs_get_wet_edge_and_dry_points_on_their_label_images(tmp_path):
    import shutil

    import cv2

    root = Path(__file__).resolve().parents[2] / "sample_images"
    survey = tmp_path / "sample"
    shutil.copytree(root, survey)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    _, points = _csv(out / "confirm_points.csv")
    _, anomalies = _csv(out / "anomalies.csv")
    wet_roofs = [a["uid"] for a in anomalies if a["cause"] == "moisture"]
    assert wet_roofs and sorted({p["uid"] for p in points}) == sorted(wet_roofs)
    for uid in wet_roofs:
        stem, anomaly = uid.split("#")
        labels = cv2.imread(str(out / stem / "labels.png"), cv2.IMREAD_UNCHANGED)
        mine = [p for p in points if p["uid"] == uid]
        assert [p["kind"] for p in mine] == ["wet", "edge", "dry"]
        (r0, c0), (r1, c1), (r2, c2) = ((int(p["row"]), int(p["col"])) for p in mine)
        assert labels[r0, c0] == int(anomaly) and labels[r1, c1] == int(anomaly) and labels[r2, c2] == 0
        assert (labels[r1 - 1:r1 + 2, c1 - 1:c1 + 2] != int(anomaly)).any()  # the edge touches the outside
        pixel_m = json.loads((out / stem / "result.json").read_text())["analysis"]["pixel_m"]
        assert float(mine[0]["x_m"]) == pytest.approx((c0 + 0.5) * pixel_m, abs=1e-3)
