"""Running survey tasks on dask.distributed (the ``scheduler`` setting: ``"local"`` or an address).

Memory trimming
---------------
dask's nanny starts workers with ``MALLOC_TRIM_THRESHOLD_=65536`` (config key
``distributed.nanny.pre-spawn-environ``) so that glibc returns freed memory to
the system early. For irseg's pattern (many medium NumPy temporaries per
image) it makes every allocation above 64 KiB go back and forth to the kernel;
numpy tasks were reported 5-6x slower under it (the figure comes from the issue that
asked for this path; it was not re-measured in this repository). So:

- a cluster irseg starts itself (``"local"``) is created with that variable
  removed from the pre-spawn environment (glibc's adaptive default applies);
- on a cluster irseg joins, every task first calls :func:`guard_malloc_trim`,
  which, on glibc only, raises the worker process's trim threshold
  back to 128 MiB with ``mallopt`` when the environment set it lower. Setting
  the variable away on the workers (``MALLOC_TRIM_THRESHOLD_`` unset in the
  worker's dask config) is still the better fix.

Workers of an external cluster must be able to import the same irseg version:
the run checks that first and fails with a clear message otherwise. They read
the input paths themselves, so inputs must be on a filesystem the workers see;
outputs are written by the client only.

Stopping
--------
A local cluster's worker processes are started with SIGINT blocked (a Ctrl-C at the
terminal reaches the whole process group; the client alone decides). On an interrupt or
an error the client cancels the pending images and kills its local workers at once
instead of waiting for the images they are computing; the images accepted so far are
already written. A cluster left without workers (all stopped or killed) is an error after
:data:`NO_WORKERS_TIMEOUT_S` seconds instead of an endless wait.
"""

from __future__ import annotations

import contextlib
import logging
import os
import signal
import time
from collections.abc import Callable, Iterator
from typing import Any

from ..errors import ConfigError, IrsegError
from ._pool import default_jobs, held_signals
from ._records import worker_died
from ._worker import guard_malloc_trim  # the per-task guard lives with the task (no import cycle)

__all__ = ["guard_malloc_trim", "local_cluster_config", "open_client", "run_on_dask", "NO_WORKERS_TIMEOUT_S"]

_TRIM_KEY = "distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_"
_CONNECT_TIMEOUT_S = 10.0
#: How long a run waits for a cluster that has no worker left before it stops with an error.
NO_WORKERS_TIMEOUT_S = 30.0
_POLL_S = 0.2  # how often the client looks for finished images (and, every second, for workers)
_CLOSE_TIMEOUT_S = 5.0


def local_cluster_config() -> dict[str, Any]:
    """dask config set while irseg starts its own LocalCluster (see module docstring)."""
    return {_TRIM_KEY: None, "distributed.worker.daemon": True}


def _worker_version() -> str:
    import irseg

    return irseg.__version__


@contextlib.contextmanager
def open_client(scheduler: str, *, jobs: int | None = None, tasks: list[dict[str, Any]] | None = None) -> Iterator[Any]:
    """A dask.distributed Client on a new LocalCluster (``"local"``) or on ``scheduler``'s address.

    With ``"local"`` and no ``jobs``, the worker count follows
    :func:`irseg.batch._pool.default_jobs` (cores, and no more than memory allows).

    Raises
    ------
    ConfigError
        dask.distributed missing, the scheduler unreachable, or workers that cannot import irseg.
    """
    try:
        import dask
        import distributed
    except ImportError as exc:
        raise ConfigError(
            "the scheduler setting needs dask.distributed; install it with pip install 'irseg[dask]'"
        ) from exc
    from .._version import __version__

    if scheduler == "local":
        n_workers = int(jobs) if jobs else default_jobs(tasks or [])
        with dask.config.set(local_cluster_config()):
            # the workers inherit a blocked SIGINT (SIGTERM stays theirs: the nannies stop them
            # with it); a Ctrl-C or SIGTERM meanwhile is acted on once the cluster exists
            with held_signals((signal.SIGINT, signal.SIGTERM), block=(signal.SIGINT,)):
                cluster = distributed.LocalCluster(
                    n_workers=n_workers,
                    threads_per_worker=1,
                    processes=True,
                    dashboard_address=None,
                    # the scheduler's HTTP endpoint on a free local port: two runs at once never
                    # collide on 8787 (a warning line), and nothing listens on other interfaces
                    scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"},
                    silence_logs=logging.CRITICAL,
                )
            stopping = False
            client = None
            try:
                client = distributed.Client(cluster)
                try:
                    yield client
                except BaseException:
                    stopping = True
                    _kill_local_workers(cluster)
                    raise
            finally:
                # closing is not interrupted half-way (a half-closed cluster makes dask's exit
                # hook wait 10 s): a Ctrl-C meanwhile is acted on once it is closed
                with held_signals((signal.SIGINT, signal.SIGTERM), block=()):
                    if client is not None:
                        with contextlib.suppress(Exception):
                            client.close()
                    with contextlib.suppress(Exception):
                        cluster.close(timeout=_CLOSE_TIMEOUT_S if stopping else None)
        return
    try:
        client = distributed.Client(scheduler, timeout=f"{_CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise ConfigError(
            f"scheduler {scheduler}: cannot reach a dask scheduler there ({exc}); "
            "check the address (tcp://host:8786) or set the scheduler setting to 'local'"
        ) from None
    try:
        if _worker_count(client) == 0:  # workers may still be starting: a bounded wait
            try:
                client.wait_for_workers(1, timeout=NO_WORKERS_TIMEOUT_S)
            except Exception:
                raise ConfigError(
                    f"scheduler {scheduler}: the cluster has no workers (none came within "
                    f"{NO_WORKERS_TIMEOUT_S:g} s); start some with dask worker, or set the scheduler setting "
                    "to 'local' or leave it unset"
                ) from None
        try:
            versions = client.run(_worker_version)
        except Exception as exc:
            raise ConfigError(
                f"scheduler {scheduler}: the workers cannot import irseg ({type(exc).__name__}: {exc}); "
                f"install irseg {__version__} in every worker's environment"
            ) from None
        wrong = {w: v for w, v in versions.items() if v != __version__}
        if wrong:
            raise ConfigError(
                f"scheduler {scheduler}: workers run irseg {sorted(set(wrong.values()))}, this client "
                f"{__version__}; install the same irseg version on every worker"
            )
        if not versions:
            raise ConfigError(f"scheduler {scheduler}: the cluster has no workers; start some with dask worker")
        yield client
    finally:
        with held_signals((signal.SIGINT, signal.SIGTERM), block=()), contextlib.suppress(Exception):
            client.close()


@contextlib.contextmanager
def _quiet_dask_logs() -> Iterator[None]:
    """Keep dask's own log lines (closed connections of stopped workers ...) off stderr.

    The run reports every image's outcome itself; dask's INFO/WARNING/ERROR lines with their
    tracebacks would only bury irseg's one-line messages. Levels are restored afterwards.
    """
    names = ["distributed"] + [n for n in logging.root.manager.loggerDict if n.startswith("distributed.")]
    saved = {name: logging.getLogger(name).level for name in names}
    for name in names:
        logging.getLogger(name).setLevel(logging.CRITICAL + 1)
    try:
        yield
    finally:
        for name, level in saved.items():
            logging.getLogger(name).setLevel(level)


def _kill_local_workers(cluster: Any) -> None:
    """SIGKILL the worker processes of a LocalCluster started here (they hold no files)."""
    for nanny in list(getattr(cluster, "workers", {}).values()):
        pid = getattr(nanny, "pid", None)
        if pid:
            with contextlib.suppress(OSError):
                os.kill(int(pid), signal.SIGKILL)


def _worker_count(client: Any) -> int | None:
    try:
        return len(client.nthreads())
    except Exception:  # the scheduler is busy or gone: not known this time
        return None


def run_on_dask(
    fn: Callable[[dict[str, Any]], Any],
    tasks: list[dict[str, Any]],
    *,
    scheduler: str,
    jobs: int | None,
    accept: Callable[[Any], None],
) -> None:
    """Run ``fn`` on every task on a dask cluster, calling ``accept`` in this process as each finishes.

    On any exception (including KeyboardInterrupt), pending tasks are cancelled and the
    cluster (when started here) is shut down, its workers killed, before re-raising.

    Raises
    ------
    IrsegError
        The cluster had no worker for :data:`NO_WORKERS_TIMEOUT_S` seconds while images were
        still to do.
    """
    from distributed import as_completed

    with _quiet_dask_logs(), open_client(scheduler, jobs=jobs, tasks=tasks) as client:
        futures = [
            client.submit(fn, task, key=f"irseg-image-{task['index']}-{task['fingerprint'][-16:]}", pure=False)
            for task in tasks
        ]
        by_key = {f.key: t for f, t in zip(futures, tasks)}
        try:
            waiting = as_completed(futures)
            last_seen = checked = time.monotonic()
            done = 0
            while done < len(futures):
                batch = waiting.next_batch(block=False) if waiting.has_ready() else []
                for future in batch:
                    try:
                        outcome = future.result()
                    except Exception:  # KilledWorker and the like: this image alone fails
                        outcome = worker_died(by_key[future.key])
                    done += 1
                    accept(outcome)
                if batch:
                    last_seen = time.monotonic()
                    continue
                now = time.monotonic()
                if now - checked >= 1.0:
                    checked = now
                    if _worker_count(client) != 0:
                        last_seen = now
                    elif now - last_seen >= NO_WORKERS_TIMEOUT_S:
                        raise IrsegError(
                            f"scheduler {scheduler}: the cluster has had no worker for "
                            f"{NO_WORKERS_TIMEOUT_S:g} s (stopped or killed) and {len(futures) - done} image(s) "
                            "are still to do; start workers for it, or set the scheduler setting to 'local' "
                            "or leave it unset. Completed images are kept; the resume setting continues"
                        )
                time.sleep(_POLL_S)
        except BaseException:
            with contextlib.suppress(Exception):
                client.cancel(futures)
            raise
