"""The survey-level files, rebuilt from the per-image records after every run (used by irseg.batch).

``anomalies.csv``, ``failures.csv`` (only when an image failed), ``report.html`` and
``summary.json``, in that order; ``run.log`` is written last by :func:`irseg.batch.run_survey`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .. import io as irio
from ..errors import InputError, OutputError
from ..report import ANOMALY_COLUMNS, SurveyAnomaly
from ._records import ImageFailure, ImageOutcome
from ._summary import FAILURE_COLUMNS, build_summary, survey_anomalies, table_rows

__all__ = ["SurveyFiles", "write_survey_files"]


@dataclass(frozen=True)
class SurveyFiles:
    """What :func:`write_survey_files` wrote.

    Attributes
    ----------
    summary : dict
        The content of summary.json.
    anomalies : tuple of SurveyAnomaly
        Every anomaly, by image order then id, with its survey rank.
    failures : tuple of ImageFailure
    report_path : Path
    """

    summary: dict[str, Any]
    anomalies: tuple[SurveyAnomaly, ...]
    failures: tuple[ImageFailure, ...]
    report_path: Path


def write_survey_files(out_dir: Path, ordered: Sequence[ImageOutcome]) -> SurveyFiles:
    """Write the survey-level files from the outcomes in input order.

    Raises
    ------
    OutputError
        A file cannot be written, or an overlay cannot be read back for the report.
    """
    records = [o.record for o in ordered if o.status == "ok" and o.record is not None]
    anomalies = survey_anomalies(records)
    summary = build_summary(ordered, anomalies)
    failures = tuple(o.failure for o in ordered if o.failure is not None)
    irio.write_csv(out_dir / "anomalies.csv", table_rows(anomalies), ANOMALY_COLUMNS)
    failures_path = out_dir / "failures.csv"
    if failures:
        rows = [{"file": f.image, "stage": f.stage, "message": f.message} for f in failures]
        irio.write_csv(failures_path, rows, FAILURE_COLUMNS)
    else:
        irio.remove_file(failures_path, hint="a stale file of an earlier run")
    report_path = out_dir / "report.html"
    irio.write_text(report_path, _render_report(out_dir, summary, ordered))
    irio.write_json(out_dir / "summary.json", summary)
    return SurveyFiles(summary=summary, anomalies=anomalies, failures=failures, report_path=report_path)


def _render_report(out_dir: Path, summary: dict[str, Any], ordered: Sequence[ImageOutcome]) -> str:
    from ..report import render_report

    overlays: dict[str, bytes] = {}
    for outcome in ordered:
        if outcome.status == "ok":
            path = out_dir / outcome.stem / "overlay.png"
            try:
                overlays[outcome.image] = irio.read_small_bytes(path, max_bytes=1 << 30, what="overlay")
            except InputError as exc:
                raise OutputError(f"cannot read back the overlay: {exc}") from None
    return render_report(summary, overlays)
