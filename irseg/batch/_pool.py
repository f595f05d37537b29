"""Process-pool execution of survey tasks (used by irseg.batch).

The parent alone decides how to stop. The forkserver and the workers are started with
SIGINT blocked, so a Ctrl-C at the terminal (which reaches the whole process group) never
interrupts a worker half-way through its start and never prints a worker traceback (SIGTERM
keeps its default action there: a worker it reaches ends without a word). A Ctrl-C or
SIGTERM that arrives in the parent while the pool starts is held for that moment and then
acted on. On Ctrl-C, SIGTERM (turned into ``KeyboardInterrupt`` by the command line) or any
error, the parent kills the workers (SIGKILL) at once instead of waiting for the images they
are computing: every image accepted so far is already written (the caller writes each one
as it arrives), the running ones are lost and are computed again on resume. Orphaned
workers (the parent killed with SIGKILL) end within a second by themselves.

A worker that dies (out of memory, a crash in a native library) breaks the pool; its
images are retried one at a time in a fresh pool, and an image that kills a worker again is
reported as failed at stage ``worker``.

How many workers by default
---------------------------
:func:`default_jobs` picks ``min(cores, memory available / peak of one worker)``: one
worker's peak is estimated as :data:`WORKER_BASE_BYTES` plus :data:`PEAK_BYTES_PER_PIXEL`
times the pixels of the largest image (from the file headers), and the memory available is
``MemAvailable`` of ``/proc/meminfo`` (else ``os.sysconf("SC_AVPHYS_PAGES")`` pages), lowered
to what a cgroup memory limit leaves, of which :data:`MEMORY_SHARE` is used.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import signal
import struct
import threading
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from ._records import worker_died

__all__ = ["run_in_pool", "default_jobs", "available_memory_bytes", "image_pixels",
           "PEAK_BYTES_PER_PIXEL", "WORKER_BASE_BYTES", "MEMORY_SHARE"]

_PRELOAD = ["irseg.pipeline", "irseg.io", "irseg.metadata", "irseg.radiometry", "irseg.segmentation",
            "irseg.analysis", "irseg.render", "irseg.batch"]

#: Peak memory of one image in a worker, bytes per pixel of the image, above the worker's
#: own start-up memory: measured with ``benchmarks/bench_memory.py`` (maximum RSS of a
#: 4000 x 3000 and a 8000 x 6000 run minus an import-and-read baseline: 38.9 and 38.2 B/px,
#: issue 15), plus the stored image, which that baseline holds (up to 8 B/px, float64 NPY),
#: rounded up. The segmentation's solve and the analysis' joining of detections set it today
#: (about 39 and 40-42 B/px of traced allocations, the read image's 4 included).
PEAK_BYTES_PER_PIXEL = 50
#: Memory of a worker before its first image (interpreter, NumPy, SciPy, OpenCV), bytes.
WORKER_BASE_BYTES = 160 * 2**20
#: Share of the available memory the default worker count may plan to use.
MEMORY_SHARE = 0.8
#: Signals held in this process while the pool starts (acted on right after).
_HELD_SIGNALS = (signal.SIGINT, signal.SIGTERM)
_KILL_WAIT_S = 5.0  # after SIGKILL, how long to wait for each worker to be reaped


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

    signal.signal(signal.SIGINT, signal.SIG_IGN)  # also when a worker is started without the mask
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


@contextlib.contextmanager
def held_signals(signals: Sequence[int] = _HELD_SIGNALS, *, block: Sequence[int] | None = None) -> Iterator[None]:
    """Hold ``signals`` while processes are started, then act on any that came meanwhile.

    The signals of ``block`` (default: ``signals``) are blocked in this thread, so processes
    started here inherit the block (a Ctrl-C at the terminal, which reaches the whole process
    group, then never interrupts their start-up). Native threads of this process (BLAS pools)
    may still take a signal for the process, so this process's handlers of ``signals`` are
    also swapped for one that only records it: a process being started (or a cluster being
    closed) is never abandoned half-way. When the hold ends, the handlers in force before are
    restored and called for each signal that came (for Ctrl-C: ``KeyboardInterrupt``).
    Outside the main thread nothing is changed.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    # multiprocessing's resource tracker, when it starts, *unblocks* SIGINT and SIGTERM in the
    # thread that starts it (Python 3.11): start it now, before the block
    with contextlib.suppress(Exception):
        from multiprocessing import resource_tracker

        resource_tracker.ensure_running()
    came: list[int] = []

    def record(signum: int, frame: Any) -> None:
        if signum not in came:
            came.append(signum)

    previous = {}
    for signum in signals:
        with contextlib.suppress(ValueError, OSError):
            previous[signum] = signal.signal(signum, record)
    blocked = tuple(signals if block is None else block)
    mask = signal.pthread_sigmask(signal.SIG_BLOCK, blocked) if blocked and hasattr(signal, "pthread_sigmask") else None
    try:
        yield
    finally:
        if mask is not None:
            signal.pthread_sigmask(signal.SIG_SETMASK, mask)  # a pending signal is recorded here
        for signum, handler in previous.items():
            signal.signal(signum, handler)
        for signum in came:
            handler = previous.get(signum)
            if callable(handler):
                handler(signum, None)  # e.g. KeyboardInterrupt
            elif handler == signal.SIG_DFL:
                signal.raise_signal(signum)


def _kill_workers(executor: ProcessPoolExecutor) -> None:
    """Stop the pool now: SIGKILL every worker (they hold no files), then release the pool.

    An image in native code could not be interrupted gently anyway; the images the workers
    were computing are simply not accepted.
    """
    processes = list((getattr(executor, "_processes", None) or {}).values())  # None once shut down
    for process in processes:
        with contextlib.suppress(Exception):
            process.kill()
    for process in processes:
        with contextlib.suppress(Exception):
            process.join(_KILL_WAIT_S)
    # A worker killed while sending its result leaves half a message in the result pipe, and
    # the pool's reader thread would wait for the rest for ever (then so would shutdown and the
    # interpreter's exit). The workers are gone, so this process holds the pipe's last write
    # end: closing it ends that read (end of file), and the pool shuts down as broken.
    writer = getattr(getattr(executor, "_result_queue", None), "_writer", None)
    if writer is not None:
        with contextlib.suppress(Exception):
            writer.close()
    executor.shutdown(wait=True, cancel_futures=True)


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
        with held_signals(block=(signal.SIGINT,)):  # the forkserver and the workers start with SIGINT blocked
            for task in tasks:
                futures[executor.submit(fn, task)] = task
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
        executor.shutdown(wait=True)
    except BaseException:
        _kill_workers(executor)
        raise
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

    Raises
    ------
    KeyboardInterrupt
        On Ctrl-C (or SIGTERM turned into it), after the workers are killed; the outcomes
        accepted before are kept by the caller, the running images are dropped.
    """
    broken = _run_batch(fn, tasks, n_workers, accept)
    for task in broken:  # retry alone: only the image that kills its worker fails
        again = _run_batch(fn, [task], 1, lambda outcome: accept(outcome))
        if again:
            accept(worker_died(task))


# --------------------------------------------------------------------------- default worker count


def available_memory_bytes() -> int | None:
    """Memory this process can still use, bytes (None when it cannot be told).

    ``MemAvailable`` from ``/proc/meminfo`` (Linux), else free physical pages from
    ``os.sysconf``; lowered to ``memory.max - memory.current`` of the process's cgroup (v2)
    when a limit is set there.
    """
    total: int | None = None
    try:
        with open("/proc/meminfo", encoding="ascii") as handle:
            for line in handle:
                if line.startswith("MemAvailable:"):
                    total = int(line.split()[1]) * 1024
                    break
    except (OSError, ValueError, IndexError):
        total = None
    if total is None:
        try:
            total = int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
        except (AttributeError, ValueError, OSError):
            total = None
    limit = _cgroup_headroom()
    if limit is not None:
        total = limit if total is None else min(total, limit)
    return total


def _cgroup_headroom() -> int | None:
    try:
        with open("/proc/self/cgroup", encoding="ascii") as handle:
            lines = handle.read().splitlines()
        path = next(line.split(":", 2)[2] for line in lines if line.startswith("0::"))
        base = os.path.join("/sys/fs/cgroup", path.lstrip("/"))
        with open(os.path.join(base, "memory.max"), encoding="ascii") as handle:
            limit = handle.read().strip()
        if limit == "max":
            return None
        with open(os.path.join(base, "memory.current"), encoding="ascii") as handle:
            used = int(handle.read().strip())
        return max(0, int(limit) - used)
    except (OSError, ValueError, StopIteration, IndexError):
        return None


def image_pixels(path: str | os.PathLike[str]) -> int | None:
    """Pixels of an image from its file header, for planning only (None when not known).

    Reads a few bytes: the PNG IHDR, the NPY header, the first TIFF page's tags. A CSV/TXT
    matrix is bounded by half its size in bytes (every value needs a digit and a separator).
    Never raises: a file that cannot be read this way gives None.
    """
    name = os.fspath(path)
    try:
        with open(name, "rb") as handle:
            head = handle.read(32)
        if head.startswith(b"\x89PNG\r\n\x1a\n") and head[12:16] == b"IHDR":
            width, height = struct.unpack(">II", head[16:24])
            return int(width) * int(height)
        if head.startswith(b"\x93NUMPY"):
            import numpy as np

            shape = np.load(name, mmap_mode="r", allow_pickle=False).shape
            return int(np.prod(shape, dtype=np.int64)) if shape else 1
        if head[:4] in (b"II*\x00", b"MM\x00*", b"II+\x00", b"MM\x00+"):
            import tifffile

            with tifffile.TiffFile(name) as tif:
                shape = tif.pages[0].shape
            pixels = 1
            for side in shape:
                pixels *= int(side)
            return pixels
        if name.lower().endswith((".csv", ".txt")):
            return max(1, os.path.getsize(name) // 2)
    except Exception:  # a planning estimate: the reader reports bad files properly
        return None
    return None


def default_jobs(
    tasks: Sequence[dict[str, Any]],
    *,
    cpus: int | None = None,
    available: int | None = None,
    max_pixels: int | None = None,
) -> int:
    """Worker count when the jobs setting is not given: cores, and no more than memory allows.

    Parameters
    ----------
    tasks : sequence of dict
        The tasks (their ``"path"`` and ``settings.max_pixels`` are read).
    cpus : int, optional
        Usable cores (default: the process's CPU affinity).
    available : int, optional
        Memory available, bytes (default: :func:`available_memory_bytes`).
    max_pixels : int, optional
        Upper bound of an image whose header cannot be read (default: the tasks' pixel budget).

    Returns
    -------
    int
        ``max(1, min(cpus, len(tasks), floor(MEMORY_SHARE * available / per_worker)))`` with
        ``per_worker = WORKER_BASE_BYTES + PEAK_BYTES_PER_PIXEL * largest image``.
    """
    if cpus is None:
        try:
            cpus = len(os.sched_getaffinity(0))
        except (AttributeError, OSError):  # pragma: no cover - non-Linux
            cpus = os.cpu_count() or 1
    count = max(1, min(int(cpus), len(tasks) or 1))
    if available is None:
        available = available_memory_bytes()
    if available is None or count == 1:
        return count
    largest = 0
    for task in tasks:
        pixels = image_pixels(task["path"])
        if pixels is None:
            budget = max_pixels if max_pixels is not None else getattr(task.get("settings"), "max_pixels", None)
            pixels = int(budget) if budget else 0
        largest = max(largest, pixels)
    per_worker = WORKER_BASE_BYTES + PEAK_BYTES_PER_PIXEL * largest
    return max(1, min(count, int(MEMORY_SHARE * available // per_worker)))
