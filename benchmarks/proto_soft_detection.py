"""Prototype evaluation: soft, graded and diffuse anomalies found by their contrast at scale.

Not a test. Builds hard scenes at 320×240, 640×480 and 1280×1024 and NETD 0.05 K and 0.1 K,
runs ``irseg.analysis._significance.detect_regions`` and a peer that a skilled analyst
would write with scipy/scikit-image, and prints one row per scene, defect, resolution and
NETD, then the resolution-consistency check and the timing. Usage::

    nice -n 15 python benchmarks/proto_soft_detection.py            # everything (~2-4 min)
    nice -n 15 python benchmarks/proto_soft_detection.py --quick    # 640×480, NETD 0.05 K only

Scenes
------
Physics scenes come from ``irseg.scenes`` (3-D conduction, the camera model with its PSF,
NETD, column pattern and its own lens shading, here set to about 1.2 K centre-to-corner):

- ``ceiling``: ceiling below a loft, insulation pushed aside over 0.6 × 0.75 m (sharp);
- ``timber``: timber wall, studs at 400 mm, a 98 mm-deep partial void (soft, weak) and
  a settled bay (sharp); the studs are expected construction, not false alarms;
- ``roof``: warm flat roof at 22:00 after a sunny day, wet EPS (graded by conduction and
  heat storage; truth: half-peak of the simulated contrast).

Analytic scenes are **analytic overlays**: closed-form contrast fields in metres added on
top of an analytic sound surface (stated honestly: no conduction is solved for them). The
sound surface has stratification that is not linear, cooling toward a corner and a floor
junction (or a sky-view gradient outside), and lens shading of 1.2-1.5 K tied to the frame
(``r²`` and ``r⁴`` about the frame centre). The image is pixel-averaged (2×2 sub-samples),
blurred by a 0.8 px Gaussian PSF, and gets white noise (the NETD) plus a fixed column
pattern of 0.02 K:

- ``wet_roof``: a graded wet area on a roof, plateau core tapering to zero at its edge
  (cosine taper 0.35 m wide), +1.2 K at night;
- ``fan``: a cold-air fan falling from a 0.5 m sill gap, −2.5 K at the gap, spreading
  and weakening downward (diffuse, no edge);
- ``damp_base``: damp along the base of a wall, −3 K, a wavy upper boundary that is a
  40 mm ramp, over a floor-junction cooling of the sound surface;
- ``two_touching``: a −2.0 K and a −0.7 K plateau sharing an edge (sharp; must stay two);
- ``large``: a −0.6 K soft-edged area covering 28 % of the frame (the sound surface must
  pass under it);
- ``weak_small``: −0.3 K over 0.05 m² with a 30 mm soft edge.

Truth footprint (per defect): sharp physics defects use the scene maker's footprint; every
other defect the set where its own noise-free contrast is at least half its peak (the same
rule the detector applies, so graded defects are judged by a definition, not by a guess).

Metrics per defect: IoU, area ratio (found / truth), number of regions matched to it (a
region is matched to the defect holding most of its pixels, if that is at least half of
them), false-alarm area (regions matched to no defect and not lying mostly on expected
construction) as a fraction of the scene's defect area. Targets (issue 11): IoU ≥ 0.85
sharp, ≥ 0.75 graded/diffuse; area within 10 %; exactly one region per defect; false alarm
≤ 10 %; the same count and areas within 10 % at the three resolutions.

Peer ("skilled analyst"): background = a median filter of about 0.8 m (a third of the frame)
on a 4×-reduced copy, brought back bilinearly; residual smoothed by a 1.5 px Gaussian; noise
= 1.4826·MAD of the residual; ``skimage.filters.apply_hysteresis_threshold`` at 2.5 and 5 σ
per sign; objects under the minimum area removed.
"""

from __future__ import annotations

import argparse
import os
import statistics
import time
from dataclasses import dataclass

import cv2
import numpy as np
from scipy import ndimage as ndi
from skimage.filters import apply_hysteresis_threshold
from skimage.morphology import remove_small_objects

from irseg.analysis._significance import MIN_AREA_M2, detect_regions
from irseg.scenes import CameraModel, make_preset, shoot, view_window

RESOLUTIONS = ((320, 240), (640, 480), (1280, 1024))
NETDS = (0.05, 0.1)
FRAME_W_M = 2.4  # analytic frames are 2.4 m wide
COLUMN_K = 0.02


@dataclass
class Frame:
    t: np.ndarray
    pixel_m: float
    truths: list  # (name, kind, mask)
    structure: np.ndarray  # expected construction (not a false alarm)


# --------------------------------------------------------------------------- analytic overlays


def _smoothstep(u):
    u = np.clip(u, 0.0, 1.0)
    return 0.5 - 0.5 * np.cos(np.pi * u)


def _grid(n_cols, n_rows, ss=2):
    p = FRAME_W_M / n_cols
    sub = (np.arange(ss) + 0.5) / ss
    x = ((np.arange(n_cols)[:, None] + sub[None, :]).ravel()) * p
    y = ((np.arange(n_rows)[:, None] + sub[None, :]).ravel()) * p
    return np.meshgrid(y, x, indexing="ij"), p, ss


def _pixmean(a, ss):
    m, n = a.shape[0] // ss, a.shape[1] // ss
    return a.reshape(m, ss, n, ss).mean(axis=(1, 3))


def _shading(m, n, k):
    yy = (np.arange(m) - (m - 1) / 2) / ((m - 1) / 2)
    xx = (np.arange(n) - (n - 1) / 2) / ((n - 1) / 2)
    r2 = (yy[:, None] ** 2 + xx[None, :] ** 2) / 2.0
    return -k * (0.7 * r2 + 0.3 * r2**2)  # centre-to-corner k kelvin


def _sound(y, x, kind):
    h = FRAME_W_M * 0.75
    if kind == "interior":
        z = 2.2 - y  # height above the floor (frame bottom ≈ 0.4 m above it)
        strat = 19.0 + 0.35 * z + 0.25 * z**2  # warmer near the ceiling, not linearly
        corner = -0.8 * np.exp(-(FRAME_W_M - x) / 0.25)  # external corner at the right edge
        floor = -0.6 * np.exp(-(h + 0.4 - y) / 0.2)
        return strat + corner + floor
    # roof / facade seen from outside: sky view falls toward the bottom, edge upstand warms the left
    return 3.0 + 0.4 * (y / h) ** 1.5 + 0.3 * np.exp(-x / 0.3)


def _wet_roof(y, x):
    r = np.hypot((x - 1.35) / 1.0, (y - 0.85) / 0.8)
    return {"wet_roof_area": ("graded", 1.2 * _smoothstep((0.62 - r) / 0.35))}


def _fan(y, x):
    y0, xc = 0.45, 1.1
    d = np.clip(y - y0, 0.0, None)
    half = 0.25 + 0.45 * d  # widens downward
    amp = -2.5 * np.exp(-d / 0.5) * (y >= y0 - 0.03)
    lateral = _smoothstep((half - np.abs(x - xc)) / (0.6 * half))
    top = _smoothstep((y - (y0 - 0.03)) / 0.03)
    return {"cold_air_fan": ("diffuse", amp * lateral * top)}


def _damp_base(y, x):
    top = 1.45 + 0.06 * np.sin(2 * np.pi * x / 0.55) + 0.03 * np.sin(2 * np.pi * x / 0.23 + 1.0)
    ramp = _smoothstep((y - top) / 0.04 + 0.5)
    ends = _smoothstep((x - 0.35) / 0.04 + 0.5) * _smoothstep((2.05 - x) / 0.04 + 0.5)
    return {"damp_wall_base": ("diffuse", -3.0 * ramp * ends)}


def _box(y, x, x0, x1, y0, y1, edge):
    return (_smoothstep((x - x0) / edge + 0.5) * _smoothstep((x1 - x) / edge + 0.5)
            * _smoothstep((y - y0) / edge + 0.5) * _smoothstep((y1 - y) / edge + 0.5))


def _two_touching(y, x):
    return {"strong_void": ("sharp", -2.0 * _box(y, x, 0.5, 1.1, 0.45, 1.25, 0.004)),
            "weak_void": ("sharp", -0.7 * _box(y, x, 1.1, 1.7, 0.45, 1.25, 0.004))}


def _large(y, x):
    # 28 % of a 2.4 × 1.8 m frame: 1.21 m²
    return {"large_area": ("sharp", -0.6 * _box(y, x, 0.55, 1.65, 0.35, 1.45, 0.02))}


def _weak_small(y, x):
    return {"weak_small": ("graded", -0.3 * _box(y, x, 1.5, 1.72, 0.6, 0.82, 0.03))}


ANALYTIC = {
    "wet_roof": (_wet_roof, "exterior", 1.2),
    "fan": (_fan, "interior", 1.3),
    "damp_base": (_damp_base, "interior", 1.2),
    "two_touching": (_two_touching, "interior", 1.5),
    "large": (_large, "interior", 1.5),
    "weak_small": (_weak_small, "interior", 1.2),
}


def analytic_frame(name, n_cols, n_rows, netd, seed):
    fn, kind, shade = ANALYTIC[name]
    (yy, xx), p, ss = _grid(n_cols, n_rows)
    base = _sound(yy, xx, kind)
    parts = fn(yy, xx)
    total = base + sum(c for _, c in parts.values())
    img = _pixmean(total, ss)
    img = ndi.gaussian_filter(img, 0.8 * 1.0, mode="nearest")  # PSF 0.8 px
    img += _shading(n_rows, n_cols, shade)
    rng = np.random.default_rng(seed)
    img += rng.normal(0, COLUMN_K, n_cols)[None, :] + rng.normal(0, netd, (n_rows, n_cols))
    truths = []
    for dname, (dkind, c) in parts.items():
        cp = _pixmean(c, ss)
        peak = np.max(np.abs(cp))
        truths.append((dname, dkind, np.abs(cp) >= 0.5 * peak))
    return Frame(img, p, truths, np.zeros(img.shape, bool))


# --------------------------------------------------------------------------- physics scenes


_PHYS_CACHE: dict = {}


def _phys_scene(name):
    if name not in _PHYS_CACHE:
        if name == "ceiling":
            sc = make_preset("ceiling", name=name, patch=(0.6, 1.2, 0.5, 1.25), inside_c=21.0, outside_c=-1.0)
        elif name == "timber":
            sc = make_preset("timber-wall", name=name, spacing_m=0.4,
                             defects=("void:1.43:1.79:1.05:1.5:0.098", "settled:1:0.30"), outside_c=1.0)
        else:
            sc = make_preset("flat-roof", name=name, wet=((1.0, 2.4, 0.8, 1.9, 0.15),))
        _PHYS_CACHE[name] = sc
    return _PHYS_CACHE[name]


PHYSICS = {
    "ceiling": ("sharp",),
    "timber": ("graded", "sharp"),  # partial void (soft), settled bay
    "roof": ("graded",),
}


def physics_frame(name, n_cols, n_rows, netd, seed):
    sc = _phys_scene(name)
    dist = {"ceiling": 2.4, "timber": 2.4, "roof": 4.4}[name]
    hfov = 45.0
    cam = CameraModel(n_cols=n_cols, n_rows=n_rows, hfov_deg=hfov, distance_m=dist, netd_k=netd, seed=seed,
                      column_sigma_k=COLUMN_K, shading=0.08, housing_c=float(sc.radiant_c.mean()) + 15.0,
                      centre_m=(sc.element.width_m / 2, sc.element.height_m / 2))
    shot = shoot(sc, cam)
    contrast = shot.object_c - shot.baseline_c
    truths = []
    for i, (d, kind) in enumerate(zip(sc.truth, PHYSICS[name])):
        fp = shot.defect_masks[i]
        if not fp.any():
            continue
        if kind == "sharp":
            truths.append((d.name, kind, fp))
        else:
            near = ndi.binary_dilation(fp, iterations=max(2, int(0.1 / shot.pixel_m)))
            c = np.where(near, contrast, 0.0)
            sgn = np.sign(np.median(contrast[fp]))
            peak = np.percentile(sgn * c[fp], 99)
            half = sgn * c >= 0.5 * peak
            lab, _ = ndi.label(half)
            keep = np.unique(lab[fp & half])
            truths.append((d.name, kind, np.isin(lab, keep[keep > 0])))
    structure = np.zeros(shot.apparent_c.shape, bool)
    if sc.element.framing:
        x0, x1, y0, y1 = view_window(sc.element, cam)
        xs = x0 + (np.arange(n_cols) + 0.5) * shot.pixel_m
        ys = y0 + (np.arange(n_rows) + 0.5) * shot.pixel_m
        for b in sc.element.framing:
            structure |= ((ys >= b.y0_m) & (ys < b.y1_m))[:, None] & ((xs >= b.x0_m) & (xs < b.x1_m))[None, :]
        structure = ndi.binary_dilation(structure, iterations=max(2, int(0.04 / shot.pixel_m)))
    return Frame(shot.apparent_c, shot.pixel_m, truths, structure)


# --------------------------------------------------------------------------- methods


def ours(fr: Frame, netd: float) -> np.ndarray:
    labels, _, _ = detect_regions(fr.t, None, noise_k=netd, pixel_m=fr.pixel_m)
    return labels


def peer(fr: Frame, netd: float) -> np.ndarray:
    t = fr.t.astype(np.float32)
    m, n = t.shape
    f = 4
    small = cv2.resize(t, (n // f, m // f), interpolation=cv2.INTER_AREA)
    win = int(round(0.8 / (fr.pixel_m * f))) | 1
    bg = ndi.median_filter(small, size=win, mode="reflect")
    bg = cv2.resize(bg, (n, m), interpolation=cv2.INTER_LINEAR)
    r = ndi.gaussian_filter(t - bg, 1.5)
    sig = 1.4826 * float(np.median(np.abs(r - np.median(r))))
    min_px = max(9, int(MIN_AREA_M2 / fr.pixel_m**2))
    out = np.zeros((m, n), np.int32)
    for sgn in (-1, 1):
        mk = apply_hysteresis_threshold(sgn * r, 2.5 * sig, 5.0 * sig)
        mk = remove_small_objects(mk, max_size=min_px - 1)
        lab, k = ndi.label(mk)
        out[lab > 0] = lab[lab > 0] + out.max()
    return out


# --------------------------------------------------------------------------- scoring


def score(fr: Frame, labels: np.ndarray) -> tuple[list[dict], float]:
    ids = np.unique(labels[labels > 0])
    owner = {}
    for i in ids:
        reg = labels == i
        size = reg.sum()
        shares = [(tm & reg).sum() for _, _, tm in fr.truths]
        best = int(np.argmax(shares)) if shares else -1
        if shares and shares[best] >= 0.5 * size:
            owner[i] = best
        elif (fr.structure & reg).sum() >= 0.5 * size:
            owner[i] = -2  # expected construction
        else:
            owner[i] = -1
    rows = []
    total_area = 0.0
    for k, (name, kind, tm) in enumerate(fr.truths):
        mine = [i for i in ids if owner[i] == k]
        sel = np.isin(labels, mine)
        union = (sel | tm).sum()
        rows.append({"defect": name, "kind": kind, "n": len(mine), "iou": (sel & tm).sum() / union if union else 0,
                     "area_ratio": sel.sum() / max(tm.sum(), 1), "area_m2": sel.sum() * fr.pixel_m**2,
                     "truth_m2": tm.sum() * fr.pixel_m**2})
        total_area += tm.sum()
    fa = sum((labels == i).sum() for i in ids if owner[i] == -1)
    return rows, fa / max(total_area, 1)


def passes(row, fa):
    need = 0.85 if row["kind"] == "sharp" else 0.75
    return row["n"] == 1 and row["iou"] >= need and abs(row["area_ratio"] - 1) <= 0.10 and fa <= 0.10


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    args = ap.parse_args()
    cv2.setNumThreads(1)
    try:
        from threadpoolctl import threadpool_limits
        threadpool_limits(1)
    except ImportError:  # pragma: no cover
        pass
    res = [(640, 480)] if args.quick else RESOLUTIONS
    netds = (0.05,) if args.quick else NETDS
    scenes = [("phys", s) for s in PHYSICS] + [("ana", s) for s in ANALYTIC]
    print(f"{'scene':13s} {'defect':22s} {'kind':8s} {'res':>9s} {'NETD':>5s} | "
          f"{'ours: n':>7s} {'IoU':>5s} {'area':>5s} {'FA':>5s} ok | {'peer: n':>7s} {'IoU':>5s} {'area':>5s} {'FA':>5s} ok")
    consistency: dict = {}
    tally = {"ours": [0, 0], "peer": [0, 0]}
    for src, name in scenes:
        for netd in netds:
            for (nc, nr) in res:
                seed = 1000 + nc + int(netd * 1000)
                fr = (physics_frame if src == "phys" else analytic_frame)(name, nc, nr, netd, seed)
                r_o, fa_o = score(fr, ours(fr, netd))
                r_p, fa_p = score(fr, peer(fr, netd))
                for a, b in zip(r_o, r_p):
                    ok_o, ok_p = passes(a, fa_o), passes(b, fa_p)
                    tally["ours"][0] += ok_o
                    tally["peer"][0] += ok_p
                    tally["ours"][1] += 1
                    tally["peer"][1] += 1
                    consistency.setdefault((name, a["defect"], netd), []).append((nc, a["n"], a["area_m2"]))
                    print(f"{name:13s} {a['defect']:22s} {a['kind']:8s} {nc:4d}x{nr:<4d} {netd:5.2f} | "
                          f"{a['n']:7d} {a['iou']:5.2f} {a['area_ratio']:5.2f} {fa_o:5.2f} {'Y' if ok_o else '-':>2s} | "
                          f"{b['n']:7d} {b['iou']:5.2f} {b['area_ratio']:5.2f} {fa_p:5.2f} {'Y' if ok_p else '-':>2s}",
                          flush=True)
    print(f"\npass (all targets per defect-frame): ours {tally['ours'][0]}/{tally['ours'][1]}, "
          f"peer {tally['peer'][0]}/{tally['peer'][1]}")
    if len(res) > 1:
        print("\nresolution consistency (ours): same count and areas within 10 % of their median")
        n_ok = 0
        for key, v in consistency.items():
            counts = {c for _, c, _ in v}
            areas = [a for _, _, a in v]
            med = statistics.median(areas)
            ok = len(counts) == 1 and med > 0 and max(abs(a / med - 1) for a in areas) <= 0.10
            n_ok += ok
            print(f"  {key[0]:13s} {key[1]:22s} NETD {key[2]:.2f}: counts {[c for _, c, _ in v]} "
                  f"areas m² {[round(a, 3) for a in areas]} {'ok' if ok else 'NO'}")
        print(f"  consistent: {n_ok}/{len(consistency)}")
    # timing at 640×480, one core
    fr = analytic_frame("fan", 640, 480, 0.05, 7)
    times = {"ours": [], "peer": []}
    for _ in range(7):
        for k, fn in (("ours", ours), ("peer", peer)):
            t0 = time.perf_counter()
            fn(fr, 0.05)
            times[k].append(time.perf_counter() - t0)
    fr2 = analytic_frame("fan", 1280, 1024, 0.05, 7)
    t_big = []
    for _ in range(3):
        t0 = time.perf_counter()
        ours(fr2, 0.05)
        t_big.append(time.perf_counter() - t0)
    print(f"\ntiming, one thread (load avg {os.getloadavg()[0]:.1f}): 640×480 ours min {min(times['ours']):.3f} s "
          f"median {statistics.median(times['ours']):.3f} s; peer min {min(times['peer']):.3f} s; "
          f"1280×1024 ours min {min(t_big):.3f} s")


if __name__ == "__main__":
    main()
