"""Stopping the process pool: at once, whatever the workers are doing (issue 15 item 18).

The workers are killed instead of awaited. A worker killed while it sends its result leaves
half a message in the result pipe; the pool's reader thread must not wait for the rest for
ever. The message framing of ``multiprocessing.connection`` (a 4-byte big-endian signed
length, then the payload; CPython, Lib/multiprocessing/connection.py) is used to leave such
a half message [CP]. Waits are hang guards, not timing checks.
"""

from __future__ import annotations

import os
import struct
import sys
import threading
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import pytest

from irseg.batch import _pool

pytestmark = [pytest.mark.slow, pytest.mark.skipif(sys.platform == "win32", reason="POSIX processes")]


def hold_task(marker: str) -> None:
    """Say it started, then take up to 120 s (it is killed long before)."""
    Path(marker).write_text(str(os.getpid()), encoding="utf-8")
    deadline = time.monotonic() + 120.0
    while time.monotonic() < deadline:
        time.sleep(0.05)


def _wait_for(path: Path, timeout: float = 120.0) -> None:
    deadline = time.monotonic() + timeout
    while not path.exists():
        assert time.monotonic() < deadline, f"{path.name} never appeared"
        time.sleep(0.02)


def test_killing_the_pool_ends_even_with_half_a_result_in_the_pipe(tmp_path):
    marker = tmp_path / "started"
    executor = ProcessPoolExecutor(max_workers=1, mp_context=_pool._context(), initializer=_pool._init_worker,
                                   initargs=(os.getpid(),))
    writer = executor._result_queue._writer
    executor.submit(hold_task, str(marker))
    _wait_for(marker)
    # a result of 1000 bytes announced, 10 sent: the pool's reader thread now waits for 990 more
    os.write(writer.fileno(), struct.pack("!i", 1000) + b"x" * 10)
    stopper = threading.Thread(target=_pool._kill_workers, args=(executor,), daemon=True)
    stopper.start()
    stopper.join(60)
    if stopper.is_alive():  # release the reader so that this test process can still exit
        os.write(writer.fileno(), b"x" * 990)
        pytest.fail("stopping the pool waited for a result its killed worker will never finish")
    worker = int(marker.read_text(encoding="utf-8"))
    with pytest.raises(ProcessLookupError):
        os.kill(worker, 0)  # reaped: killed, not awaited


def test_held_signals_acts_on_a_signal_after_the_hold(tmp_path):
    # a SIGINT during the hold is not lost: KeyboardInterrupt once the processes exist
    import signal

    if threading.current_thread() is not threading.main_thread():
        pytest.skip("signal handlers need the main thread")
    with pytest.raises(KeyboardInterrupt):
        with _pool.held_signals():
            os.kill(os.getpid(), signal.SIGINT)
            reached = True  # the hold lets the code inside finish first
    assert reached
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler
