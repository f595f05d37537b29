"""Survey-level tables built from the per-image records (used by irseg.batch).

Everything here is a pure function of the ``result.json`` records in input order, so a
resumed run rebuilds exactly the files of an uninterrupted one.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import replace
from typing import Any

from .._version import __version__
from ..io import normalise_json
from ..report import ANOMALY_COLUMNS, SurveyAnomaly, anomaly_table, is_expected, is_repeat, rank_anomalies
from ..vocabulary import CAUSES, CAUTIONS, REPEAT_MARK
from ._inputs import SkippedFile
from ._records import ImageOutcome, ImageRecord

__all__ = ["FAILURE_COLUMNS", "build_summary", "survey_anomalies", "survey_records", "rank_survey", "table_rows",
           "pair_rows", "pair_failures"]

#: Columns of OUT/failures.csv (an interface: ``file`` is the image's name in the outputs).
FAILURE_COLUMNS = ("file", "stage", "message")


def survey_anomalies(records: Sequence[ImageRecord]) -> tuple[SurveyAnomaly, ...]:
    """Every anomaly of the survey, ranked by the rule of :mod:`irseg.report._ranking` (1 = act first).

    Parameters
    ----------
    records : sequence of ImageRecord
        The processed images in input order.

    Returns
    -------
    tuple of SurveyAnomaly
        By image order then anomaly id, ``rank`` set to the survey rank. Ties keep input order.
        (:func:`survey_records` then :func:`rank_survey`.)
    """
    return rank_survey(survey_records(records))


def survey_records(records: Sequence[ImageRecord]) -> list[SurveyAnomaly]:
    """Every anomaly of the survey with its survey-level fields: ``uid``, ``title``, ``element``.

    ``uid`` is ``<stem>#<id>`` (the stem names the image's output folder, unique in the survey);
    ``title`` and ``element`` come from the image's ``[image]`` section. Not ranked.
    """
    out = []
    for record in records:
        details = record.metadata.get("image")
        details = details if isinstance(details, dict) else {}
        title, element = (_detail(details, key) for key in ("title", "element"))
        repeat = _repeat_words(record)
        out.extend(replace(a, uid=f"{record.stem}#{a.anomaly}", title=title, element=element,
                           reason=_with_repeat(a, repeat))
                   for a in record.anomalies)
    return out


def _repeat_words(record: ImageRecord) -> str | None:
    """The words a pressurised image's own anomalies get when its pair was compared (None otherwise).

    Both images of a pair see the same defects; the pair's reference (the ambient shot) counts them,
    so the survey counts each defect once. When the pair failed (views that do not overlap), the
    pressurised image's anomalies count as those of any image.
    """
    pair = record.pair
    if pair is None or record.registration is None or pair.get("status") != "ok":
        return None
    pressure = pair.get("pressure_pa")
    under = f"{float(pressure):g} Pa pressure difference" if isinstance(pressure, (int, float)) else "pressure difference"
    return f"seen again under a {under}: {REPEAT_MARK} ({pair.get('reference')})"


def _with_repeat(anomaly: SurveyAnomaly, words: str | None) -> str | None:
    if words is None or anomaly.pressure_pa is not None:  # a leak found by the pair counts here
        return anomaly.reason
    return f"{anomaly.reason}; {words}" if anomaly.reason else words


def _detail(details: dict[str, Any], key: str) -> str | None:
    value = details.get(key)
    return value if isinstance(value, str) and value else None


def rank_survey(anomalies: Sequence[SurveyAnomaly]) -> tuple[SurveyAnomaly, ...]:
    """The anomalies in the order given, ``rank`` = survey rank by :func:`irseg.report.rank_anomalies`.

    An anomaly the review rejected, or one expected in the construction, has no rank (None).
    Ties keep the order given.
    """
    return rank_anomalies(anomalies)


def table_rows(anomalies: Iterable[SurveyAnomaly], columns: Sequence[str] = ANOMALY_COLUMNS) -> list[dict[str, Any]]:
    """:func:`irseg.report.anomaly_table` as one mapping per anomaly (CSV and JSON rows)."""
    table = anomaly_table(anomalies, columns)
    return [dict(zip(table, values)) for values in zip(*table.values())]


def _rank_key(rank: int | None) -> tuple[bool, int]:
    return (rank is None, rank or 0)


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


def _image_row(outcome: ImageOutcome, rejected: Mapping[str, int], photos: Mapping[str, str]) -> dict[str, Any]:
    record = outcome.record if outcome.status == "ok" else None
    if record is None:
        return {"image": outcome.image, "status": "failed", "view": None, "delta_t_k": None,
                "n_anomalies": 0, "warnings": [], "overlay": None, "result": None}
    details = record.metadata.get("image")
    n_rejected = rejected.get(record.image, 0)
    return {
        "image": record.image,
        "status": "ok",
        "view": record.view,
        "delta_t_k": record.delta_t_k,
        "n_anomalies": len(record.anomalies) - n_rejected,
        "warnings": list(record.warnings),
        "overlay": record.outputs["overlay"],
        "result": record.outputs["result"],
        "n_rejected": n_rejected,
        "details": dict(details) if isinstance(details, dict) else {},
        "photo": photos.get(record.image),
    }


def _survey_details(outcomes: Sequence[ImageOutcome]) -> dict[str, Any]:
    """``[survey]`` of the first analysed image that has one (the job's details)."""
    for o in outcomes:
        details = o.record.metadata.get("survey") if o.status == "ok" and o.record is not None else None
        if isinstance(details, dict) and details:
            return dict(details)
    return {}


def build_summary(
    outcomes: Sequence[ImageOutcome],
    anomalies: Sequence[SurveyAnomaly],
    skipped: Sequence[SkippedFile] = (),
    *,
    review: Mapping[str, Any] | None = None,
    photos: Mapping[str, str] | None = None,
    notes: Sequence[tuple[str, str]] = (),
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
    review : mapping, optional
        ``{"file", "entries", "applied", "warnings"}`` of the review applied (``review`` in the
        summary, with ``rejected`` added).
    photos : mapping of str to str, optional
        Image name -> its photo's file name, relative to the survey root (``images[i]["photo"]``).
    notes : sequence of (str, str)
        More ``(image, message)`` warnings of the survey files (unmatched review entries, photos
        that cannot be shown), appended to ``warnings``.

    Returns
    -------
    dict
        Normalised JSON data (schema in the output contract); ``anomalies`` holds the rows
        of anomalies.csv in survey-rank order (rejected ones last, without a rank). Totals
        count no rejected anomaly. ``survey`` holds the job's ``[survey]`` details, each image
        row its ``[image]`` ``details``, ``photo`` and ``n_rejected``.
    """
    warnings = [
        {"image": o.record.image, "message": w}
        for o in outcomes if o.status == "ok" and o.record is not None for w in o.record.warnings
    ]
    failures = [
        {"file": o.failure.image, "stage": o.failure.stage, "message": o.failure.message}
        for o in outcomes if not (o.status == "ok" and o.record is not None) and o.failure is not None
    ]
    warnings += [{"image": image, "message": text} for image, text in notes]
    review = dict(review) if review else {"file": None, "entries": 0, "applied": 0, "warnings": []}
    counted = [a for a in anomalies if a.review != "rejected"]
    rejected: dict[str, int] = {}
    for a in anomalies:
        if a.review == "rejected":
            rejected[a.image] = rejected.get(a.image, 0) + 1
    review["rejected"] = sum(rejected.values())
    n_ok = sum(o.status == "ok" and o.record is not None for o in outcomes)
    by_cause = {cause: _totals([a for a in counted if a.cause == cause]) for cause in CAUSES}
    for cause in sorted({str(a.cause) for a in counted} - set(CAUSES)):
        by_cause[cause] = _totals([a for a in counted if str(a.cause) == cause])
    summary = {
        "irseg_version": __version__,
        "survey": _survey_details(outcomes),
        "images": [_image_row(o, rejected, photos or {}) for o in outcomes],
        "n_images": len(outcomes),
        "n_ok": n_ok,
        "n_failed": len(outcomes) - n_ok,
        "totals_by_cause": by_cause,
        "totals": _totals(counted),
        # the report's first page and the command line's summary: probable defects only, framing members
        # that are expected in the construction left out (report/_ranking.is_expected)
        "defects": {**_totals([a for a in counted if not (is_expected(a) or is_repeat(a))]),
                    "n_expected": sum(1 for a in counted if is_expected(a)),
                    "n_repeated": sum(1 for a in counted if is_repeat(a) and not is_expected(a))},
        "anomalies": sorted(table_rows(anomalies), key=lambda row: _rank_key(row["rank"])),
        "failures": failures,
        "skipped": [{"file": s.file, "reason": s.reason} for s in skipped],
        "warnings": warnings,
        "cautions": list(CAUTIONS),
        "review": review,
    }
    return normalise_json(summary)


def pair_rows(records: Sequence[ImageRecord]) -> list[dict[str, Any]]:
    """summary.json's ``pairs``: one row per pressurised image, in input order (irseg.pairs).

    Each row: ``image`` (the pressurised image), ``reference``, ``status`` (``"ok"``/``"failed"``),
    ``message`` (when failed), ``registration`` (result.json's), the pair figures (pressure, minutes,
    drift, noise, leak count), the leak ids (``anomalies``) and the pair pictures (``difference``,
    ``pair_labels``, relative to OUT; None when failed).
    """
    rows = []
    for record in records:
        if record.pair is None:
            continue
        ok = record.registration is not None and record.pair.get("status") == "ok"
        leaks = [a.anomaly for a in record.anomalies if a.pressure_pa is not None]
        rows.append({
            **dict(record.pair),
            "image": record.image,
            "registration": dict(record.registration) if ok else None,
            "anomalies": leaks,
            "difference": record.outputs.get("difference") if ok else None,
            "pair_labels": record.outputs.get("pair_labels") if ok else None,
        })
    return rows


def pair_failures(records: Sequence[ImageRecord]) -> list[tuple[str, str]]:
    """``(image, message)`` of each pair that failed (a row of failures.csv with stage ``pair``)."""
    return [(r.image, str(r.pair.get("message") or "the pair failed")) for r in records
            if r.pair is not None and r.pair.get("status") == "failed"]
