"""Survey-level tables built from the per-image records (used by irseg.batch).

Everything here is a pure function of the ``result.json`` records in input order, so a
resumed run rebuilds exactly the files of an uninterrupted one.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import replace
from typing import Any

from .._version import __version__
from ..io import normalise_json
from ..report import ANOMALY_COLUMNS, SurveyAnomaly, anomaly_table
from ..vocabulary import CAUSES, CAUTIONS
from ._inputs import SkippedFile
from ._records import ImageOutcome, ImageRecord

__all__ = ["FAILURE_COLUMNS", "build_summary", "survey_anomalies", "table_rows"]

#: Columns of OUT/failures.csv (an interface: ``file`` is the image's name in the outputs).
FAILURE_COLUMNS = ("file", "stage", "message")


def survey_anomalies(records: Sequence[ImageRecord]) -> tuple[SurveyAnomaly, ...]:
    """Every anomaly of the survey, ranked with :func:`irseg.analysis.severity_key` (1 = repair first).

    Parameters
    ----------
    records : sequence of ImageRecord
        The processed images in input order.

    Returns
    -------
    tuple of SurveyAnomaly
        By image order then anomaly id, ``severity`` set to the survey rank. Ties keep input order.
    """
    from ..analysis import severity_key  # reads the figures by name: a SurveyAnomaly has them all

    flat = [(position, anomaly) for position, record in enumerate(records) for anomaly in record.anomalies]
    order = sorted(range(len(flat)), key=lambda i: (severity_key(flat[i][1]), flat[i][0], flat[i][1].anomaly))
    rank = {i: k for k, i in enumerate(order, start=1)}
    return tuple(replace(anomaly, severity=rank[i]) for i, (_, anomaly) in enumerate(flat))


def table_rows(anomalies: Iterable[SurveyAnomaly], columns: Sequence[str] = ANOMALY_COLUMNS) -> list[dict[str, Any]]:
    """:func:`irseg.report.anomaly_table` as one mapping per anomaly (CSV and JSON rows)."""
    table = anomaly_table(anomalies, columns)
    return [dict(zip(table, values)) for values in zip(*table.values())]


def _total(values: Iterable[float | None]) -> float | None:
    known = [float(v) for v in values if v is not None]
    return math.fsum(known) if known else None


def _totals(anomalies: Sequence[SurveyAnomaly]) -> dict[str, Any]:
    return {
        "count": len(anomalies),
        "area_m2": _total(a.area_m2 for a in anomalies),
        "excess_w": _total(a.excess_w for a in anomalies),
        "excess_kwh_year": _total(a.excess_kwh_year for a in anomalies),
        "n_unmeasured": sum(a.excess_w is None for a in anomalies),
    }


def _image_row(outcome: ImageOutcome) -> dict[str, Any]:
    record = outcome.record if outcome.status == "ok" else None
    if record is None:
        return {"image": outcome.image, "status": "failed", "view": None, "delta_t_k": None,
                "n_anomalies": 0, "warnings": [], "overlay": None, "result": None}
    return {
        "image": record.image,
        "status": "ok",
        "view": record.view,
        "delta_t_k": record.delta_t_k,
        "n_anomalies": len(record.anomalies),
        "warnings": list(record.warnings),
        "overlay": record.outputs["overlay"],
        "result": record.outputs["result"],
    }


def build_summary(
    outcomes: Sequence[ImageOutcome],
    anomalies: Sequence[SurveyAnomaly],
    skipped: Sequence[SkippedFile] = (),
) -> dict[str, Any]:
    """The content of summary.json.

    Parameters
    ----------
    outcomes : sequence of ImageOutcome
        In input order; ``record`` set for ok images, ``failure`` for failed ones.
    anomalies : sequence of SurveyAnomaly
        :func:`survey_anomalies` of the ok images' records.
    skipped : sequence of SkippedFile
        Files and folders the input scan left out (``skipped``: ``{"file", "reason"}``).

    Returns
    -------
    dict
        Normalised JSON data (schema in the output contract); ``anomalies`` holds the rows
        of anomalies.csv in survey-rank order.
    """
    warnings = [
        {"image": o.record.image, "message": w}
        for o in outcomes if o.status == "ok" and o.record is not None for w in o.record.warnings
    ]
    failures = [
        {"file": o.failure.image, "stage": o.failure.stage, "message": o.failure.message}
        for o in outcomes if not (o.status == "ok" and o.record is not None) and o.failure is not None
    ]
    n_ok = sum(o.status == "ok" and o.record is not None for o in outcomes)
    by_cause = {cause: _totals([a for a in anomalies if a.cause == cause]) for cause in CAUSES}
    for cause in sorted({str(a.cause) for a in anomalies} - set(CAUSES)):
        by_cause[cause] = _totals([a for a in anomalies if str(a.cause) == cause])
    summary = {
        "irseg_version": __version__,
        "images": [_image_row(o) for o in outcomes],
        "n_images": len(outcomes),
        "n_ok": n_ok,
        "n_failed": len(outcomes) - n_ok,
        "totals_by_cause": by_cause,
        "totals": _totals(anomalies),
        "anomalies": sorted(table_rows(anomalies), key=lambda row: row["severity"]),
        "failures": failures,
        "skipped": [{"file": s.file, "reason": s.reason} for s in skipped],
        "warnings": warnings,
        "cautions": list(CAUTIONS),
    }
    return normalise_json(summary)
