"""Survey-level tables built from the per-image records (used by irseg.batch).

Everything here is a pure function of the ``result.json`` contents in input
order, so a resumed run rebuilds exactly the files of an uninterrupted one.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from .._version import __version__
from ..vocabulary import CAUSES
from ..io import normalise_json
from ..vocabulary import CAUTIONS

__all__ = ["ANOMALY_COLUMNS", "FAILURE_COLUMNS", "build_summary", "survey_rank"]

#: Columns of OUT/anomalies.csv, in order (an interface: other tools read it).
ANOMALY_COLUMNS = (
    "image", "anomaly", "kind", "cause", "reason", "area_m2", "area_low_m2", "area_high_m2",
    "mean_c", "min_c", "max_c", "reference_c", "delta_k", "excess_w", "excess_low_w", "excess_high_w",
    "excess_kwh_year", "f_rsi", "mould_risk", "centroid_row", "centroid_col",
    "bbox_row0", "bbox_col0", "bbox_row1", "bbox_col1", "severity",
    # beyond the contract's list, appended so its order stays intact: the area in pixels is the one
    # area that is known when the shot's geometry is not
    "area_px",
)

#: Columns of OUT/failures.csv.
FAILURE_COLUMNS = ("file", "stage", "message")



def survey_rank(records: Sequence[dict[str, Any]]) -> dict[tuple[int, int], int]:
    """Rank every anomaly of the survey with :func:`irseg.analysis.severity_key` (1 = repair first).

    Parameters
    ----------
    records : sequence of dict
        ``result.json`` contents in input order.

    Returns
    -------
    dict
        ``(position in records, anomaly id) -> survey severity``. Ties keep input order.
    """
    from dataclasses import fields

    from ..analysis import Anomaly, severity_key

    names = {f.name for f in fields(Anomaly)}
    keyed = []
    for position, record in enumerate(records):
        for row in record.get("anomalies", []):
            anomaly = Anomaly(**{k: v for k, v in row.items() if k in names})
            keyed.append((severity_key(anomaly), position, int(row["anomaly"])))
    keyed.sort(key=lambda item: (item[0], item[1], item[2]))
    return {(position, aid): rank for rank, (_, position, aid) in enumerate(keyed, start=1)}


def _total(values: list[Any]) -> float | None:
    known = [float(v) for v in values if v is not None]
    return math.fsum(known) if known else None


def _totals(rows: list[dict[str, Any]]) -> dict[str, Any]:
    return {
        "count": len(rows),
        "area_m2": _total([r.get("area_m2") for r in rows]),
        "excess_w": _total([r.get("excess_w") for r in rows]),
        "excess_kwh_year": _total([r.get("excess_kwh_year") for r in rows]),
        "n_unmeasured": sum(r.get("excess_w") is None for r in rows),
    }


def build_summary(outcomes: Sequence[Any]) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """summary.json content and anomalies.csv rows from the outcomes in input order.

    Parameters
    ----------
    outcomes : sequence of irseg.batch.ImageOutcome
        In input order; ``record`` set for ok images, ``failure`` for failed ones.

    Returns
    -------
    summary : dict
        Normalised JSON data (schema in the output contract).
    rows : list of dict
        anomalies.csv rows, by image order then anomaly id, ``severity`` re-ranked across the survey.
    """
    ok = [o for o in outcomes if o.status == "ok" and o.record is not None]
    records = [o.record for o in ok]
    ranks = survey_rank(records)
    rows: list[dict[str, Any]] = []
    for position, record in enumerate(records):
        for row in record.get("anomalies", []):
            out = {c: row.get(c) for c in ANOMALY_COLUMNS}
            out["image"] = record["image"]
            out["severity"] = ranks[(position, int(row["anomaly"]))]
            rows.append(out)
    images: list[dict[str, Any]] = []
    warnings: list[dict[str, str]] = []
    failures: list[dict[str, str]] = []
    for outcome in outcomes:
        record = outcome.record if outcome.status == "ok" else None
        if record is not None:
            images.append({
                "image": record["image"],
                "status": "ok",
                "view": record.get("view"),
                "delta_t_k": record.get("delta_t_k"),
                "n_anomalies": len(record.get("anomalies", [])),
                "warnings": list(record.get("warnings", [])),
                "overlay": record["outputs"]["overlay"],
                "result": record["outputs"]["result"],
            })
            warnings.extend({"image": record["image"], "message": w} for w in record.get("warnings", []))
        else:
            failure = outcome.failure
            images.append({
                "image": outcome.image, "status": "failed", "view": None, "delta_t_k": None,
                "n_anomalies": 0, "warnings": [], "overlay": None, "result": None,
            })
            if failure is not None:
                failures.append({"file": failure.file, "stage": failure.stage, "message": failure.message})
    by_cause = {cause: _totals([r for r in rows if r.get("cause") == cause]) for cause in CAUSES}
    for cause in sorted({str(r.get("cause")) for r in rows} - set(CAUSES)):
        by_cause[cause] = _totals([r for r in rows if str(r.get("cause")) == cause])
    summary = {
        "irseg_version": __version__,
        "images": images,
        "n_images": len(outcomes),
        "n_ok": len(ok),
        "n_failed": len(outcomes) - len(ok),
        "totals_by_cause": by_cause,
        "totals": _totals(rows),
        "anomalies": sorted(rows, key=lambda r: r["severity"]),
        "failures": failures,
        "warnings": warnings,
        "cautions": list(CAUTIONS),
    }
    return normalise_json(summary), rows
