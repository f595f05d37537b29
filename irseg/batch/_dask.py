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
"""

from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import logging
import os
from collections.abc import Callable, Iterator
from typing import Any

from ..errors import ConfigError
from ._records import worker_died

__all__ = ["guard_malloc_trim", "local_cluster_config", "open_client", "run_on_dask"]

_TRIM_KEY = "distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_"
_GUARD_THRESHOLD = 128 * 1024 * 1024
_CONNECT_TIMEOUT_S = 10.0
_M_TRIM_THRESHOLD = -1  # glibc <malloc.h>


def guard_malloc_trim() -> bool:
    """Undo a tiny ``MALLOC_TRIM_THRESHOLD_`` in this worker process (glibc only; cheap, idempotent).

    Returns
    -------
    bool
        True when the threshold was raised by this call.
    """
    value = os.environ.get("MALLOC_TRIM_THRESHOLD_")
    if value is None:
        return False
    try:
        if int(value) >= _GUARD_THRESHOLD:
            return False
    except ValueError:
        return False
    name = ctypes.util.find_library("c")
    if not name:
        return False
    try:
        libc = ctypes.CDLL(name)
        mallopt = libc.mallopt
    except (OSError, AttributeError):
        return False
    return bool(mallopt(_M_TRIM_THRESHOLD, _GUARD_THRESHOLD))


def local_cluster_config() -> dict[str, Any]:
    """dask config set while irseg starts its own LocalCluster (see module docstring)."""
    return {_TRIM_KEY: None, "distributed.worker.daemon": True}


def _worker_version() -> str:
    import irseg

    return irseg.__version__


@contextlib.contextmanager
def open_client(scheduler: str, *, jobs: int | None = None) -> Iterator[Any]:
    """A dask.distributed Client on a new LocalCluster (``"local"``) or on ``scheduler``'s address.

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
        n_workers = int(jobs) if jobs else max(1, len(os.sched_getaffinity(0)))
        with dask.config.set(local_cluster_config()):
            cluster = distributed.LocalCluster(
                n_workers=n_workers,
                threads_per_worker=1,
                processes=True,
                dashboard_address=None,
                silence_logs=logging.ERROR,
            )
            try:
                with distributed.Client(cluster) as client:
                    yield client
            finally:
                cluster.close()
        return
    try:
        client = distributed.Client(scheduler, timeout=f"{_CONNECT_TIMEOUT_S}s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise ConfigError(
            f"scheduler {scheduler}: cannot reach a dask scheduler there ({exc}); "
            "check the address (tcp://host:8786) or set the scheduler setting to 'local'"
        ) from None
    try:
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
        client.close()


def run_on_dask(
    fn: Callable[[dict[str, Any]], Any],
    tasks: list[dict[str, Any]],
    *,
    scheduler: str,
    jobs: int | None,
    accept: Callable[[Any], None],
) -> None:
    """Run ``fn`` on every task on a dask cluster, calling ``accept`` in this process as each finishes.

    On any exception (including KeyboardInterrupt), pending tasks are cancelled
    and the cluster (when started here) is shut down before re-raising.
    """
    from distributed import as_completed

    with open_client(scheduler, jobs=jobs) as client:
        futures = [
            client.submit(fn, task, key=f"irseg-image-{task['index']}-{task['fingerprint'][-16:]}", pure=False)
            for task in tasks
        ]
        by_key = {f.key: t for f, t in zip(futures, tasks)}
        try:
            for future in as_completed(futures):
                try:
                    outcome = future.result()
                except Exception:  # KilledWorker and the like: this image alone fails
                    outcome = worker_died(by_key[future.key])
                accept(outcome)
        except BaseException:
            client.cancel(futures)
            raise
