"""The benchmark scripts stay runnable: each parses its options and prints its help.

Benchmarks are scripts, not tests (no timing is asserted anywhere); this only catches a script
that no longer imports after a change of the package (``--help`` exits 0 and names the script's
purpose from its docstring).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

BENCHMARKS = sorted((Path(__file__).resolve().parents[1] / "benchmarks").glob("*.py"))


def test_there_are_benchmark_scripts():
    names = {p.name for p in BENCHMARKS}
    assert {"bench_segment.py", "bench_pipeline.py", "bench_analysis.py", "fuzz_readers.py",
            "validate_scenes.py"} <= names


@pytest.mark.parametrize("script", BENCHMARKS, ids=[p.name for p in BENCHMARKS])
def test_benchmark_script_prints_its_help(script):
    proc = subprocess.run([sys.executable, str(script), "--help"], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert "usage:" in proc.stdout


@pytest.mark.slow
def test_the_pair_benchmark_runs_one_small_round():
    # a run, not only --help: a field removed from ThermalFrame broke this script while its help still printed
    script = next(p for p in BENCHMARKS if p.name == "bench_pairs.py")
    proc = subprocess.run([sys.executable, str(script), "--pairs", "1", "--repeats", "1"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "IoU" in proc.stdout or "iou" in proc.stdout.lower()
