"""A whole survey: many thermograms, in parallel, with resume and per-image failures.

:func:`run_survey` collects the images, runs :func:`irseg.pipeline.process_image`
on each (in this process, in a process pool, or on a dask.distributed cluster),
writes the per-image outputs as results arrive, then rebuilds the survey-level
files from the per-image ``result.json`` files::

    OUT/<stem>/labels.png    16-bit, pixel = anomaly id
    OUT/<stem>/overlay.png   annotated thermogram
    OUT/<stem>/result.json   written last: the image's completion marker
    OUT/anomalies.csv  OUT/summary.json  OUT/report.html  OUT/failures.csv  OUT/run.log

Workers only compute (read the input, return small records and PNG bytes); all
writing happens here, atomically (:mod:`irseg.io`). A bad input fails that
image alone. An interrupt keeps every completed image; ``resume=True`` then
skips images whose ``result.json`` fingerprint matches the input file, its
metadata files, the settings and the irseg version.
"""

from __future__ import annotations

import hashlib
import json
import os
import time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from .. import io as irio
from ._inputs import (
    InputImage,
    collect_inputs,
    metadata_candidates,
)
from ._summary import ANOMALY_COLUMNS, FAILURE_COLUMNS, build_summary
from ._records import ImageFailure, ImageOutcome, SurveySettings
from ._worker import run_task, run_task_single_threaded
from .._version import __version__
from ..errors import ConfigError, InputError, IrsegError, OutputError
from .._shared import DEFAULT_MAX_PIXELS

__all__ = ["SurveyResult", "fingerprint_input", "run_survey"]


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
    report_path : Path
    n_ok, n_failed, n_skipped, n_anomalies : int
    excess_w, excess_kwh_year : float or None
        Survey totals (estimates), None when no anomaly has the quantity.
    timings : dict of str to float
        Seconds per stage summed over the images computed in this run, plus ``wall``.
    """

    out_dir: Path
    outcomes: tuple[ImageOutcome, ...]
    failures: tuple[ImageFailure, ...]
    summary: dict[str, Any]
    report_path: Path
    n_ok: int
    n_failed: int
    n_skipped: int
    n_anomalies: int
    excess_w: float | None
    excess_kwh_year: float | None
    timings: dict[str, float]


# --------------------------------------------------------------------------- fingerprint


def fingerprint_input(path: str | os.PathLike[str], settings: SurveySettings) -> str:
    """sha256 of an input's bytes, its metadata files, the settings and irseg's version.

    Parameters
    ----------
    path : path-like
        The image file.
    settings : SurveySettings

    Returns
    -------
    str
        ``"sha256:<hex>"``.

    Raises
    ------
    InputError
        If the file cannot be read.
    """
    digest = hashlib.sha256()
    digest.update(b"irseg-fingerprint-1\0" + __version__.encode() + b"\0")
    settings_json = json.dumps(irio.normalise_json(settings.to_dict()), sort_keys=True)
    digest.update(settings_json.encode() + b"\0")
    try:
        with open(path, "rb") as handle:
            for chunk in iter(lambda: handle.read(1 << 20), b""):
                digest.update(chunk)
    except OSError as exc:
        raise InputError(f"{Path(path).name}: cannot read the file ({exc.strerror or exc}); check it exists") from exc
    for meta_path in metadata_candidates(path):
        digest.update(b"\0meta\0" + meta_path.name.encode())
        try:
            digest.update(b"\0" + irio.read_small_bytes(meta_path, what="metadata file"))
        except InputError:
            digest.update(b"\0absent")
    return "sha256:" + digest.hexdigest()


# --------------------------------------------------------------------------- main side


def _write_image(out_dir: Path, outcome: ImageOutcome) -> None:
    """Write one image's outputs; result.json last (the completion marker)."""
    folder = irio.resolve_inside(out_dir, outcome.stem)
    marker = folder / "result.json"
    if outcome.status != "ok":
        for name in ("result.json", "labels.png", "overlay.png"):
            irio.remove_file(folder / name, hint="a stale output of an earlier run")
        return
    irio.remove_file(marker, hint="check the out_dir setting")
    assert outcome.labels_png is not None and outcome.overlay_png is not None
    irio.write_bytes(folder / "labels.png", outcome.labels_png)
    irio.write_bytes(folder / "overlay.png", outcome.overlay_png)
    irio.write_json(marker, outcome.record)


def _load_complete(out_dir: Path, item: InputImage, fingerprint: str) -> dict[str, Any] | None:
    """The stored record of an image when its outputs are complete and match, else None."""
    folder = out_dir / item.stem
    record = irio.read_json_file(folder / "result.json")
    if not isinstance(record, dict):
        return None
    if (
        record.get("fingerprint") != fingerprint
        or record.get("status") != "ok"
        or record.get("stem") != item.stem
        or record.get("image") != item.image
        or record.get("irseg_version") != __version__
    ):
        return None
    if not (folder / "labels.png").is_file() or not (folder / "overlay.png").is_file():
        return None
    return irio.normalise_json(record)


def _check_out_dir(out_dir: Path) -> None:
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"{out_dir}: cannot create the output folder ({exc.strerror}); choose another folder (the out_dir setting)") from exc
    if not out_dir.is_dir():
        raise OutputError(f"{out_dir}: exists and is not a folder; choose another output folder (the out_dir setting)")
    if not os.access(out_dir, os.W_OK | os.X_OK):
        raise OutputError(f"{out_dir}: the output folder is not writable; choose a writable folder (the out_dir setting)")


def _validate_settings(settings: SurveySettings) -> None:
    """Fail early on overrides or a reader name that would fail every image."""
    if settings.overrides:  # checked once, so a bad one fails the run instead of every image
        from ..metadata import check_overrides

        check_overrides(settings.overrides)
    if settings.format is not None:
        from ..io import list_readers

        readers = list_readers()
        if settings.format not in readers:
            raise ConfigError(f"reader {settings.format!r} is not a reader; use one of {', '.join(readers)} (the reader setting)")
    from ..render import colormap_lut

    colormap_lut(settings.cmap)
    if int(settings.max_pixels) < 1:
        raise ConfigError(f"max_pixels = {settings.max_pixels} must be at least 1 (the max_pixels setting)")


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
) -> SurveyResult:
    """Process a survey: every image in ``inputs`` into ``out_dir``.

    Parameters
    ----------
    inputs : iterable of path-like
        Image files and/or folders (searched recursively; hidden files and the
        output folder are skipped; ``.toml`` files are never images).
    out_dir : path-like
        Output folder (created). Only files irseg names are written there.
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

    Returns
    -------
    SurveyResult

    Raises
    ------
    InputError
        An input path does not exist, or no image was found.
    ConfigError
        Invalid overrides, reader name, job count or scheduler.
    OutputError
        The output folder or a file in it cannot be written.
    IrsegError
        With ``fail_fast``, the first image's error.
    KeyboardInterrupt
        After a clean stop (pending work cancelled, completed images kept).
    """
    started = time.perf_counter()
    out_path = Path(out_dir)
    if jobs is not None and int(jobs) < 1:
        raise ConfigError(f"jobs = {jobs} must be at least 1 (the jobs setting)")
    settings = SurveySettings(
        overrides={str(s): dict(v) for s, v in (overrides or {}).items()},
        format=format,
        max_pixels=int(max_pixels),
        cmap=cmap,
    )
    _validate_settings(settings)
    items, root = collect_inputs(inputs, exclude=out_path)
    _check_out_dir(out_path)
    irio.remove_temp_files(out_path)
    log: list[str] = [f"{_stamp()} irseg {__version__}: {len(items)} images into {out_path}"]

    outcomes: dict[int, ImageOutcome] = {}
    early: list[ImageOutcome] = []
    tasks: list[dict[str, Any]] = []
    total = len(items)
    done = 0
    for item in items:
        try:
            fingerprint = fingerprint_input(item.path, settings)
        except InputError as exc:  # unreadable file: that image alone fails
            failure = ImageFailure(file=item.image, stage="read", message=str(exc))
            early.append(ImageOutcome(item.index, item.image, item.stem, "failed", failure=failure))
            continue
        record = _load_complete(out_path, item, fingerprint) if resume else None
        if record is not None:
            outcomes[item.index] = ImageOutcome(item.index, item.image, item.stem, "ok", record=record, skipped=True)
            done += 1
            if on_progress is not None:
                on_progress(done, total, outcomes[item.index])
            continue
        tasks.append({
            "index": item.index, "path": item.path, "image": item.image, "rel": item.rel,
            "stem": item.stem, "root": root, "fingerprint": fingerprint, "settings": settings,
        })

    stage_totals: dict[str, float] = {}

    def _accept(outcome: ImageOutcome) -> None:
        nonlocal done
        t0 = time.perf_counter()
        _write_image(out_path, outcome)
        timings = dict(outcome.timings)
        timings["write"] = time.perf_counter() - t0
        for stage, seconds in timings.items():
            stage_totals[stage] = stage_totals.get(stage, 0.0) + seconds
        outcomes[outcome.index] = replace(outcome, overlay_png=None, labels_png=None, timings=timings)
        done += 1
        line = f"{outcome.image}: ok" if outcome.status == "ok" else (
            f"{outcome.image}: failed at {outcome.failure.stage}: {outcome.failure.message}"  # type: ignore[union-attr]
        )
        log.append(f"{_stamp()} {line}")
        if on_progress is not None:
            on_progress(done, total, outcomes[outcome.index])
        if fail_fast and outcome.status != "ok":
            raise _FailFast(outcome)

    try:
        for outcome in early:
            _accept(outcome)
        _execute(tasks, jobs=jobs, scheduler=scheduler, accept=_accept)
    except _FailFast as stop:
        failure = stop.outcome.failure
        assert failure is not None
        raise IrsegError(
            f"{failure.file}: {failure.stage}: {failure.message} (stopped by the fail_fast setting; "
            "completed images are kept, the resume setting continues)"
        ) from None
    finally:
        irio.remove_temp_files(out_path)

    ordered = tuple(outcomes[i] for i in sorted(outcomes))
    summary, rows = build_summary(ordered)
    failures = tuple(o.failure for o in ordered if o.failure is not None)
    irio.write_csv(out_path / "anomalies.csv", rows, ANOMALY_COLUMNS)
    failures_path = out_path / "failures.csv"
    if failures:
        irio.write_csv(
            failures_path,
            [{"file": f.file, "stage": f.stage, "message": f.message} for f in failures],
            FAILURE_COLUMNS,
        )
    else:
        irio.remove_file(failures_path, hint="a stale file of an earlier run")
    report_path = out_path / "report.html"
    irio.write_text(report_path, _render_report(out_path, summary, ordered))
    irio.write_json(out_path / "summary.json", summary)
    stage_totals["wall"] = time.perf_counter() - started
    n_ok = sum(o.status == "ok" for o in ordered)
    totals = summary["totals"]
    log.append(f"{_stamp()} done: {n_ok} ok, {len(failures)} failed, {sum(o.skipped for o in ordered)} resumed")
    irio.write_text(out_path / "run.log", "\n".join(log) + "\n")
    return SurveyResult(
        out_dir=out_path,
        outcomes=ordered,
        failures=failures,
        summary=summary,
        report_path=report_path,
        n_ok=n_ok,
        n_failed=len(failures),
        n_skipped=sum(o.skipped for o in ordered),
        n_anomalies=int(totals["count"]),
        excess_w=totals["excess_w"],
        excess_kwh_year=totals["excess_kwh_year"],
        timings=stage_totals,
    )


class _FailFast(Exception):
    def __init__(self, outcome: ImageOutcome) -> None:
        super().__init__(outcome.image)
        self.outcome = outcome


def _stamp() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


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


def _execute(
    tasks: list[dict[str, Any]],
    *,
    jobs: int | None,
    scheduler: str | None,
    accept: Callable[[ImageOutcome], None],
) -> None:
    """Run the tasks in this process, a process pool or on dask; ``accept`` each outcome here."""
    if not tasks:
        return
    if scheduler:
        from ._dask import run_on_dask

        run_on_dask(run_task_single_threaded, tasks, scheduler=scheduler, jobs=jobs, accept=accept)
        return
    n_workers = min(int(jobs) if jobs else _cpu_count(), len(tasks))
    if n_workers <= 1:
        from threadpoolctl import threadpool_limits

        from ._worker import import_stages

        import cv2

        import_stages()
        cv2_threads = cv2.getNumThreads()
        cv2.setNumThreads(1)  # same bits as the pool workers (restored below)
        try:
            with threadpool_limits(limits=1):
                for task in tasks:
                    accept(run_task(task))
        finally:
            cv2.setNumThreads(cv2_threads)
        return
    from ._pool import run_in_pool

    run_in_pool(run_task, tasks, n_workers=n_workers, accept=accept)


def _cpu_count() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - non-Linux
        return max(1, os.cpu_count() or 1)
