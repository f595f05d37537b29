"""The survey-level files, rebuilt from the per-image records after every run (used by irseg.batch).

``anomalies.csv``, ``failures.csv`` (only when an image failed), ``report.html``,
``summary.json`` and ``run.log`` are one set: all are built in memory, written to temporary
files, and only then renamed into place together (:func:`irseg.io.replace_files`), so a full
disk leaves the previous set whole instead of a new table beside an old report. The
manifest then records each file's sha256, so a set that was not written together can be told.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..io import OutputManifest, escape_text, replace_files
from .. import io as irio
from ..errors import InputError, OutputError
from ..report import ANOMALY_COLUMNS, SurveyAnomaly
from ._inputs import RESERVED_NAMES, SkippedFile
from ._records import ImageFailure, ImageOutcome
from ._summary import FAILURE_COLUMNS, build_summary, survey_anomalies, table_rows

__all__ = ["SurveyFiles", "write_survey_files", "check_survey_names"]


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


def check_survey_names(out_dir: Path, manifest: OutputManifest) -> None:
    """Refuse an output folder where a survey-level name holds something irseg did not write.

    Raises
    ------
    OutputError
        Naming the file: irseg never replaces or removes a file it did not write.
    """
    for name in RESERVED_NAMES:
        if manifest.in_the_way(name):
            damaged = (f" (its list of written files, {manifest.path.name}, cannot be read)"
                       if manifest.damaged else "")
            raise OutputError(
                f"{out_dir / name}: irseg did not write this file{damaged} and never replaces or removes "
                "files it did not write; move it away or choose another output folder (the out_dir setting)"
            )


def write_survey_files(
    out_dir: Path,
    ordered: Sequence[ImageOutcome],
    *,
    skipped: Sequence[SkippedFile] = (),
    log: Sequence[str] | None = None,
    manifest: OutputManifest | None = None,
) -> SurveyFiles:
    """Replace the survey-level files, as one set, from the outcomes in input order.

    Parameters
    ----------
    out_dir : Path
    ordered : sequence of ImageOutcome
    skipped : sequence of SkippedFile
        Listed in summary.json and the report.
    log : sequence of str, optional
        The lines of run.log (left as it is when None).
    manifest : OutputManifest, optional
        The output folder's manifest (read from ``out_dir`` when not given); updated with the
        names written and their sha256.

    Raises
    ------
    OutputError
        A file cannot be written (none is replaced), a name is held by a file irseg did not
        write, or an overlay cannot be read back for the report.
    """
    manifest = manifest if manifest is not None else OutputManifest(out_dir)
    check_survey_names(out_dir, manifest)
    records = [o.record for o in ordered if o.status == "ok" and o.record is not None]
    anomalies = survey_anomalies(records)
    summary = build_summary(ordered, anomalies, skipped)
    failures = tuple(o.failure for o in ordered if o.failure is not None)
    contents: dict[str, bytes | None] = {
        "anomalies.csv": irio.csv_bytes(table_rows(anomalies), ANOMALY_COLUMNS),
        "failures.csv": irio.csv_bytes(
            [{"file": f.image, "stage": f.stage, "message": f.message} for f in failures], FAILURE_COLUMNS
        ) if failures else None,
        "report.html": escape_text(_render_report(out_dir, summary, ordered)).encode("utf-8"),
        "summary.json": irio.dumps_json(summary),
    }
    if log is not None:
        contents["run.log"] = escape_text("\n".join(log) + "\n").encode("utf-8")
    if not manifest.owns("failures.csv"):
        contents = {k: v for k, v in contents.items() if v is not None or k != "failures.csv"}
    manifest.claim(name for name, data in contents.items() if data is not None)
    hashes = replace_files(out_dir, contents)
    manifest.survey_files = hashes
    manifest.prune()
    manifest.save()
    return SurveyFiles(summary=summary, anomalies=anomalies, failures=failures, report_path=out_dir / "report.html")


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
