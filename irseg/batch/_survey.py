"""A whole survey: many thermograms, in parallel, with resume and per-image failures.

:func:`run_survey` collects the images, runs :func:`irseg.pipeline.process_image`
on each (in this process, in a process pool, or on a dask.distributed cluster),
writes the per-image outputs as results arrive, then rebuilds the survey-level
files from the per-image ``result.json`` files::

    OUT/<stem>/labels.png    16-bit, pixel = anomaly id
    OUT/<stem>/overlay.png   annotated thermogram
    OUT/<stem>/result.json   written last: the image's completion marker
    OUT/anomalies.csv  OUT/summary.json  OUT/report.html  OUT/failures.csv  OUT/run.log
    OUT/.irseg-outputs       the manifest: every file irseg wrote here
    OUT/.irseg-lock          locked while a run writes here

Workers only compute (read the input, return small records and PNG bytes); all
writing happens in the calling process, atomically (:mod:`irseg.io`). A bad input fails that
image alone. An interrupt keeps every completed image; ``resume=True`` then
skips images whose ``result.json`` fingerprint matches the input file, its
metadata files, the settings and the irseg version.

The output folder is never an input folder and never holds an input; one run at a time
writes there (a lock); irseg replaces or removes only the files its manifest lists; the
survey-level files are replaced as one set. Files a folder scan leaves out are listed
with the reason in run.log, summary.json (``skipped``) and the report.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..io import OutputManifest, escape_line, lock_folder
from .._shared import DEFAULT_MAX_PIXELS
from .._version import __version__
from ..errors import IrsegError
from ..controls import REVIEW_FILE, ReviewEntry, find_photo, load_review, photo_candidates
from ..report import SurveyAnomaly, csv_rows
from ._inputs import SkippedFile, SurveyInputs, relativise, scan_inputs
from ._loop import Collector, FailFast, execute, image_files, stamp
from ._records import ImageFailure, ImageOutcome, SurveySettings
from ._resume import plan_survey
from ._settings import check_out_dir, survey_settings
from ._survey_files import check_survey_names, write_survey_files

__all__ = ["SurveyResult", "run_survey"]


@dataclass(frozen=True)
class SurveyResult:
    """The outcome of :func:`run_survey`.

    Attributes
    ----------
    out_dir : Path
    outcomes : tuple of ImageOutcome
        In input order (PNG bytes dropped).
    failures : tuple of ImageFailure
    summary : dict
        The content of ``summary.json``.
    anomalies : tuple of SurveyAnomaly
        Every anomaly of the survey, by image order then id, ``severity`` = survey rank
        (``pandas.DataFrame(irseg.batch.anomaly_table(result.anomalies))`` is anomalies.csv).
    report_path : Path
    n_ok, n_failed, n_skipped, n_anomalies : int
    excess_w, excess_kwh_year : float or None
        Survey totals (estimates), None when no anomaly has the quantity.
    timings : dict of str to float
        Seconds per stage summed over the images computed in this run, plus ``wall``.
    skipped : tuple of SkippedFile
        Files and folders the input scan left out, with the reason (also in run.log,
        summary.json and the report).
    """

    out_dir: Path
    outcomes: tuple[ImageOutcome, ...]
    failures: tuple[ImageFailure, ...]
    summary: dict[str, Any]
    anomalies: tuple[SurveyAnomaly, ...]
    report_path: Path
    n_ok: int
    n_failed: int
    n_skipped: int
    n_anomalies: int
    excess_w: float | None
    excess_kwh_year: float | None
    timings: dict[str, float]
    skipped: tuple[SkippedFile, ...] = ()


def run_survey(
    inputs: Iterable[str | os.PathLike[str]],
    out_dir: str | os.PathLike[str],
    *,
    jobs: int | None = None,
    resume: bool = False,
    scheduler: str | None = None,
    overrides: Mapping[str, Mapping[str, Any]] | None = None,
    fail_fast: bool = False,
    on_progress: Callable[[int, int, ImageOutcome], None] | None = None,
    format: str | None = None,
    max_pixels: int = DEFAULT_MAX_PIXELS,
    cmap: str = "inferno",
    review: str | os.PathLike[str] | None = None,
    csv_dialect: str = "rfc4180",
    show_jumps: bool = False,
    range_c: str | tuple[float, float] = "auto",
) -> SurveyResult:
    """Process a survey: every image in ``inputs`` into ``out_dir``.

    Parameters
    ----------
    inputs : iterable of path-like
        Image files and/or folders. Folders are searched recursively for the files
        :func:`irseg.io.is_candidate` accepts (the output folder and folders holding
        irseg outputs are skipped); named files are all processed except metadata files
        (see :func:`irseg.batch.scan_inputs`).
    out_dir : path-like
        Output folder (created). It must not be, contain or hold an input. Only files irseg
        names are written there, and only files irseg wrote (its manifest lists them) are
        ever replaced or removed.
    jobs : int, optional
        Worker processes (default: all cores; 1 runs in this process). With a
        ``scheduler``, the number of workers of a ``"local"`` cluster.
    resume : bool
        Skip images whose outputs are complete and whose fingerprint matches.
    scheduler : str, optional
        ``"local"`` (start a dask LocalCluster) or the address of a running
        dask.distributed scheduler whose workers can import irseg.
    overrides : mapping, optional
        ``{"section": {"key": value}}`` applied after the metadata files.
    fail_fast : bool
        Stop at the first failed image and raise its error.
    on_progress : callable, optional
        Called as ``on_progress(done, total, outcome)`` after each image.
    format : str, optional
        Force a reader for every input.
    max_pixels : int
        Pixel budget per image, checked before decoding.
    cmap : str
        Colour map of the overlays.
    review : path-like, optional
        The thermographer's review file (``[[review]]`` tables, :func:`irseg.controls.load_review`);
        default: ``review.toml`` in the survey's root folder, when there is one. It is applied to
        the survey files only: it is not part of any image's fingerprint, so a resumed run applies
        it without computing an image again. An entry that matches nothing is a warning.
    csv_dialect : {"rfc4180", "excel-eu"}
        anomalies.csv with ``,`` and decimal points (RFC 4180, default), or ``;`` and decimal
        commas for spreadsheets set to such a locale. Not part of any fingerprint.
    show_jumps : bool
        Draw the segmentation's jump set (temperature edges) on the overlays.
    range_c : "auto", "survey" or (lo_c, hi_c)
        Colour range of the overlays: each image's own 1st-99th percentile (``"auto"``), one range
        for the whole survey (``"survey"``: the union of the images' own ranges, so every overlay
        is drawn again once all are known; a resumed run redraws only overlays drawn with another
        range), or a fixed range in °C.

    Returns
    -------
    SurveyResult

    Raises
    ------
    InputError
        An input path does not exist, or no image was found.
    ConfigError
        Invalid overrides, reader name, job count or scheduler; an output folder that is,
        contains or holds an input.
    OutputError
        The output folder or a file in it cannot be written, another irseg run is writing
        there, or a survey-level name (``run.log``...) holds a file irseg did not write.
    IrsegError
        With ``fail_fast``, the first image's error.
    KeyboardInterrupt
        After a clean stop (pending work cancelled, completed images kept).
    """
    started = time.perf_counter()
    out_path = Path(out_dir)
    settings = survey_settings(jobs=jobs, overrides=overrides, format=format, max_pixels=max_pixels, cmap=cmap,
                               show_jumps=show_jumps, range_c=range_c)
    csv_rows([], csv_dialect)  # an unknown dialect fails before any image is read
    found = scan_inputs(inputs, exclude=out_path)
    entries, review_file = _review_of(review, found.root)  # a bad review file fails before any image
    check_out_dir(out_path)
    check_survey_names(out_path, OutputManifest(out_path))  # before the lock file is made; again under it
    with lock_folder(out_path):
        return _run_locked(
            found, out_path, settings, started,
            jobs=jobs, resume=resume, scheduler=scheduler, fail_fast=fail_fast, on_progress=on_progress,
            review=entries, review_file=review_file, csv_dialect=csv_dialect,
        )


def _run_locked(
    found: SurveyInputs,
    out_path: Path,
    settings: SurveySettings,
    started: float,
    *,
    jobs: int | None,
    resume: bool,
    scheduler: str | None,
    fail_fast: bool,
    on_progress: Callable[[int, int, ImageOutcome], None] | None,
    review: tuple[ReviewEntry, ...] = (),
    review_file: str | None = None,
    csv_dialect: str = "rfc4180",
) -> SurveyResult:
    """The run, with the output folder locked: plan, compute, write, rebuild the survey files."""
    items = found.images
    manifest = OutputManifest(out_path)
    check_survey_names(out_path, manifest)
    manifest.remove_temp_files()
    log = [f"{stamp()} irseg {__version__}: {len(items)} images into {escape_line(str(out_path))}"]
    log += [f"{stamp()} skipped {escape_line(s.file)}: {escape_line(s.reason)}" for s in found.skipped]
    plan = plan_survey(items, found.root, settings, out_path, resume=resume, manifest=manifest)
    manifest.claim(rel for task in plan.tasks for rel in image_files(task["stem"], pair=bool(task.get("pair"))))
    collector = Collector(
        out_path, total=len(items), log=log, on_progress=on_progress, fail_fast=fail_fast, manifest=manifest
    )
    for outcome in plan.resumed:
        collector.keep(outcome)
    try:
        for outcome in sorted([*plan.blocked, *plan.unreadable], key=lambda o: o.index):
            collector.accept(outcome)
        execute(plan.tasks, jobs=jobs, scheduler=scheduler, accept=collector.accept)
    except FailFast as stop:
        failure = stop.outcome.failure
        assert failure is not None
        raise IrsegError(
            f"{failure.image}: {failure.stage}: {failure.message} (stopped by the fail_fast setting; "
            "completed images are kept, the resume setting continues)"
        ) from None
    finally:
        manifest.remove_temp_files()

    if settings.range_c == "survey":
        _redraw_with_survey_range(found, out_path, settings, collector, manifest, jobs=jobs, scheduler=scheduler)
    ordered = tuple(collector.outcomes[i] for i in sorted(collector.outcomes))
    n_ok = sum(o.status == "ok" for o in ordered)
    n_failed = sum(o.failure is not None for o in ordered)
    n_skipped = sum(o.skipped for o in ordered)
    log.append(
        f"{stamp()} done: {n_ok} ok, {n_failed} failed, {n_skipped} resumed, {len(found.skipped)} files skipped"
    )
    files = write_survey_files(out_path, ordered, skipped=found.skipped, log=log, manifest=manifest,
                               review=review, review_file=review_file, photos=_photos_of(found, ordered),
                               csv_dialect=csv_dialect)
    timings = dict(collector.stage_totals, wall=time.perf_counter() - started)
    totals = files.summary["totals"]
    return SurveyResult(
        out_dir=out_path,
        outcomes=ordered,
        failures=files.failures,
        summary=files.summary,
        anomalies=files.anomalies,
        report_path=files.report_path,
        n_ok=n_ok,
        n_failed=len(files.failures),
        n_skipped=n_skipped,
        n_anomalies=int(totals["count"]),
        excess_w=totals["excess_w"],
        excess_kwh_year=totals["excess_kwh_year"],
        timings=timings,
        skipped=found.skipped,
    )


def survey_range_c(records: Iterable[Any]) -> tuple[float, float] | None:
    """The survey's common colour range: the union of the images' own ranges (None without any)."""
    ranges = [r.analysis.get("display_range_c") for r in records]
    ranges = [r for r in ranges if isinstance(r, list) and len(r) == 2]
    if not ranges:
        return None
    return (min(float(r[0]) for r in ranges), max(float(r[1]) for r in ranges))


def _redraw_with_survey_range(found: SurveyInputs, out_path: Path, settings: SurveySettings, collector: Collector,
                              manifest: OutputManifest, *, jobs: int | None, scheduler: str | None) -> None:
    """Second pass of ``range_c = "survey"``: redraw every overlay not drawn with the survey's range.

    The range needs every image's own range, so it is known only after the first pass; a resumed
    run redraws only the images whose recorded ``overlay_range_c`` differs (an image added since).
    """
    ok = {i: o.record for i, o in collector.outcomes.items() if o.status == "ok" and o.record is not None}
    common = survey_range_c(ok.values())
    if common is None:
        return
    stale = {i for i, r in ok.items() if r.analysis.get("overlay_range_c") != [common[0], common[1]]}
    if not stale:
        return
    items = [item for item in found.images if item.index in stale]
    plan = plan_survey(items, found.root, settings, out_path, resume=False, manifest=manifest, survey=found.images)
    for task in plan.tasks:
        task["range_c"] = common
    collector.total += len(plan.tasks)
    execute(plan.tasks, jobs=jobs, scheduler=scheduler, accept=collector.accept)


def _review_of(review: str | os.PathLike[str] | None, root: str) -> tuple[tuple[ReviewEntry, ...], str | None]:
    """The review entries and the review file's name: the file given, else ``review.toml`` at the root."""
    if review is not None:
        return load_review(review), Path(review).name
    path = Path(root) / REVIEW_FILE if root else None
    if path is None or not os.path.lexists(path):
        return (), None
    return load_review(path), REVIEW_FILE


def _photos_of(found: SurveyInputs, ordered: tuple[ImageOutcome, ...]) -> dict[str, tuple[Path, str]]:
    """Image name -> (photo path, its name relative to the survey root) for each analysed image with a photo.

    The photo is ``[image] photo`` (kept even when missing, so the report's warnings say so), else
    ``<stem>_photo.jpg`` / ``.jpeg`` / ``.png`` beside the image.
    """
    by_index = {o.index: o for o in ordered}
    out: dict[str, tuple[Path, str]] = {}
    for item in found.images:
        outcome = by_index.get(item.index)
        if outcome is None or outcome.status != "ok" or outcome.record is None:
            continue
        details = outcome.record.metadata.get("image")
        key = details.get("photo") if isinstance(details, dict) else None
        key = key if isinstance(key, str) and key else None
        path = find_photo(item.path, key) or (photo_candidates(item.path, key)[0] if key else None)
        if path is not None:
            base = item.base or found.root
            name = relativise(os.path.normpath(os.path.abspath(path)), base)
            out[item.image] = (path, Path(path).name if os.path.isabs(name) else name.replace(os.sep, "/"))
    return out
