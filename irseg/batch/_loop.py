"""The accept/write loop of a survey run (used by irseg.batch).

:func:`execute` runs the tasks in this process, a process pool or on dask and hands every
outcome, as it arrives, to :meth:`Collector.accept` here in the main process, which writes
the image's files (``result.json`` last), adds up the stage times, logs the image, reports
progress and stops the run at the first failure when asked to.
"""

from __future__ import annotations

import errno
import os
import time
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import Any

from ..io import OutputManifest, escape_line, escape_text
from .. import io as irio
from ..errors import OutputError
from ._records import ImageFailure, ImageOutcome
from ._worker import run_task, run_task_single_threaded

__all__ = [
    "Collector", "FailFast", "execute", "stamp", "write_image", "image_files", "image_folder_problem", "IMAGE_FILES",
    "PAIR_FILES",
]


def stamp() -> str:
    """UTC time for run.log lines."""
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


class FailFast(Exception):
    """Raised by :meth:`Collector.accept` to stop the run at a failed image (the fail_fast setting)."""

    def __init__(self, outcome: ImageOutcome) -> None:
        super().__init__(outcome.image)
        self.outcome = outcome


#: An image's files in its folder under OUT, result.json last (the completion marker).
IMAGE_FILES = ("labels.png", "overlay.png", "result.json")
#: A pressurised image's pair pictures (irseg.pairs), written before its result.json.
PAIR_FILES = ("pair_labels.png", "difference.png")

#: errno values of a write that fails for one image folder only (the run goes on).
_IMAGE_ONLY_ERRORS = (errno.EACCES, errno.EPERM, errno.ENOTDIR, errno.EISDIR, errno.ELOOP, errno.ENAMETOOLONG)


def image_files(stem: str, *, pair: bool = False) -> list[str]:
    """An image's output files relative to OUT (POSIX), as listed in the manifest; ``pair``: with
    the pair pictures (:data:`PAIR_FILES`)."""
    names = (*IMAGE_FILES[:-1], *PAIR_FILES, IMAGE_FILES[-1]) if pair else IMAGE_FILES
    return [f"{stem}/{name}" for name in names]


def image_folder_problem(out_dir: Path, stem: str, manifest: OutputManifest) -> str | None:
    """Why an image's outputs cannot go to ``OUT/<stem>``, or None when they can.

    The folder must be a real folder (or absent), never a link or a file, and none of
    the image's files may exist unless irseg wrote it (the manifest lists it).
    """
    folder = out_dir / stem
    if os.path.islink(folder):
        return (
            f"{stem}: this image's output folder {stem} is a link in the output folder; irseg writes only "
            "into folders it makes, never through links; remove the link or choose another output folder "
            "(the out_dir setting)"
        )
    if os.path.lexists(folder) and not os.path.isdir(folder):
        return (
            f"{stem}: a file named {stem} is in the output folder where this image's output folder goes; "
            "move it away or choose another output folder (the out_dir setting)"
        )
    for rel in image_files(stem, pair=True):
        if manifest.in_the_way(rel):
            return (
                f"{rel}: irseg did not write this file and never replaces one it did not write; move it "
                "away or choose another output folder (the out_dir setting)"
            )
    return None


def _failed_at_write(outcome: ImageOutcome, message: str) -> ImageOutcome:
    failure = ImageFailure(image=outcome.image, stage="write", message=message)
    return replace(outcome, status="failed", record=None, failure=failure, overlay_png=None, labels_png=None,
                   difference_png=None, pair_labels_png=None)


def _image_only(exc: OutputError) -> OSError | None:
    """The OS error behind ``exc`` when it concerns this image's folder alone (not a full disk)."""
    cause = exc.__cause__
    if isinstance(cause, OSError) and cause.errno in _IMAGE_ONLY_ERRORS:
        return cause
    return None


def write_image(out_dir: Path, outcome: ImageOutcome, manifest: OutputManifest | None = None) -> ImageOutcome:
    """Write one image's outputs, result.json last (the completion marker); a failure removes stale ones.

    Only files irseg wrote are replaced or removed (the ``manifest``; a new one is read from
    ``out_dir`` when not given). An output folder that cannot be used (a link, a file, a
    file irseg did not write in the way, no write permission) fails this image alone, at
    ``write``.

    Returns
    -------
    ImageOutcome
        ``outcome``, or a failed one (stage ``write``) when its files could not be written.

    Raises
    ------
    OutputError
        A write failure that is not this folder's alone (a full disk, a read-only file system).
    """
    manifest = manifest if manifest is not None else OutputManifest(out_dir)
    stem = outcome.stem
    problem = image_folder_problem(out_dir, stem, manifest)
    if problem is not None:
        return outcome if outcome.status != "ok" else _failed_at_write(outcome, problem)
    folder = irio.resolve_inside(out_dir, stem)
    try:
        if outcome.status != "ok":
            for rel in image_files(stem, pair=True):
                manifest.remove(rel, hint="a stale output of an earlier run")
            return outcome
        assert outcome.record is not None and outcome.labels_png is not None and outcome.overlay_png is not None
        pair = outcome.record.registration is not None
        assert not pair or (outcome.difference_png is not None and outcome.pair_labels_png is not None)
        manifest.claim(image_files(stem, pair=pair))
        manifest.remove(f"{stem}/result.json", hint="check the out_dir setting")
        irio.write_bytes(folder / "labels.png", outcome.labels_png)
        irio.write_bytes(folder / "overlay.png", outcome.overlay_png)
        if pair:  # the pair pictures (irseg.pairs)
            irio.write_bytes(folder / "pair_labels.png", outcome.pair_labels_png)
            irio.write_bytes(folder / "difference.png", outcome.difference_png)
        else:
            for name in PAIR_FILES:
                manifest.remove(f"{stem}/{name}", hint="a stale output of an earlier run")
        irio.write_json(folder / "result.json", outcome.record.to_json())
    except OutputError as exc:
        cause = _image_only(exc)
        if cause is None:
            raise
        if outcome.status != "ok":
            return outcome  # its stale outputs stay; the image failed anyway
        return _failed_at_write(
            outcome,
            f"{stem}: cannot write this image's outputs in its folder {stem} ({cause.strerror}); "
            "make the folder writable, or remove it, and run again with the resume setting",
        )
    return outcome


class Collector:
    """Receives the outcomes of a run in the main process.

    Attributes
    ----------
    outcomes : dict of int to ImageOutcome
        By input index, PNG bytes dropped.
    stage_totals : dict of str to float
        Seconds per stage summed over the images computed in this run (``write`` included).
    log : list of str
        run.log lines.
    """

    def __init__(
        self,
        out_dir: Path,
        *,
        total: int,
        log: list[str],
        on_progress: Callable[[int, int, ImageOutcome], None] | None,
        fail_fast: bool,
        manifest: OutputManifest | None = None,
    ) -> None:
        self.out_dir = out_dir
        self.total = total
        self.log = log
        self.on_progress = on_progress
        self.fail_fast = fail_fast
        self.manifest = manifest if manifest is not None else OutputManifest(out_dir)
        self.outcomes: dict[int, ImageOutcome] = {}
        self.stage_totals: dict[str, float] = {}
        self.done = 0

    def keep(self, outcome: ImageOutcome) -> None:
        """Count an image kept from an earlier run (nothing written, nothing logged)."""
        self._finish(outcome)

    def accept(self, outcome: ImageOutcome) -> None:
        """Write, time, log and report one computed outcome.

        A failure's message is made UTF-8-safe (:func:`irseg.io.escape_text`); run.log lines
        have control characters escaped (:func:`irseg.io.escape_line`), so a file name can
        neither break a line nor forge one.

        Raises
        ------
        FailFast
            With the fail_fast setting, for a failed image (after its stale outputs are removed).
        OutputError
            When the image's files cannot be written for a reason beyond its own folder.
        """
        t0 = time.perf_counter()
        outcome = write_image(self.out_dir, outcome, self.manifest)
        timings = dict(outcome.timings)
        timings["write"] = time.perf_counter() - t0
        for stage, seconds in timings.items():
            self.stage_totals[stage] = self.stage_totals.get(stage, 0.0) + seconds
        failure = outcome.failure
        if failure is not None:
            failure = replace(failure, message=escape_text(failure.message))
        name = escape_line(outcome.image)
        if failure is None:
            line = f"{name}: ok"
        else:
            line = f"{name}: failed at {failure.stage}: {escape_line(failure.message)}"
        self.log.append(f"{stamp()} {line}")
        self._finish(replace(outcome, overlay_png=None, labels_png=None, difference_png=None, pair_labels_png=None,
                             timings=timings, failure=failure))
        if self.fail_fast and outcome.status != "ok":
            raise FailFast(outcome)

    def _finish(self, outcome: ImageOutcome) -> None:
        self.outcomes[outcome.index] = outcome
        self.done += 1
        if self.on_progress is not None:
            self.on_progress(self.done, self.total, outcome)


def execute(
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
    if jobs:
        n_workers = min(int(jobs), len(tasks))
    else:  # cores, and no more workers than the machine's memory holds (batch/_pool.default_jobs)
        from ._pool import default_jobs

        n_workers = min(default_jobs(tasks), len(tasks))
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
