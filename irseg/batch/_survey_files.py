"""The survey-level files, rebuilt from the per-image records after every run (used by irseg.batch).

``anomalies.csv``, ``repairs.csv``, ``confirm_points.csv`` (:mod:`irseg.repairs`), ``failures.csv``
(only when an image failed), ``report.html``, ``summary.json`` and ``run.log`` are one set: all are built in memory, written to temporary
files, and only then renamed into place together (:func:`irseg.io.replace_files`), so a full
disk leaves the previous set whole instead of a new table beside an old report. The
manifest then records each file's sha256, so a set that was not written together can be told.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..io import OutputManifest, escape_line, escape_text, replace_files
from .. import io as irio
from ..controls import ReviewEntry
from ..errors import InputError, OutputError
from ..report import ANOMALY_COLUMNS, CSV_DIALECTS, SurveyAnomaly, csv_rows
from ..repairs import CONFIRM_COLUMNS, REPAIR_COLUMNS, survey_repairs
from ._inputs import RESERVED_NAMES, SkippedFile
from ._loop import stamp
from ._records import ImageFailure, ImageOutcome, ImageRecord
from ._summary import FAILURE_COLUMNS, build_summary, pair_failures, pair_rows, rank_survey, survey_records

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
    review: Sequence[ReviewEntry] = (),
    review_file: str | None = None,
    photos: Mapping[str, tuple[Path, str]] | None = None,
    csv_dialect: str = "rfc4180",
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
    review : sequence of ReviewEntry
        The thermographer's review (:func:`irseg.controls.load_review`), applied to the records:
        pixels are looked up in each image's ``labels.png``; no image is computed again.
    review_file : str, optional
        The review file's name (recorded in summary.json).
    photos : mapping, optional
        Image name -> (photo path, name relative to the survey root): shown beside the overlay.
    csv_dialect : {"rfc4180", "excel-eu"}
        Separator and decimal mark of anomalies.csv (:data:`irseg.report.CSV_DIALECTS`).

    Raises
    ------
    OutputError
        A file cannot be written (none is replaced), a name is held by a file irseg did not
        write, or an overlay cannot be read back for the report.
    """
    manifest = manifest if manifest is not None else OutputManifest(out_dir)
    check_survey_names(out_dir, manifest)
    records = [o.record for o in ordered if o.status == "ok" and o.record is not None]
    anomalies, review_info, notes = _reviewed(out_dir, records, review, review_file)
    thumbs, photo_names, photo_notes = _photos(photos or {})
    repairs = survey_repairs(anomalies, [(r.image, r.metadata.get("costs")) for r in records],
                             [(r.stem, r.analysis.get("confirm_points") or ()) for r in records])
    notes += photo_notes + repairs.notes
    notes += _condition_notes(records)
    summary = build_summary(ordered, anomalies, skipped, review=review_info, photos=photo_names, notes=notes)
    summary = {**summary, "repairs": irio.normalise_json(repairs.summary)}  # the repair plan (irseg.repairs)
    # pairs under a pressure difference (irseg.pairs): a failed pair is a failures.csv row of stage "pair"
    failed_pairs = [ImageFailure(image=image, stage="pair", message=message)
                    for image, message in pair_failures(records)]
    summary = {**summary, "pairs": irio.normalise_json(pair_rows(records)),
               "failures": [*summary["failures"], *({"file": f.image, "stage": f.stage, "message": f.message}
                                                     for f in failed_pairs)]}
    failures = (*(o.failure for o in ordered if o.failure is not None), *failed_pairs)
    contents: dict[str, bytes | None] = {
        "anomalies.csv": _anomalies_csv(anomalies, csv_dialect),
        "repairs.csv": irio.csv_bytes(repairs.rows, REPAIR_COLUMNS),
        "confirm_points.csv": irio.csv_bytes(repairs.points, CONFIRM_COLUMNS),
        "failures.csv": irio.csv_bytes(
            [{"file": f.image, "stage": f.stage, "message": f.message} for f in failures], FAILURE_COLUMNS
        ) if failures else None,
        "report.html": escape_text(_render_report(out_dir, summary, ordered, thumbs)).encode("utf-8"),
        "summary.json": irio.dumps_json(summary),
    }
    if log is not None:
        log = [*log, *_log_lines(summary["review"], notes)]
        contents["run.log"] = escape_text("\n".join(log) + "\n").encode("utf-8")
    if not manifest.owns("failures.csv"):
        contents = {k: v for k, v in contents.items() if v is not None or k != "failures.csv"}
    manifest.claim(name for name, data in contents.items() if data is not None)
    hashes = replace_files(out_dir, contents)
    manifest.survey_files = hashes
    manifest.prune()
    manifest.save()
    return SurveyFiles(summary=summary, anomalies=anomalies, failures=failures, report_path=out_dir / "report.html")


def _anomalies_csv(anomalies: Sequence[SurveyAnomaly], dialect: str) -> bytes:
    """anomalies.csv: rows in image order then id, rounded to what each value means."""
    delimiter, decimal = CSV_DIALECTS[dialect]
    return irio.csv_bytes(csv_rows(anomalies, dialect), ANOMALY_COLUMNS, delimiter=delimiter, decimal=decimal)


def _render_report(out_dir: Path, summary: dict[str, Any], ordered: Sequence[ImageOutcome],
                   photos: Mapping[str, bytes]) -> str:
    from ..report import render_report

    overlays: dict[str, bytes] = {}
    for outcome in ordered:
        if outcome.status == "ok":
            path = out_dir / outcome.stem / "overlay.png"
            try:
                overlays[outcome.image] = irio.read_small_bytes(path, max_bytes=1 << 30, what="overlay")
            except InputError as exc:
                raise OutputError(f"cannot read back the overlay: {exc}") from None
    differences: dict[str, bytes] = {}
    for row in summary.get("pairs") or ():  # the pair pictures (irseg.pairs)
        if row.get("difference"):
            try:
                differences[row["image"]] = irio.read_small_bytes(out_dir / row["difference"], max_bytes=1 << 30,
                                                                  what="difference picture")
            except InputError as exc:
                raise OutputError(f"cannot read back the difference picture: {exc}") from None
    return render_report(summary, overlays, photos=photos, differences=differences)


# --------------------------------------------------------------------------- review and photos


def _condition_notes(records: Sequence[Any]) -> list[tuple[str, str]]:
    """Survey-level warnings on air temperatures that contradict each other between images."""
    from ..errors import MetadataError
    from ..metadata import meta_from_dict, survey_condition_warnings

    metas = {}
    for record in records:
        try:
            metas[record.source or record.image] = meta_from_dict(record.metadata, source=record.image)
        except MetadataError:  # a record from an older version: its conditions are not compared
            continue
    return [("survey", text) for text in survey_condition_warnings(metas)]


def _log_lines(review: Mapping[str, Any], notes: Sequence[tuple[str, str]]) -> list[str]:
    """run.log lines of the review and of the survey files' warnings."""
    lines = []
    if review.get("file"):
        lines.append(f"{stamp()} review {escape_line(str(review['file']))}: {review['entries']} entries, "
                     f"{review['applied']} anomalies reviewed, {review['rejected']} rejected")
    lines += [f"{stamp()} warning: {escape_line(image)}: {escape_line(text)}" for image, text in notes]
    return lines


def _label_lookup(out_dir: Path, records: Sequence[ImageRecord]):
    """``label_at(image, row, col)`` reading each image's labels.png once (16-bit, pixel = anomaly id)."""
    import cv2
    import numpy as np

    stems = {r.image: r.stem for r in records}
    cache: dict[str, Any] = {}

    def label_at(image: str, row: int, col: int) -> int:
        if image not in cache:
            try:
                blob = irio.read_small_bytes(out_dir / stems[image] / "labels.png", max_bytes=1 << 30,
                                             what="label image")
                cache[image] = cv2.imdecode(np.frombuffer(blob, np.uint8), cv2.IMREAD_UNCHANGED)
            except InputError:
                cache[image] = None
        labels = cache[image]
        if labels is None or labels.ndim != 2:
            raise LookupError("the image's labels.png cannot be read; run again without the resume setting")
        if not (0 <= row < labels.shape[0] and 0 <= col < labels.shape[1]):
            raise LookupError(f"the pixel is outside the image of {labels.shape[0]} rows x {labels.shape[1]} "
                              "columns; give [row, col] inside it")
        return int(labels[row, col])

    return label_at


def _reviewed(out_dir: Path, records: Sequence[ImageRecord], review: Sequence[ReviewEntry],
              review_file: str | None) -> tuple[tuple[SurveyAnomaly, ...], dict[str, Any], list[tuple[str, str]]]:
    """The survey's anomalies with the review applied and ranked; the summary's review record; warnings."""
    from ..controls import apply_review

    flat = survey_records(records)
    info: dict[str, Any] = {"file": review_file, "entries": len(review), "applied": 0, "warnings": []}
    if not review:
        return rank_survey(flat), info, []
    result = apply_review(flat, review, label_at=_label_lookup(out_dir, records))
    info.update(applied=result.applied, warnings=list(result.warnings))
    return rank_survey(result.anomalies), info, [(entry.image, text) for entry, text in result.unmatched]


def _photos(photos: Mapping[str, tuple[Path, str]]) -> tuple[dict[str, bytes], dict[str, str], list[tuple[str, str]]]:
    """Scaled JPEG bytes and relative names of the photos that can be shown; a warning for each other."""
    from ..controls import photo_thumbnail

    thumbs: dict[str, bytes] = {}
    names: dict[str, str] = {}
    notes: list[tuple[str, str]] = []
    for image, (path, name) in photos.items():
        try:
            thumbs[image] = photo_thumbnail(path)
            names[image] = name
        except InputError as exc:
            text = str(exc).replace(str(path), name)
            notes.append((image, f"photo not shown: {text}"))
    return thumbs, names, notes
