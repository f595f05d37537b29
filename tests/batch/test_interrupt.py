"""Interrupted runs (SIGINT, SIGTERM, kill -9) and ``--resume``: same bytes as one clean run."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from tests.support.survey import data_files, make_survey

from irseg import io as outputs
from irseg.batch import run_survey

pytestmark = pytest.mark.slow

HELD_AFTER = 3  # images completed on disk when the run is held and then interrupted

# Runs the CLI with one change: after writing the labels.png of image HELD_AFTER + 1 (its
# overlay.png and result.json not yet written), the main process writes a gate file and waits
# there. The test interrupts the run at that point, so the disk state at the interrupt is known
# exactly: HELD_AFTER complete images and one half-written folder. The wait ends by itself after
# 300 s so that a failed test leaves no process behind.
_HELD_RUN = """
import os, sys, time
from pathlib import Path
from irseg import io as outputs  # the batch writes through irseg.io.write_bytes

gate, held_after = Path(sys.argv[1]), int(sys.argv[2])
_write_bytes = outputs.write_bytes
_labels_written = 0

def write_bytes(path, data):
    global _labels_written
    written = _write_bytes(path, data)
    if Path(path).name == "labels.png":
        _labels_written += 1
        if _labels_written == held_after + 1:
            gate.write_text("held", encoding="utf-8")
            deadline = time.monotonic() + 300.0
            while time.monotonic() < deadline:
                time.sleep(0.05)
            os._exit(99)
    return written

outputs.write_bytes = write_bytes
from irseg.cli.main import cli
cli(args=sys.argv[3:], prog_name="irseg")
"""


@pytest.fixture(scope="module")
def survey(tmp_path_factory):
    folder = tmp_path_factory.mktemp("interrupt") / "survey"
    make_survey(folder, 8)
    clean = folder.parent / "clean_out"
    run_survey([folder], clean, jobs=1)
    return folder, data_files(clean)


def _start(folder: Path, out: Path, *extra: str, gate: Path | None = None, pipes: bool = True) -> subprocess.Popen:
    env = dict(os.environ, OMP_NUM_THREADS="1")
    # after kill -9, orphaned workers may hold inherited pipes for a moment: use no pipes there
    stream = subprocess.PIPE if pipes else subprocess.DEVNULL
    args = ["segment", str(folder), "-o", str(out), *extra]
    if gate is None:
        cmd = [sys.executable, "-m", "irseg.cli.main", *args]
    else:
        cmd = [sys.executable, "-c", _HELD_RUN, str(gate), str(HELD_AFTER), *args]
    return subprocess.Popen(cmd, stdout=stream, stderr=stream, text=True, env=env)


def _wait_until_held(proc: subprocess.Popen, gate: Path, timeout: float = 240.0) -> None:
    """Wait for the held run to reach its gate (a hang guard, not a timing check)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if gate.exists():
            return
        if proc.poll() is not None:
            pytest.fail(f"run ended before reaching the gate: {proc.communicate()}")
        time.sleep(0.01)
    proc.kill()
    pytest.fail("the run did not reach the gate")


def _same(out: Path, reference: dict[str, bytes]) -> None:
    files = data_files(out)
    assert files.keys() == reference.keys()
    for name, blob in reference.items():
        assert files[name].decode() == blob.decode(), name


def _check_consistent(out: Path) -> tuple[int, int]:
    """Every folder with a result.json marker is complete; no temp file anywhere.

    Returns (complete folders, folders with outputs but no marker), read from the disk.
    """
    assert [p for p in out.rglob("*") if p.name.startswith(outputs.TEMP_PREFIX)] == []
    complete = partial = 0
    for folder in (p for p in out.iterdir() if p.is_dir()):
        if (folder / "result.json").exists():
            assert (folder / "labels.png").is_file() and (folder / "overlay.png").is_file()
            complete += 1
        elif any(folder.iterdir()):
            partial += 1
    return complete, partial


@pytest.mark.parametrize("sig, jobs", [(signal.SIGINT, "2"), (signal.SIGTERM, "1")])
def test_interrupt_then_resume_matches_clean_run(survey, tmp_path, sig, jobs):
    folder, reference = survey
    out = tmp_path / "out"
    gate = tmp_path / "held"
    proc = _start(folder, out, "-j", jobs, gate=gate)
    try:
        _wait_until_held(proc, gate)
        proc.send_signal(sig)
        stdout, stderr = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
    assert proc.returncode == 130, stderr
    assert "--resume" in stderr and "Traceback" not in stderr
    assert not (out / "summary.json").exists()  # nothing half-done at survey level
    done, partial = _check_consistent(out)
    # held after the labels.png of the next image: exactly HELD_AFTER images are complete, and the
    # next one has outputs but no marker (it must be redone on resume)
    assert (done, partial) == (HELD_AFTER, 1)

    resumed = _start(folder, out, "-j", jobs, "--resume")
    stdout, stderr = resumed.communicate(timeout=120)
    assert resumed.returncode == 0, stderr
    assert f"8 of 8 images ok ({done} resumed)" in stdout, stdout
    _same(out, reference)


def test_kill_9_then_resume_matches_clean_run(survey, tmp_path):
    folder, reference = survey
    out = tmp_path / "out"
    gate = tmp_path / "held"
    proc = _start(folder, out, "-j", "2", gate=gate, pipes=False)
    try:
        _wait_until_held(proc, gate)
    finally:
        proc.kill()  # SIGKILL: no handler runs
        proc.wait(timeout=60)
    assert proc.returncode == -signal.SIGKILL
    assert not (out / "summary.json").exists()
    time.sleep(0.5)  # orphaned pool workers only compute; they never write
    done, partial = _check_consistent(out)
    assert (done, partial) == (HELD_AFTER, 1)

    resumed = _start(folder, out, "-j", "2", "--resume")
    stdout, stderr = resumed.communicate(timeout=120)
    assert resumed.returncode == 0, stderr
    assert f"8 of 8 images ok ({done} resumed)" in stdout, stdout
    assert _check_consistent(out) == (8, 0)
    _same(out, reference)
