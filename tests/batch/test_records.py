"""The survey's typed records: SurveyAnomaly, anomaly_table and ImageRecord (irseg.batch).

External checks: the field list of the analysis stage's own Anomaly type, the column layout of
scikit-image's ``regionprops_table`` (the model for :func:`anomaly_table`), Python's csv module
reading anomalies.csv (RFC 4180) and the json module reading result.json.
"""

from __future__ import annotations

import csv
import json
from dataclasses import fields
from types import SimpleNamespace

import numpy as np
import pytest
from skimage.measure import regionprops_table
from tests.support.survey import data_files, make_survey

from irseg.analysis import Anomaly
from irseg.batch import ANOMALY_COLUMNS, ImageRecord, SurveyAnomaly, anomaly_table, run_survey
from irseg.errors import ConfigError
from irseg.report import CSV_DECIMALS, csv_rows


def test_survey_anomaly_has_the_image_every_anomaly_field_and_the_survey_rank():
    analysis_fields = [f.name for f in fields(Anomaly)]
    survey_fields = [f.name for f in fields(SurveyAnomaly)]
    # Anomaly.severity (rank within the image) is SurveyAnomaly.image_severity; rank is the survey rank
    # (issue 14: it replaced the survey-level severity) plus the survey-level fields (issue 13): the
    # survey-wide name, the review and the image's details
    survey_level = ["uid", "review", "note", "title", "element"]
    pair_level = ["pressure_pa", "cooling_k", "cooling_max_k"]  # leaks found by a pair (irseg.pairs, issue 16)
    expected = ["image", *(("image_severity" if n == "severity" else n) for n in analysis_fields), "rank",
                *survey_level, *pair_level]
    assert sorted(survey_fields) == sorted(expected)
    assert set(ANOMALY_COLUMNS) <= set(survey_fields)


def test_anomaly_table_has_the_layout_of_regionprops_table():
    # regionprops_table (scikit-image) returns {property: column}, one value per region, in label order.
    labels = np.zeros((12, 16), np.int32)
    labels[1:4, 2:9] = 1
    labels[6:11, 3:5] = 2
    labels[7:9, 10:15] = 3
    reference = regionprops_table(labels, properties=("label", "area", "bbox"))
    records = [
        SurveyAnomaly(image="wall.npy", anomaly=int(k), area_px=int(a), bbox_row0=int(r0), bbox_col0=int(c0),
                      bbox_row1=int(r1), bbox_col1=int(c1))
        for k, a, r0, c0, r1, c1 in zip(reference["label"], reference["area"], reference["bbox-0"],
                                        reference["bbox-1"], reference["bbox-2"], reference["bbox-3"])
    ]
    columns = ("anomaly", "area_px", "bbox_row0", "bbox_col0", "bbox_row1", "bbox_col1")
    table = anomaly_table(records, columns)
    assert list(table) == list(columns)
    for ours, theirs in zip(columns, ("label", "area", "bbox-0", "bbox-1", "bbox-2", "bbox-3")):
        assert table[ours] == reference[theirs].tolist()
    assert anomaly_table([], columns) == {c: [] for c in columns}
    assert list(anomaly_table(records)) == list(ANOMALY_COLUMNS)
    with pytest.raises(ConfigError, match="no column 'area'"):
        anomaly_table(records, ("anomaly", "area"))


def test_json_round_trip_and_type_checks():
    record = SurveyAnomaly(image="a.tif", anomaly=3, kind="cold", area_m2=0.25, mould_risk=False, rank=7)
    assert SurveyAnomaly.from_json(json.loads(json.dumps(record.to_json()))) == record
    with pytest.raises(ConfigError, match="anomaly = True must be a JSON int"):
        SurveyAnomaly.from_json({"image": "a.tif", "anomaly": True})  # bool is not an integer in JSON
    with pytest.raises(ConfigError, match="'anomaly' is missing"):
        SurveyAnomaly.from_json({"image": "a.tif"})


def _csv_text(value):
    """How RFC 4180 text in anomalies.csv spells a JSON value (irseg's documented CSV convention)."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    return repr(value) if isinstance(value, float) else str(value)


def test_survey_table_is_the_csv_and_result_json_is_the_image_record(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)
    out = tmp_path / "out"
    result = run_survey([survey], out, jobs=1)
    with open(out / "anomalies.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    table = anomaly_table(result.anomalies)
    assert len(rows) == len(result.anomalies) == result.n_anomalies == 3
    planner = csv_rows(result.anomalies)  # rounded to what each value means (issue 14)
    for column in table:
        assert [r[column] for r in rows] == [_csv_text(p[column]) for p in planner], column
        rounded = CSV_DECIMALS.get(column)
        for r, value in zip(rows, table[column]):
            if rounded is not None and value is not None:
                # the CSV holds the full-precision value (summary.json) to the column's decimals
                assert float(r[column]) == pytest.approx(value, abs=0.5 * 10.0**-rounded + 1e-12), column

    for path, outcome in zip(paths, result.outcomes):
        stored = json.loads((out / path.stem / "result.json").read_text(encoding="utf-8"))
        assert ImageRecord.from_json(stored) == outcome.record
        assert outcome.record.to_json() == stored
        assert stored["assumed"] == list(outcome.record.assumed)
        # result.json keeps the analysis stage's own anomaly fields, severity = rank within the image
        assert all(set(a) == {f.name for f in fields(Anomaly)} for a in stored["anomalies"])


def test_a_tampered_record_is_recomputed_on_resume(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 2)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    reference = data_files(out)
    marker = out / paths[0].stem / "result.json"
    stored = json.loads(marker.read_text(encoding="utf-8"))
    stored["anomalies"][0]["area_px"] = "many"
    marker.write_text(json.dumps(stored), encoding="utf-8")
    with pytest.raises(ConfigError, match=r"anomalies\[0\]: area_px = 'many'"):
        ImageRecord.from_json(stored)
    again = run_survey([survey], out, jobs=1, resume=True)
    assert again.n_skipped == 1 and data_files(out) == reference


def test_assumed_values_of_the_metadata_go_into_the_record(monkeypatch):
    from irseg.batch import SurveySettings
    from irseg.batch import _worker

    monkeypatch.setattr("irseg.metadata.meta_to_dict", lambda meta: {"sources": ["survey.toml"]})
    assumption = SimpleNamespace(key="camera.netd_k", value=0.05, reason="not in the metadata; a typical value")
    meta = SimpleNamespace(surface=SimpleNamespace(view="interior"), air=SimpleNamespace(inside_c=20.0, outside_c=0.0),
                           assumed=(assumption,))
    shape = (4, 5)
    result = SimpleNamespace(
        meta=meta, warnings=(),
        frame=SimpleNamespace(temperature_c=np.zeros(shape), mask=np.zeros(shape, bool), n_dead=0, n_nan=0,
                              warnings=()),
        segmentation=SimpleNamespace(params={}, n_regions=1, iterations=1, converged=True, message="converged"),
        analysis=SimpleNamespace(anomalies=(), pixel_m=None, pixel_area_m2=None, h_w_m2k=None, warnings=()),
    )
    task = {"image": "w.npy", "rel": "w.npy", "stem": "w", "root": "/survey", "fingerprint": "sha256:0",
            "settings": SurveySettings()}
    record = _worker._make_record(result, task, ())
    assert record.assumed == ({"key": "camera.netd_k", "value": 0.05, "reason": assumption.reason},)
    assert record.to_json()["assumed"] == [{"key": "camera.netd_k", "value": 0.05, "reason": assumption.reason}]
    assert record.delta_t_k == 20.0 and record.anomalies == ()
