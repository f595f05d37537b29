"""Benchmark: irseg.segment.segment against scikit-image peers on synthetic thermograms.

Not a test: it prints medians, ratios, IoU against the known anomaly mask and peak
memory, all measured in one run on this machine. Usage::

    python benchmarks/bench_segment.py            # all sizes
    python benchmarks/bench_segment.py --quick    # 640 x 480 only, fewer repeats
    OMP_NUM_THREADS=1 python benchmarks/bench_segment.py

Scene (invented): an interior wall at about 20 °C with a smooth 2 K gradient, warm
and cold patches (0.8 to 3 K) of several shapes, two of them touching, blurred by
the optics (Gaussian, 1 px) and white noise of 0.05 K or 0.3 K.

Peers, run on the same frames:
- ``skimage.segmentation.chan_vese`` (two-phase piecewise-constant level set);
- ``skimage.restoration.denoise_tv_chambolle`` followed by a threshold of half the
  minimum step on the deviation from the median temperature.

IoU is between the predicted anomaly pixels (irseg: every region but the largest;
peers: the minority phase / thresholded pixels) and the true anomaly mask.

Second part (issue 11), on the physics validation scenes of ``irseg.scenes._validation``
(each defect against its truth region, sharp or graded): irseg's whole pipeline
(``irseg.pipeline.process_image``: read, metadata, calibrate, segment, analyse) against the
peer a skilled analyst would write with scipy and scikit-image: a robust background (a
median filter about 0.8 m wide, on a copy reduced 4×, brought back bilinearly), the residual
smoothed by a 1.5 px Gaussian, its noise as 1.4826·MAD, hysteresis thresholds at 2.5σ and
5σ per sign (``skimage.filters.apply_hysteresis_threshold``), objects under 0.0025 m²
removed. A predicted object belongs to the defect holding at least half of it (the rule of
the validation); IoU is that of the union of a defect's objects with its truth region, n the
number of objects. Then the whole pipeline's time per frame on one thread (OpenCV and BLAS
threads set to 1), 640×480 and 1280×1024, in CPU seconds of the process (the minimum of 3
runs; the shared machine's load is printed; wall time equals it on an idle core).

The methods (and, for the scaling table, the frame sizes) run round-robin, one run of
each per round, so load from other processes on a shared machine hits all alike;
medians and minima are printed. chan_vese (about 1 s a run) gets 3 runs, 1 with
``--quick``. Peak memory is the tracemalloc peak of one irseg call (numpy and OpenCV
buffers are traced), plus the process's max RSS at the end.
"""

from __future__ import annotations

import argparse
import resource
import statistics
import time
import tracemalloc

import os
import tempfile
import warnings
from pathlib import Path

import cv2
import numpy as np
from scipy import ndimage as ndi
from skimage.filters import apply_hysteresis_threshold
from skimage.morphology import remove_small_objects
from skimage.restoration import denoise_tv_chambolle
from skimage.segmentation import chan_vese

from irseg.segmentation import segment

MIN_STEP_K = 0.5


def make_scene(shape: tuple[int, int], noise_k: float, seed: int = 7) -> tuple[np.ndarray, np.ndarray]:
    """Synthetic wall thermogram (°C) and its true anomaly mask; patch layout scales with the frame."""
    rng = np.random.default_rng(seed)
    m, n = shape
    yy, xx = np.mgrid[:m, :n]
    y, x = yy / m, xx / n
    t = 20.0 + 1.2 * x + 0.8 * y  # smooth 2 K gradient across the wall
    truth = np.zeros(shape, bool)

    def add(region: np.ndarray, delta: float) -> None:
        nonlocal t
        t = t + delta * region
        truth[region] = True

    add((x > 0.10) & (x < 0.30) & (y > 0.12) & (y < 0.35), -2.0)  # cold: missing insulation
    add(((x - 0.62) / 0.10) ** 2 + ((y - 0.25) / 0.12) ** 2 < 1.0, +1.5)  # warm ellipse
    add((x > 0.40) & (x < 0.90) & (y > 0.60) & (y < 0.66), -1.2)  # cold strip: thermal bridge
    add((x > 0.15) & (x < 0.35) & (y > 0.55) & (y < 0.85), -0.8)  # damp patch ...
    add((x > 0.35) & (x < 0.45) & (y > 0.55) & (y < 0.85), -2.5)  # ... touching a colder one
    add(((x - 0.80) / 0.05) ** 2 + ((y - 0.85) / 0.07) ** 2 < 1.0, +3.0)  # warm spot
    t = ndi.gaussian_filter(t, 1.0)
    t = t + rng.normal(0.0, noise_k, shape)
    return t.astype(np.float32), truth


def iou(a: np.ndarray, b: np.ndarray) -> float:
    return float((a & b).sum()) / max(float((a | b).sum()), 1.0)


def predict_irseg(g: np.ndarray) -> np.ndarray:
    seg = segment(g, min_step_k=MIN_STEP_K)
    counts = np.bincount(seg.labels.ravel())
    counts[0] = 0
    return seg.labels != counts.argmax()


def predict_chan_vese(g: np.ndarray) -> np.ndarray:
    phase = chan_vese(g.astype(np.float64), mu=0.25, tol=1e-3, max_num_iter=500, dt=0.5)  # skimage defaults
    return phase if phase.mean() < 0.5 else ~phase


def predict_tv(g: np.ndarray) -> np.ndarray:
    d = denoise_tv_chambolle(g.astype(np.float64), weight=0.3)
    return np.abs(d - np.median(d)) > 0.5 * MIN_STEP_K


def timed_interleaved(jobs: dict, repeats: dict) -> dict:
    """Run the jobs round-robin (one run of each per round) so that load from other
    processes on a shared machine hits every method alike; returns name -> (median, min, output)."""
    times: dict = {k: [] for k in jobs}
    outs: dict = {}
    for r in range(max(repeats.values())):
        for name, (fn, arg) in jobs.items():
            if r < repeats[name]:
                t0 = time.perf_counter()
                outs[name] = fn(arg)
                times[name].append(time.perf_counter() - t0)
    return {k: (statistics.median(v), min(v), outs[k]) for k, v in times.items()}


def peak_mb(fn, g: np.ndarray) -> float:
    tracemalloc.start()
    fn(g)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / 2**20


def analyst_peer(t: np.ndarray, pixel_m: float) -> np.ndarray:
    """The skilled analyst's anomaly labels: robust background subtraction + hysteresis threshold."""
    t = t.astype(np.float32)
    m, n = t.shape
    f = 4
    small = cv2.resize(t, (n // f, m // f), interpolation=cv2.INTER_AREA)
    win = int(round(0.8 / (pixel_m * f))) | 1
    bg = cv2.resize(ndi.median_filter(small, size=win, mode="reflect"), (n, m), interpolation=cv2.INTER_LINEAR)
    r = ndi.gaussian_filter(t - bg, 1.5)
    sig = 1.4826 * float(np.median(np.abs(r - np.median(r))))
    min_px = max(9, int(0.0025 / pixel_m**2))
    out = np.zeros((m, n), np.int32)
    for sgn in (-1, 1):
        mk = apply_hysteresis_threshold(sgn * r, 2.5 * sig, 5.0 * sig)
        mk = remove_small_objects(mk, max_size=min_px - 1)
        lab, _ = ndi.label(mk)
        out[lab > 0] = lab[lab > 0] + out.max()
    return out


def _defect_iou(labels: np.ndarray, truth: np.ndarray) -> tuple[float, int]:
    ids, counts = np.unique(labels[labels > 0], return_counts=True)
    inside = dict(zip(*np.unique(labels[truth & (labels > 0)], return_counts=True)))
    mine = [i for i, c in zip(ids, counts) if inside.get(i, 0) >= 0.5 * c]
    return iou(np.isin(labels, mine), truth), len(mine)


def validation_comparison(repeats: int = 3) -> None:
    """irseg's whole pipeline against the analyst peer on the validation scenes; pipeline timings."""
    from irseg.pipeline import process_image
    from irseg.scenes._survey import export_image
    from irseg.scenes._validation import RESOLUTION_SERIES, VALIDATION_RECIPES

    cv2.setNumThreads(1)
    print("\nvalidation scenes: whole pipeline vs the analyst peer (IoU per defect against its truth region)")
    print(f"{'scene':28} {'defect':22} {'truth':8} {'irseg IoU':>9} {'n':>2} {'peer IoU':>9} {'n':>2}")
    tally = {"irseg": [], "peer": []}
    timings: dict[str, list[float]] = {"640x480": [], "1280x1024": []}
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        recipes = list(VALIDATION_RECIPES) + [RESOLUTION_SERIES[k][2] for k in sorted(RESOLUTION_SERIES)]
        for r in recipes:
            rec = export_image(r, tmp)
            path = Path(tmp) / rec["image"]
            best = min(_time(process_image, path) for _ in range(repeats))
            res = process_image(path)
            size = f"{rec['size'][1]}x{rec['size'][0]}"
            if size in timings:
                timings[size].append(best)
            peer = analyst_peer(res.frame.temperature_c, rec["pixel_m"])
            for d in rec["defects"]:
                if d["cause"] not in ("missing_insulation", "moisture", "air_leakage"):
                    continue
                truth = rec["_masks"][d["mask_index"]]
                a, na = _defect_iou(np.asarray(res.analysis.labels), truth)
                b, nb = _defect_iou(peer, truth)
                tally["irseg"].append(a)
                tally["peer"].append(b)
                print(f"{r.stem:28} {d['name']:22} {d.get('kind', 'sharp'):8} {a:9.3f} {na:2d} {b:9.3f} {nb:2d}")
    print(f"median IoU over {len(tally['irseg'])} defects: irseg {statistics.median(tally['irseg']):.3f}, "
          f"peer {statistics.median(tally['peer']):.3f}")
    load = os.getloadavg()[0]
    for size, ts in timings.items():
        if ts:
            print(f"whole pipeline, one thread, {size}: median over frames {statistics.median(ts):.3f} CPU s, "
                  f"range {min(ts):.3f}-{max(ts):.3f} s (min of {repeats} runs each; load average {load:.1f})")


def _time(fn, arg) -> float:
    """CPU seconds of this (single-threaded) process: the shared machine's load barely changes it."""
    t0 = time.process_time()
    fn(arg)
    return time.process_time() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="640 x 480 only, 3 repeats for the peers")
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--validation-only", action="store_true",
                    help="only the validation-scene comparison and the pipeline timings")
    args = ap.parse_args()
    if args.validation_only:
        validation_comparison()
        return

    segment(make_scene((120, 160), 0.05)[0])  # warm-up (imports, caches)
    cv_runs = 1 if args.quick else 3
    tv_runs = 3 if args.quick else 5
    print("640 x 480; methods run round-robin; chan_vese fewer times (about 1 s per run)")
    print(f"{'frame':>10} {'noise':>6} {'method':>14} {'median s':>9} {'min s':>8} {'x irseg':>8} {'IoU':>6} {'runs':>5}")
    for noise in (0.05, 0.3):
        g, truth = make_scene((480, 640), noise)
        res = timed_interleaved(
            {"irseg.segment": (predict_irseg, g), "chan_vese": (predict_chan_vese, g), "tv+threshold": (predict_tv, g)},
            {"irseg.segment": args.repeats, "chan_vese": cv_runs, "tv+threshold": tv_runs},
        )
        t_at = res["irseg.segment"][0]
        for name, runs in (("irseg.segment", args.repeats), ("chan_vese", cv_runs), ("tv+threshold", tv_runs)):
            med, best, p = res[name]
            print(
                f"{'640x480':>10} {noise:>6.2f} {name:>14} {med:>9.4f} {best:>8.4f} {med / t_at:>8.1f} "
                f"{iou(p, truth):>6.3f} {runs:>5}"
            )
    if not args.quick:
        print("\nscaling of irseg.segment (noise 0.05 K; sizes run round-robin)")
        shapes = ((240, 320), (480, 640), (1024, 1280))
        scenes = {s: make_scene(s, 0.05) for s in shapes}
        res = timed_interleaved(
            {s: (predict_irseg, scenes[s][0]) for s in shapes}, {s: args.repeats for s in shapes}
        )
        base = res[(480, 640)][0]
        for shape in shapes:
            med, best, p = res[shape]
            mem = peak_mb(predict_irseg, scenes[shape][0])
            print(
                f"{shape[1]}x{shape[0]:<5} median {med:.4f} s  min {best:.4f} s  ({med / base:.2f} x 640x480)  "
                f"IoU {iou(p, scenes[shape][1]):.3f}  peak traced memory {mem:.1f} MB  runs {args.repeats}"
            )
    validation_comparison(1 if args.quick else 3)
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(f"\nprocess max RSS {rss:.0f} MB (includes Python, numpy, scipy, scikit-image)")


if __name__ == "__main__":
    main()
