"""Peak memory of one image, in bytes per pixel, beside a baseline measured in the same run.

Usage::

    python benchmarks/bench_memory.py [--sizes 480x640 3000x4000 6000x8000] [--stages] [--nan-px N]

For each size, a synthetic float32 thermogram (a 20 °C interior wall with noise, a cold
rectangle, a stud strip and a cold corner, and ``--nan-px`` scattered NaN pixels as a camera's
dead pixels; invented data) is written as NPY with a survey.toml, and two processes are
measured with ``/usr/bin/time -v`` (maximum resident set size):

* **run**: ``python -m irseg segment DIR -o OUT -j 1 -q`` (``--max-pixels`` raised for
  frames above the default budget) — the whole pipeline in one
  process, as one worker computes an image (read, calibrate, segment, analyse, render,
  write, survey files);
* **peer baseline**: ``python -c "import irseg ...; read_thermogram(path)"`` — the same
  interpreter, every stage module and the libraries they load (NumPy, SciPy, OpenCV,
  scikit-image) imported, and the image read; nothing computed.

Printed per size: both maxima, ``(run - baseline) / pixels`` (the working memory of the
computation per pixel, the figure issue 15 bounds) and ``run / pixels``, with the size of
the overlay PNG (bytes and pixels) and of report.html (which embeds the overlay). ``--stages`` adds an in-process breakdown: the peak of
traced allocations (``tracemalloc``, NumPy's buffers included) within each stage, above what
was held when the stage started, in bytes per pixel (the stages called as the pipeline calls
them: the segmentation without keeping ``v``). ``held + peak`` of a stage, less the 4 B/px of the
read image that the baseline holds, is that stage's share of ``(run-base)/px``; the rest is the
interpreter's and the libraries' own growth while computing (about 50 MB whatever the size) and
the allocator's unreturned free memory.

The default worker count (:func:`irseg.batch._pool.default_jobs`) plans with
``PEAK_BYTES_PER_PIXEL``; update it from the ``(run-base)/px`` column (plus the stored image,
which the baseline holds) when the stages change.
"""

from __future__ import annotations

import argparse
import re
import struct
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

SURVEY_TOML = """\
[camera]
distance_m = 4.0
hfov_deg = 45.0

[surface]
emissivity = 0.93
reflected_c = 19.0
view = "interior"

[air]
inside_c = 20.0
outside_c = -2.0
"""

_TIME = "/usr/bin/time"
_MAXRSS = re.compile(r"Maximum resident set size \(kbytes\):\s*(\d+)")


def make_frame(rows: int, cols: int, *, seed: int = 20261201, nan_px: int = 0) -> np.ndarray:
    """A synthetic interior wall (float32 °C): features scale with the frame; ``nan_px`` dead pixels."""
    rng = np.random.default_rng(seed)
    yy = np.arange(rows, dtype=np.float32)[:, None] / rows
    xx = np.arange(cols, dtype=np.float32)[None, :] / cols
    wall = np.empty((rows, cols), np.float32)
    wall[...] = 18.5 + 0.6 * yy
    wall += rng.normal(0.0, 0.06, (rows, cols)).astype(np.float32)
    wall[int(0.25 * rows) : int(0.5 * rows), int(0.3 * cols) : int(0.55 * cols)] -= 2.5  # missing insulation
    s0 = int(0.47 * cols)
    wall[:, s0 : s0 + max(2, cols // 50)] -= 1.2  # stud
    wall[(yy + xx) < 0.19] -= 1.8  # cold corner
    if nan_px:  # dead pixels: the masked paths of calibration and segmentation run too
        wall[rng.integers(0, rows, nan_px), rng.integers(0, cols, nan_px)] = np.nan
    return wall


def max_rss_bytes(cmd: list[str]) -> tuple[int, float]:
    """Maximum RSS of a command (``/usr/bin/time -v``) and its wall time."""
    start = time.perf_counter()
    proc = subprocess.run([_TIME, "-v", *cmd], capture_output=True, text=True)
    wall = time.perf_counter() - start
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed ({proc.returncode}):\n{proc.stderr[-2000:]}")
    match = _MAXRSS.search(proc.stderr)
    if match is None:
        raise SystemExit(f"no maximum RSS in the output of {_TIME} -v")
    return int(match.group(1)) * 1024, wall


_BASELINE = (  # the same libraries loaded as in a run (every stage module), and the image read
    "import sys, importlib, irseg, irseg.cli.main, irseg.pipeline, irseg.batch\n"
    "for name in ('irseg.io', 'irseg.metadata', 'irseg.radiometry', 'irseg.segmentation', 'irseg.analysis',\n"
    "             'irseg.render', 'irseg.report'):\n"
    "    importlib.import_module(name)\n"
    "import cv2, scipy.ndimage, skimage.morphology\n"
    "from irseg.io import read_thermogram\n"
    "frame = read_thermogram(sys.argv[1], max_pixels=int(sys.argv[2]))\n"
)

_STAGES = r"""
import sys, time, tracemalloc
import numpy as np
from irseg.io import read_thermogram, encode_png
from irseg.metadata import load_metadata
from irseg.radiometry import calibrate
from irseg.segmentation import segment
from irseg.analysis import analyse
from irseg.render import render_overlay, label_image

path = sys.argv[1]
tracemalloc.start()
pixels = None
def stage(name, func):
    tracemalloc.reset_peak()
    held = tracemalloc.get_traced_memory()[0]
    value = func()
    peak = tracemalloc.get_traced_memory()[1]
    print(f"{name} {held} {peak}")
    return value
raw = stage("read", lambda: read_thermogram(path, max_pixels=int(sys.argv[2])))
meta = stage("metadata", lambda: load_metadata(path))
frame = stage("calibrate", lambda: calibrate(raw, meta))
del raw
k = meta.segment
seg = stage("segment", lambda: segment(frame.temperature_c, mask=frame.mask, noise_k=k.noise_k,
                                       min_step_k=k.min_step_k, min_feature_px=k.min_feature_px, keep_v=False))
analysis = stage("analyse", lambda: analyse(frame, seg, meta))
stage("render", lambda: (encode_png(render_overlay(frame, seg, analysis, meta)), encode_png(label_image(analysis))))
"""


def stage_breakdown(path: Path, pixels: int) -> list[tuple[str, float, float]]:
    proc = subprocess.run([sys.executable, "-c", _STAGES, str(path), str(pixels)], capture_output=True, text=True,
                          check=True)
    rows = []
    for line in proc.stdout.splitlines():
        name, held, peak = line.split()
        rows.append((name, int(held) / pixels, (int(peak) - int(held)) / pixels))
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", nargs="+", default=["480x640", "3000x4000"],
                        help="ROWSxCOLS frames (6000x8000 takes about a minute and 4 GB)")
    parser.add_argument("--stages", action="store_true", help="also print the per-stage breakdown")
    parser.add_argument("--nan-px", type=int, default=200, help="NaN (dead) pixels scattered over the frame")
    args = parser.parse_args()
    if not Path(_TIME).exists():
        raise SystemExit(f"{_TIME} (GNU time) is needed for the maximum RSS")

    print(f"{'size':>11} {'pixels':>10} {'run MB':>8} {'baseline MB':>11} {'(run-base)/px':>13} "
          f"{'run/px':>7} {'wall s':>7} {'overlay':>9} {'overlay px':>11} {'report':>9}")
    with tempfile.TemporaryDirectory(prefix="irseg-mem-") as tmp:
        for size in args.sizes:
            rows, cols = (int(v) for v in size.lower().split("x"))
            folder = Path(tmp) / f"in_{rows}x{cols}"
            folder.mkdir()
            (folder / "survey.toml").write_text(SURVEY_TOML, encoding="utf-8")
            image = folder / "frame.npy"
            np.save(image, make_frame(rows, cols, nan_px=args.nan_px))
            out = Path(tmp) / f"out_{rows}x{cols}"
            pixels = rows * cols
            base, _ = max_rss_bytes([sys.executable, "-c", _BASELINE, str(image), str(pixels)])
            run, wall = max_rss_bytes([sys.executable, "-m", "irseg", "segment", str(folder), "-o", str(out),
                                       "-j", "1", "-q", "--max-pixels", str(max(pixels, 40_000_000))])
            png = (out / "frame" / "overlay.png").read_bytes()
            width, height = struct.unpack(">II", png[16:24])  # the IHDR chunk
            report = (out / "report.html").stat().st_size
            print(f"{size:>11} {pixels:>10} {run / 2**20:>8.0f} {base / 2**20:>11.0f} "
                  f"{(run - base) / pixels:>11.1f} B {run / pixels:>5.0f} B {wall:>7.1f} "
                  f"{len(png) / 1e6:>7.2f}MB {width:>5}x{height:<5} {report / 1e6:>7.2f}MB")
            if args.stages:
                for name, held, extra in stage_breakdown(image, pixels):
                    print(f"{'':>11}   {name:<10} held {held:5.1f} B/px, peak within the stage +{extra:5.1f} B/px")
            image.unlink()


if __name__ == "__main__":
    main()
