"""Benchmark: irseg.analysis.analyse on a 640 x 480 frame with about ten regions.

Not a test: it prints medians of repeated runs and ratios against peers measured
in the same run on this machine. Usage::

    python benchmarks/bench_analysis.py
    OMP_NUM_THREADS=1 python benchmarks/bench_analysis.py --repeats 30

Scene (invented): an interior wall at about 18 °C with 1.9 K of stratification,
four framing members 12 px wide at regular spacing, an empty bay, a weaker void
and a warm patch, white noise 0.05 K. The label map is the known truth (the
analysis is benchmarked alone, not the segmentation).

Peers, on the same frame and labels:
- ``skimage.measure.regionprops_table`` (area, centroid, bbox, mean intensity):
  the plain per-region measurement the analysis extends;
- ``scipy.ndimage.distance_transform_edt`` of the whole frame's background: one
  full-frame morphological pass.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time

import numpy as np
from scipy import ndimage
from skimage.measure import regionprops_table

from irseg.analysis import analyse
from irseg.segmentation import Segmentation
from irseg.segmentation._params import derive_params
from irseg.types import Air, Camera, SurveyMeta, Surface, ThermalFrame


def _scene(seed: int = 0):
    m, n = 480, 640
    rows = np.mgrid[0:m, 0:n][0]
    t = 18.0 + 0.004 * rows
    d = np.zeros((m, n), int)
    for c in (60, 200, 340, 480):
        t[:, c:c + 12] -= 1.0
        d[:, c:c + 12] = 1
    t[100:260, 380:470] -= 4.0
    d[100:260, 380:470] = 2
    t[300:340, 100:180] -= 2.0
    d[300:340, 100:180] = 3
    t[20:60, 500:600] += 2.0
    d[20:60, 500:600] = 4
    labels = np.zeros((m, n), np.int32)
    nxt = 1
    for value in np.unique(d):
        comp, k = ndimage.label(d == value)
        labels[comp > 0] = comp[comp > 0] + nxt - 1
        nxt += k
    edges = np.zeros((m, n), bool)
    edges[1:] |= labels[1:] != labels[:-1]
    edges[:, 1:] |= labels[:, 1:] != labels[:, :-1]
    noisy = t + np.random.default_rng(seed).normal(0, 0.05, t.shape)
    # the segmenter's own result type and weights, with the known labels in place of a solve
    params = derive_params(noise_k=0.05, noise_estimated=False, min_step_k=0.5, min_feature_px=4.0,
                           value_range_k=float(np.ptp(t)), levels=1, max_num_iter=0, tol=0.0)
    seg = Segmentation(u=t, v=np.where(edges, 0.0, 1.0), edges=edges, labels=labels, n_regions=int(labels.max()),
                       energy=(), iterations=0, converged=True, message="known truth labels (benchmark)",
                       params=params)
    meta = SurveyMeta(camera=Camera(hfov_deg=45.0, distance_m=3.0), surface=Surface(view="interior"),
                      air=Air(inside_c=20.0, outside_c=0.0))
    frame = ThermalFrame(path="bench.npy", temperature_c=noisy, mask=np.zeros((m, n), bool))
    return frame, seg, meta


def _median_ms(fn, repeats: int) -> float:
    fn()  # warm-up
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return 1000.0 * statistics.median(times)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=20)
    args = ap.parse_args(argv)
    frame, seg, meta = _scene()
    res = analyse(frame, seg, meta)
    t_an = _median_ms(lambda: analyse(frame, seg, meta), args.repeats)
    t_rp = _median_ms(
        lambda: regionprops_table(seg.labels, frame.temperature_c,
                                  properties=("label", "area", "centroid", "bbox", "intensity_mean")),
        args.repeats,
    )
    t_edt = _median_ms(lambda: ndimage.distance_transform_edt(seg.labels == 1), args.repeats)
    print(f"frame 640x480, {seg.n_regions} regions, {len(res.anomalies)} anomalies kept")
    print(f"  causes: {sorted(a.cause for a in res.anomalies)}")
    print(f"{'analyse':>28}: {t_an:8.2f} ms (median of {args.repeats})")
    print(f"{'regionprops_table':>28}: {t_rp:8.2f} ms  ratio analyse/peer {t_an / t_rp:5.2f}")
    print(f"{'full-frame EDT':>28}: {t_edt:8.2f} ms  ratio analyse/peer {t_an / t_edt:5.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
