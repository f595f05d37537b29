"""Process-pool execution of survey tasks (used by irseg.batch).

Workers ignore SIGINT so that the parent alone decides how to stop: on Ctrl-C
or SIGTERM the parent cancels everything not started, lets the (at most one per
worker) running images finish, and re-raises. A worker that dies (out of
memory, a crash in a native library) breaks the pool; its images are retried
one at a time in a fresh pool, and an image that kills a worker again is
reported as failed at stage ``worker``.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import threading
from collections.abc import Callable
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from ._records import worker_died

__all__ = ["run_in_pool"]

_PRELOAD = ["irseg.pipeline", "irseg.io", "irseg.metadata", "irseg.radiometry", "irseg.segmentation",
            "irseg.analysis", "irseg.render", "irseg.batch"]


def _watch_parent(parent_pid: int) -> None:
    """Exit this worker soon after the parent is gone (e.g. killed with kill -9)."""
    import time

    while True:
        time.sleep(1.0)
        try:
            os.kill(parent_pid, 0)
        except ProcessLookupError:
            os._exit(1)
        except PermissionError:  # pragma: no cover - pid reused by another user's process
            os._exit(1)


def _init_worker(parent_pid: int) -> None:
    from threadpoolctl import threadpool_limits

    from ._worker import import_stages

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    import_stages()
    threadpool_limits(limits=1)  # for the worker's lifetime: same bits whatever the worker count
    threading.Thread(target=_watch_parent, args=(parent_pid,), name="irseg-parent-watch", daemon=True).start()
    try:
        import cv2

        cv2.setNumThreads(1)
    except Exception:  # pragma: no cover - cv2 missing is reported by the render stage
        pass


def _context() -> multiprocessing.context.BaseContext:
    methods = multiprocessing.get_all_start_methods()
    if "forkserver" in methods:
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(_PRELOAD)
        return ctx
    return multiprocessing.get_context("spawn")


def _run_batch(
    fn: Callable[[dict[str, Any]], Any],
    tasks: list[dict[str, Any]],
    n_workers: int,
    accept: Callable[[Any], None],
) -> list[dict[str, Any]]:
    """Run tasks in one pool; return the tasks whose worker died."""
    broken: list[dict[str, Any]] = []
    executor = ProcessPoolExecutor(max_workers=n_workers, mp_context=_context(),
                                   initializer=_init_worker, initargs=(os.getpid(),))
    futures: dict[Future[Any], dict[str, Any]] = {}
    try:
        futures = {executor.submit(fn, task): task for task in tasks}
        pending = set(futures)
        while pending:
            finished, pending = wait(pending, return_when=FIRST_COMPLETED)
            for future in sorted(finished, key=lambda f: futures[f]["index"]):
                try:
                    outcome = future.result()
                except BrokenProcessPool:
                    broken.append(futures[future])
                    continue
                accept(outcome)
    except BaseException:
        for future in futures:
            future.cancel()
        executor.shutdown(wait=True, cancel_futures=True)
        raise
    executor.shutdown(wait=True)
    return sorted(broken, key=lambda t: t["index"])


def run_in_pool(
    fn: Callable[[dict[str, Any]], Any],
    tasks: list[dict[str, Any]],
    *,
    n_workers: int,
    accept: Callable[[Any], None],
) -> None:
    """Run ``fn`` on every task in ``n_workers`` processes, calling ``accept`` here as each finishes.

    Parameters
    ----------
    fn : callable
        Importable module-level function (pickled by reference).
    tasks : list of dict
        Small picklable task descriptions (paths, not arrays).
    n_workers : int
    accept : callable
        Receives each outcome in the parent process; exceptions it raises stop the run.
    """
    broken = _run_batch(fn, tasks, n_workers, accept)
    for task in broken:  # retry alone: only the image that kills its worker fails
        again = _run_batch(fn, [task], 1, lambda outcome: accept(outcome))
        if again:
            accept(worker_died(task))
