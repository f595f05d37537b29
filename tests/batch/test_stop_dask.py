"""A dask cluster whose workers are all gone: the run stops with an error, it does not wait forever.

Issue 15 item 18. A scheduler runs in this process and one worker in a subprocess (the
``dask worker`` program of dask.distributed, without a nanny, so nothing restarts it). The
image task writes a marker when it starts and then takes 120 s; the test kills the worker
process at that marker. The run must end with an :class:`~irseg.errors.IrsegError` that
names the scheduler setting, after the (shortened) no-worker wait; the 60 s join below is a
hang guard, not a timing check.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from irseg.batch import _dask
from irseg.errors import IrsegError

distributed = pytest.importorskip("distributed")  # the optional dask extra, not part of irseg

pytestmark = [pytest.mark.slow, pytest.mark.skipif(sys.platform == "win32", reason="POSIX signals")]

_WORKTREE = str(Path(__file__).resolve().parents[2])


def hold_image(task: dict) -> None:
    """A task that starts, says so in a marker file, then takes up to 120 s (never finishes here)."""
    Path(task["marker"]).write_text(str(os.getpid()), encoding="utf-8")
    deadline = time.monotonic() + 120.0
    while time.monotonic() < deadline:
        time.sleep(0.05)


def _wait_for(path: Path, proc: subprocess.Popen, timeout: float = 120.0) -> None:
    deadline = time.monotonic() + timeout
    while not path.exists():
        assert proc.poll() is None, "the dask worker process ended by itself"
        assert time.monotonic() < deadline, f"{path.name} never appeared"
        time.sleep(0.02)


def test_a_cluster_left_without_workers_is_an_error_naming_the_scheduler_setting(tmp_path, monkeypatch):
    monkeypatch.setattr(_dask, "NO_WORKERS_TIMEOUT_S", 1.0)
    marker = tmp_path / "started"
    tasks = [{"index": 0, "fingerprint": "sha256:" + "0" * 64, "image": "held.npy", "stem": "held",
              "marker": str(marker)}]
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([_WORKTREE, os.environ.get("PYTHONPATH", "")]).rstrip(os.pathsep))
    with distributed.LocalCluster(n_workers=0, dashboard_address=None, silence_logs=50,
                                  scheduler_kwargs={"dashboard": False, "dashboard_address": "127.0.0.1:0"}) as cluster:
        worker = subprocess.Popen(
            [sys.executable, "-m", "distributed.cli.dask_worker", cluster.scheduler_address, "--no-nanny",
             "--nthreads", "1", "--no-dashboard"],
            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env, start_new_session=True,
        )
        try:
            with distributed.Client(cluster) as client:
                client.wait_for_workers(1, timeout=120)  # a hang guard
            outcome: dict[str, BaseException | None] = {"error": None}

            def run() -> None:
                try:
                    _dask.run_on_dask(hold_image, tasks, scheduler=cluster.scheduler_address, jobs=None,
                                      accept=lambda result: None)
                except BaseException as exc:  # handed to the test thread
                    outcome["error"] = exc

            runner = threading.Thread(target=run, daemon=True)
            runner.start()
            _wait_for(marker, worker)
            os.killpg(worker.pid, signal.SIGKILL)  # every worker of the cluster is gone
            worker.wait(timeout=60)
            runner.join(timeout=60)
            assert not runner.is_alive(), "the run kept waiting for a cluster without workers"
        finally:
            if worker.poll() is None:
                os.killpg(worker.pid, signal.SIGKILL)
                worker.wait(timeout=60)
    error = outcome["error"]
    assert isinstance(error, IrsegError), error
    text = str(error)
    assert "no worker" in text and "the scheduler setting" in text and "1 image(s)" in text
    assert "--" not in text  # a library message names settings, not flags
