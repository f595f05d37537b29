"""End-to-end survey throughput on 640x480 frames: -j 1, -j 2 and a dask LocalCluster.

Usage::

    OMP_NUM_THREADS=1 python benchmarks/bench_pipeline.py [--frames 12] [--repeats 3] [--workers 2]

Writes a folder of synthetic 640x480 float32 thermograms (a 20 °C interior wall
with noise, a cold rectangle, a warm strip and a cold corner; invented data),
runs :func:`irseg.batch.run_survey` on it with each execution path and prints,
per path, the median wall time over the repeats, frames/s and the ratio to the
single-process path; then the median per-frame time of each stage (read,
metadata, calibrate, segment, analyse, render, write) of the single-process runs.

Targets on 2 cores (issue 5): whole pipeline <= 0.30 s per frame single-process,
>= 5 frames/s with 2 workers. Start-up of the pool / cluster is included in the
wall time, as a user sees it; it weighs less with more frames.
"""

from __future__ import annotations

import argparse
import math
import shutil
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np

from irseg.batch import run_survey

SURVEY_TOML = """\
[camera]
distance_m = 4.0
hfov_deg = 45.0

[surface]
emissivity = 0.93
reflected_c = 19.0

[air]
inside_c = 20.0
outside_c = -2.0
"""

STAGES = ("read", "metadata", "calibrate", "segment", "analyse", "render", "write")


def make_frames(folder: Path, n: int, *, seed: int = 20261201) -> None:
    """Write ``n`` 640x480 frames and survey.toml into ``folder``."""
    rng = np.random.default_rng(seed)
    rows, cols = 480, 640
    yy, xx = np.mgrid[0:rows, 0:cols]
    (folder / "survey.toml").write_text(SURVEY_TOML, encoding="utf-8")
    for k in range(n):
        wall = 18.5 + 0.6 * (yy / rows) + rng.normal(0.0, 0.06, (rows, cols))
        r0, c0 = int(rng.integers(60, 260)), int(rng.integers(60, 400))
        wall[r0:r0 + 120, c0:c0 + 160] -= 2.5 + 0.2 * k  # missing insulation
        wall[:, 300:312] -= 1.2  # stud / thermal bridge
        wall[(yy + xx) < 90] -= 1.8  # cold corner
        np.save(folder / f"frame_{k:03d}.npy", wall.astype(np.float32))


def _time_run(inputs: Path, out: Path, **kwargs) -> tuple[float, float, object]:
    """Wall time, steady-state frames/s (first to last completed image) and the result."""
    if out.exists():
        shutil.rmtree(out)
    stamps: list[float] = []
    start = time.perf_counter()
    result = run_survey([inputs], out, on_progress=lambda done, total, outcome: stamps.append(time.perf_counter()),
                        **kwargs)
    wall = time.perf_counter() - start
    steady = (len(stamps) - 1) / (stamps[-1] - stamps[0]) if len(stamps) > 2 and stamps[-1] > stamps[0] else math.nan
    return wall, steady, result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--frames", type=int, default=12)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--no-dask", action="store_true", help="skip the LocalCluster path")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="irseg-bench-") as tmp:
        root = Path(tmp)
        frames = root / "frames"
        frames.mkdir()
        make_frames(frames, args.frames)
        paths = {
            "-j 1": {"jobs": 1},
            f"-j {args.workers}": {"jobs": args.workers},
        }
        if not args.no_dask:
            paths[f"dask LocalCluster ({args.workers} workers x 1 thread)"] = {
                "jobs": args.workers, "scheduler": "local"}
        walls: dict[str, list[float]] = {name: [] for name in paths}
        steadies: dict[str, list[float]] = {name: [] for name in paths}
        stage_per_frame: dict[str, list[float]] = {s: [] for s in STAGES}
        for _ in range(args.repeats):
            for name, kwargs in paths.items():
                seconds, steady, result = _time_run(frames, root / "out", **kwargs)
                assert result.n_failed == 0, result.failures
                walls[name].append(seconds)
                steadies[name].append(steady)
                if kwargs.get("jobs") == 1 and "scheduler" not in kwargs:
                    for outcome in result.outcomes:
                        for stage in STAGES:
                            stage_per_frame[stage].append(outcome.timings.get(stage, 0.0))

        base = statistics.median(walls["-j 1"])
        print(f"{args.frames} frames of 640x480, median of {args.repeats} runs (start-up included)")
        print(f"{'path':45s} {'wall s':>8s} {'s/frame':>8s} {'frames/s':>9s} {'speed-up':>9s} {'steady f/s':>11s}")
        for name, values in walls.items():
            med = statistics.median(values)
            steady = statistics.median(steadies[name])
            print(f"{name:45s} {med:8.2f} {med / args.frames:8.3f} {args.frames / med:9.2f} {base / med:9.2f} "
                  f"{steady:11.2f}")
        print("(steady f/s: images completed per second between the first and the last, i.e. without start-up)")
        print("\nper-frame stage time, -j 1 (median over frames and runs)")
        total = 0.0
        for stage in STAGES:
            med = statistics.median(stage_per_frame[stage])
            total += med
            print(f"  {stage:10s} {med * 1000:8.1f} ms")
        print(f"  {'sum':10s} {total * 1000:8.1f} ms")
        print("\ntargets on 2 cores: <= 0.30 s/frame with -j 1, >= 5 frames/s with 2 workers")


if __name__ == "__main__":
    main()
