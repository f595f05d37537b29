"""The accept/write loop of a survey run (used by irseg.batch).

:func:`execute` runs the tasks in this process, a process pool or on dask and hands every
outcome, as it arrives, to :meth:`Collector.accept` here in the main process, which writes
the image's files (``result.json`` last), adds up the stage times, logs the image, reports
progress and stops the run at the first failure when asked to.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from typing import Any

from .. import io as irio
from ._records import ImageOutcome
from ._worker import run_task, run_task_single_threaded

__all__ = ["Collector", "FailFast", "execute", "stamp"]


def stamp() -> str:
    """UTC time for run.log lines."""
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


class FailFast(Exception):
    """Raised by :meth:`Collector.accept` to stop the run at a failed image (the fail_fast setting)."""

    def __init__(self, outcome: ImageOutcome) -> None:
        super().__init__(outcome.image)
        self.outcome = outcome


def write_image(out_dir: Path, outcome: ImageOutcome) -> None:
    """Write one image's outputs, result.json last (the completion marker); a failure removes stale ones."""
    folder = irio.resolve_inside(out_dir, outcome.stem)
    marker = folder / "result.json"
    if outcome.status != "ok":
        for name in ("result.json", "labels.png", "overlay.png"):
            irio.remove_file(folder / name, hint="a stale output of an earlier run")
        return
    irio.remove_file(marker, hint="check the out_dir setting")
    assert outcome.record is not None and outcome.labels_png is not None and outcome.overlay_png is not None
    irio.write_bytes(folder / "labels.png", outcome.labels_png)
    irio.write_bytes(folder / "overlay.png", outcome.overlay_png)
    irio.write_json(marker, outcome.record.to_json())


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
    ) -> None:
        self.out_dir = out_dir
        self.total = total
        self.log = log
        self.on_progress = on_progress
        self.fail_fast = fail_fast
        self.outcomes: dict[int, ImageOutcome] = {}
        self.stage_totals: dict[str, float] = {}
        self.done = 0

    def keep(self, outcome: ImageOutcome) -> None:
        """Count an image kept from an earlier run (nothing written, nothing logged)."""
        self._finish(outcome)

    def accept(self, outcome: ImageOutcome) -> None:
        """Write, time, log and report one computed outcome.

        Raises
        ------
        FailFast
            With the fail_fast setting, for a failed image (after its stale outputs are removed).
        OutputError
            When the image's files cannot be written.
        """
        t0 = time.perf_counter()
        write_image(self.out_dir, outcome)
        timings = dict(outcome.timings)
        timings["write"] = time.perf_counter() - t0
        for stage, seconds in timings.items():
            self.stage_totals[stage] = self.stage_totals.get(stage, 0.0) + seconds
        failure = outcome.failure
        line = f"{outcome.image}: ok" if failure is None else f"{outcome.image}: failed at {failure.stage}: {failure.message}"
        self.log.append(f"{stamp()} {line}")
        self._finish(replace(outcome, overlay_png=None, labels_png=None, timings=timings))
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
