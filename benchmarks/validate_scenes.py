"""End-to-end validation table: physics scenes through the full irseg pipeline.

Usage::

    OMP_NUM_THREADS=1 python benchmarks/validate_scenes.py [--seeds 1] [--doc docs/validation.md]

Simulates the validation scenes of ``irseg.scenes._validation`` (they differ from the
sample survey), writes them with their sidecars to a temporary folder, runs
``irseg.pipeline.process_image`` on each and compares the reported anomalies with the
simulated truth. Prints the table and writes ``docs/validation.md``. With ``--seeds N``
each scene is repeated with N camera-noise seeds (table rows per seed).
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

from irseg import __version__
from irseg.io import write_text
from irseg.scenes._validation import (
    RESOLUTION_SERIES,
    TARGETS,
    VALIDATION_RECIPES,
    passes,
    resolution_consistency,
    scene_passes,
    validate_recipe,
    validate_sample,
    with_seed,
)

ROOT = Path(__file__).resolve().parents[1]


def _fmt(v, spec: str, pct: bool = False) -> str:
    if v is None:
        return "n/a"
    return f"{100 * v:+.1f} %" if pct else format(v, spec)


def _rows(results: list[dict]) -> list[list[str]]:
    rows = []
    for res in results:
        for d in res["defects"]:
            ok = passes(d) if d["checked"] else {}
            verdict = ("pass" if all(ok.values()) else "MISS: " + ", ".join(k for k, v in ok.items() if not v)) \
                if d["checked"] else ("not required" + ("" if "missing_insulation" not in d["causes"]
                                                        else "; WRONGLY missing_insulation"))
            excess_err = _fmt(d["excess_rel"], "", True) if d.get("excess_checked", True) else "(not compared)"
            rows.append([
                res["image"], str(res["camera"]["seed"]), d["name"], d.get("kind", "sharp"), d["cause"],
                ",".join(d["causes"]) or "(none)", str(d.get("n_found", "")),
                _fmt(d["iou"], ".3f"), f"{d['true_area_m2']:.3f}", _fmt(d["area_m2"], ".3f"),
                _fmt(d["area_rel"], "", True), f"{d['true_excess_w']:.2f} ({d['true_excess_footprint_w']:.2f})",
                _fmt(d["excess_w"], ".2f"), excess_err, f"{d['true_reference_c']:.2f}",
                _fmt(d["reference_c"], ".2f"), _fmt(d["reference_err_k"], "+.2f"), verdict,
            ])
    return rows


_HEAD = ["image", "seed", "defect", "truth", "true cause", "reported cause", "n", "IoU", "area m² true", "est.",
         "err", "excess W true (mask only)", "est.", "err", "ref °C true", "est.", "err K", "verdict"]


def _markdown_table(head: list[str], rows: list[list[str]]) -> str:
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    out += ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join(out)


def _settings(results: list[dict]) -> str:
    out = []
    seen = set()
    for res in results:
        if res["image"] in seen:
            continue
        seen.add(res["image"])
        s, c = res["simulation"], res["camera"]
        layers = ", ".join(f"{m} {1000 * t:.1f} mm ({n} cells)" for m, t, n in s["layers"])
        tr = s["transient"]
        strat = f"{s['stratification_k_m']} K/m" + (f" + {s['stratification_k_m2']} K/m²"
                                                        if s.get("stratification_k_m2") else "")
        cond = (f"inside {s['inside_c']} °C, outside {s['outside_c']:.2f} °C, wind {s['wind_m_s']} m/s, "
                f"stratification {strat}, ε {s['emissivity']}, outside exposure {s['outside_exposure']}")
        if s.get("relative_humidity") is not None:
            cond += f", inside relative humidity {s['relative_humidity']:.0%}"
        if tr:
            cond += (f"; transient from {tr['start_h']:g} h to {tr['end_h']:g} h, Δt {tr['dt_s']:g} s, solar peak "
                     f"{tr['solar_peak_w_m2']:g} W/m² × absorptance {tr['absorptance']}, air {tr['air_mean_c']} ± "
                     f"{tr['air_amplitude_k']} K, sky {tr['sky_depression_k']} K below air")
        out.append(
            f"- **{res['image']}** ({res['title']}; {res['format']}, {res['size'][1]}×{res['size'][0]} px, "
            f"pixel {1000 * res['pixel_m']:.2f} mm): {s['element']}; element {s['width_m']} × {s['height_m']} m, "
            f"cell {1000 * s['cell_m']:.0f} mm, grid {s['grid'][0]}×{s['grid'][1]}×{s['grid'][2]} (z×rows×cols); "
            f"layers {layers}. Conditions: {cond}. Viewed-face h {s['h_view_w_m2k']:.3f} W/m²K "
            f"(analysis used {res['h_w_m2k_analysis']:.3f}). Camera: HFOV {c['hfov_deg']}°, distance "
            f"{c['distance_m']} m, tilt {c['tilt_deg']}°, PSF σ {c['psf_sigma_px']} px, NETD {c['netd_k']} K, "
            f"column σ {c['column_sigma_k']} K, shading {c['shading']}, "
            f"dead pixels {c['dead_pixels']}, seed {c['seed']}."
            + "".join(f" Defect {d['name']}: {d['description']}." for d in res["defect_records"])
        )
    return "\n".join(out)


def _resolution_table(series: dict[str, list[dict]]) -> str:
    rows = []
    for stem, results in series.items():
        cons = resolution_consistency(results)
        sizes = " / ".join(f"{r['size'][1]}×{r['size'][0]}" for r in results)
        for name, d in cons["defects"].items():
            areas = " / ".join("n/a" if a is None else f"{a:.3f}" for a in d["areas_m2"])
            rows.append([stem, sizes, name, " / ".join(map(str, d["counts"])), areas,
                         " / ".join(map(str, cons["anomaly_counts"])), "pass" if d["ok"] else "MISS"])
    return _markdown_table(["scene", "frames", "defect", "anomalies on it", "area m²",
                            "anomalies of defect causes", "verdict"], rows)


def write_doc(path: Path, results: list[dict], seeds: int, seconds: float, series: dict[str, list[dict]],
              limits: list[dict]) -> None:
    rows = _rows(results)
    checked = [d for r in results for d in r["defects"] if d["checked"]]
    n_pass = sum(all(passes(d).values()) for d in checked)
    false_missing = sum(len(r["false_missing"]) for r in results)
    scene_ok = sum(all(scene_passes(r).values()) for r in results)
    n_consistent = sum(resolution_consistency(v)["ok"] for v in series.values())
    scenes = _markdown_table(
        ["image", "scene IoU (checked defects)", "false-alarm area / defect area",
         "structural features reported as missing insulation", "simulate s", "pipeline s"],
        [[f"{r['image']} (seed {r['camera']['seed']})", f"{r['scene_iou']:.3f}", f"{100 * r['false_alarm_rel']:.1f} %",
          str(len(r["false_missing"])), f"{r['seconds']['simulate']:.1f}", f"{r['seconds']['pipeline']:.2f}"]
         for r in results])
    text = f"""# Validation against physics scenes

This page is generated by `benchmarks/validate_scenes.py` (irseg {__version__}); re-run
`OMP_NUM_THREADS=1 python benchmarks/validate_scenes.py --seeds {seeds}` to reproduce it.
All figures are *estimates* of a synthetic test; real surveys carry the uncertainties of
emissivity, reflected temperature, surface coefficients and unsteady conditions, and findings
must be confirmed on site under local codes and licensed practice.

## What is compared

Each scene is an envelope element simulated by `irseg.scenes` (steady or transient 3-D
finite-volume conduction, surface heat exchange with ISO 6946 surface coefficients
h = h_c + ε·4σT_m³, stratified inside air — linear or not —, sky radiation outside) **with and
without** its defects. The camera model resamples the viewed face onto the detector grid, blurs
it, applies band-limited (7.5–14 µm) emissivity/reflection, lens shading (part of the signal
from the warmer camera housing toward the corners, about 1.2 K centre-to-corner where set), NETD
noise, a column pattern and dead pixels, and writes a radiometric file plus its TOML sidecar. The
file then goes through `irseg.pipeline.process_image` (read → metadata → calibrate → segment →
analyse).

What is physics and what is not:

- conduction defects (empty bays, settled fill with a soft top, insulation left at part of its
  depth, displaced insulation, wet insulation tapering toward its edge, damp brick and plaster):
  materials in the 3-D grid, solved;
- evaporation from a damp inside face: a heat sink at the face, the Chilton-Colburn (Lewis)
  mass-transfer analogy with the Magnus saturation pressure, at the surface temperature the face
  reaches (two fixed-point passes);
- the **cold-air fan** from a sill gap is an **analytic overlay of the air** next to the face (no
  flow is solved): the inside air is colder by `ΔT·exp(−d/0.5 m)` below the gap over a widening fan;
  the wall's response to that air is solved by conduction. Its excess heat is not compared: the
  heat an air leak carries is the air's, not a flow through the face.

Truth per defect: **sharp** defects (a plateau with a step edge: empty bays, boards, displaced
insulation, uniform wet areas) use the defect mask (pixels at least half covered) and its area on
the surface grid; **graded** and **diffuse** defects (partial-depth voids, soft fill tops, damp,
tapered wetness, the fan) use the region where their own noise-free simulated contrast (with minus
without the defects) holds half of its peak — the analysis' extent rule —, read with narrow
members (studs, joists: narrower than 0.12 m) taken out by a grey opening, within 0.15 m of the
cells the defect changes; its area on the camera grid. Excess heat = change of the viewed face's
heat flow with vs. without the defects, charged to the defect mask plus a 0.3 m rim (nearest
defect wins; for a damp face the heat the room gives it, latent heat included). Reference = the
no-defect surface temperature averaged over the truth region (for graded defects as the same
camera records it, lens shading included). Reported anomalies lying ≥ 50 % inside a truth region
are merged and compared with it. Structural features (studs, slab edges, lintels) are not required
to be found, but must never be reported as missing insulation.

Targets (issues 6 and 11): IoU ≥ {TARGETS['iou_min']} (sharp) / ≥ {TARGETS['iou_min_graded']} (graded, diffuse),
area within {100 * TARGETS['area_rel']:.0f} %, excess heat within {100 * TARGETS['excess_rel']:.0f} %, reference within
{TARGETS['reference_abs_k']} K, cause as simulated, exactly one anomaly per defect; per scene the area of anomalies
of the defect causes (missing insulation, moisture, air leakage) outside every defect at most
{100 * TARGETS['false_alarm_rel']:.0f} % of the defects' area; the same scene at 320×240, 640×480 and 1280×1024 gives the
same anomaly count and areas within {100 * TARGETS['resolution_area_rel']:.0f} % of their median.

## Results

{n_pass} of {len(checked)} checked defects meet every target; {scene_ok} of {len(results)} scenes keep their
false-alarm area within the target and report no structural feature as missing insulation
({false_missing} structural feature(s) reported as missing insulation in all); {n_consistent} of {len(series)} scenes
agree across the three resolutions. Run time {seconds:.0f} s on this machine (simulation + pipeline).

{scenes}

Per defect (errors are estimate − truth, relative for area and excess heat; n = anomalies matched):

{_markdown_table(_HEAD, rows)}

### The same scene at three resolutions

{_resolution_table(series)}

### The smallest contrast found

Measured here by bisection (to 1 mK) on synthetic 640×480 frames across 2.5 m (p = 3.9 mm): a flat
interior wall at 20 °C with 1 K/m of stratification, white noise of the NETD, a fixed column pattern
of 0.02 K, and a cold disk of the given area whose edge is blurred as by the optics (σ 0.8 px);
three noise seeds per case (`smallest_contrast` in `benchmarks/validate_scenes.py`). *Detector alone*:
`detect_regions` with no contrast floor finds a cold region lying at least half on the disk.
*Reported*: the whole analysis with its defaults (`process_array`) reports an anomaly there.

{_limit_table(limits)}

The white-noise limit (`1.11·5·NETD·p/√A`, docs/analysis.md §2.5) is what the camera noise alone
would allow. The detector needs more: the σ it uses at each scale is the measured spread of the
sound pixels (here the column pattern dominates at large scales), and a disk larger than the sound
length (0.2 m; 0.5 m² is 0.8 m across) is partly followed by the local sound surface, so a large
weak defect needs *more* contrast than a small one. What is reported is set by the smallest
contrast reported, `[analysis] min_contrast_k` (default 0.1 K): a little above it, because the
peak of a blurred disk is read after smoothing.

### What does not pass yet, and why

{_misses(results, series)}

Margins and what is not checked:

- **Insulation left at part of its depth in a ceiling (val6), excess heat** meets the 15 % target
  with little margin (the worst seed near −15 %). The truth's excess heat (defect mask + 0.3 m rim)
  is what the simulated contrast sums to within 0.3 m of the mask; the thermal region stops at 10 %
  of the anomaly's peak and at the sound length, which leaves 5–8 % of it out, and the joists the
  partial fill exposes put the reference 0.01–0.02 K too cold (4–6 % of the shallower fill's
  0.19 K contrast). The sound surface no longer sits in the fills: anomalies are held out of its
  last fitting pass with their soft tails and a 0.05 m margin (docs/analysis.md §2.1).
- **The same ceiling at 1280×1024** agrees with the other two frames in count and area (checked
  above), but its excess heat is about a quarter low (measured −23 and −25 %, not a target of the
  resolution series; the cause is not traced yet).

## Simulation settings

{_settings(results)}

Materials (λ W/m·K): plasterboard 0.25, gypsum plaster 0.70, mineral wool 0.035, softwood 0.13,
OSB 0.13, brick 0.77, EPS 0.036, PIR 0.022, render 1.4, concrete 2.3, bitumen 0.20; air layers
as ISO 6946 unventilated layers (R 0.18 horizontal / 0.16 upward m²K/W); wet insulation by the
ISO 10456 moisture factor exp(4ψ), wet brick and plaster exp(10ψ), with the water's heat capacity
added. The solver is checked against ISO 6946 U-values and surface temperatures in
`tests/scenes/test_conduction.py`.
"""
    kept = []
    if path.is_file():  # sections other scripts own (validate_construction.py, validate_pairs.py) stay as they are
        old = path.read_text(encoding="utf-8")
        for start, end in (("<!-- construction -->", "<!-- /construction -->"),
                           ("<!-- pairs:begin -->", "<!-- pairs:end -->")):
            if start in old and end in old:
                kept.append(old[old.index(start):old.index(end) + len(end)])
    write_text(path, text + "".join("\n" + k + "\n" for k in kept))


def _print_table(rows: list[list[str]]) -> None:
    widths = [max(len(h), *(len(r[i]) for r in rows)) for i, h in enumerate(_HEAD)]
    print("  ".join(h.ljust(w) for h, w in zip(_HEAD, widths)))
    for r in rows:
        print("  ".join(c.ljust(w) for c, w in zip(r, widths)))


def solver_benchmark(repeats: int = 3, *, with_lu: bool = False) -> list[tuple[str, float, float]]:
    """Median seconds to solve one steady timber-wall scene (14×120×160 cells) by three solvers.

    Peers, measured in the same run: scipy's conjugate gradients with a diagonal (Jacobi)
    preconditioner and, with ``with_lu``, scipy's sparse LU (``spsolve``, minutes on this
    grid; timed once), on the same assembled matrix and to the same relative residual
    (1e-10) as the project's multigrid-preconditioned CG.
    """
    import numpy as np
    import scipy.sparse as sp
    from scipy.sparse.linalg import cg, spsolve

    from irseg.scenes import Conditions, build_operator, face_conditions, missing_bay, rasterise, solve_steady
    from irseg.scenes import timber_frame_wall

    el = timber_frame_wall()
    k, _ = rasterise(el, (missing_bay(el, 1),))
    fc = face_conditions(el, Conditions(outside_exposure="ventilated"))
    op, g_in, g_out = build_operator(k, dx_m=el.cell_m, dy_m=el.cell_m, dz_m=el.dz_m(), h_inside=fc["h_in"],
                                     h_outside=fc["h_out"])
    rhs = np.zeros(op.shape)
    rhs[0] += g_in * fc["amb_in"]
    rhs[-1] += g_out * fc["amb_out"]
    a = op.to_sparse()
    b = rhs.ravel()
    x0 = np.full(b.size, float(rhs.sum() / op.gb.sum()))

    def timed(fn):
        times = []
        for _ in range(repeats):
            t0 = time.perf_counter()
            x = fn()
            times.append(time.perf_counter() - t0)
        return statistics.median(times), float(np.abs(a @ x.ravel() - b).max() / np.abs(b).max())

    mg = timed(lambda: solve_steady(op, rhs)[0])
    jac = sp.diags(1.0 / a.diagonal())
    pcg = timed(lambda: cg(a, b, x0=x0, rtol=1e-10, maxiter=20000, M=jac)[0])
    out = [("multigrid-preconditioned CG (irseg.scenes)", *mg), ("scipy cg + Jacobi preconditioner", *pcg)]
    if with_lu:
        repeats = 1
        out.append(("scipy spsolve (SuperLU)", *timed(lambda: spsolve(a.tocsc(), b))))
    return out


#: Frames of the smallest-contrast measurement: 640×480 px across 2.5 m (45° lens at 3.02 m, p = 3.9 mm).
LIMIT_WIDTH_M = 2.5
LIMIT_CASES = ((0.05, 0.05), (0.05, 0.5), (0.1, 0.05), (0.1, 0.5))  # (NETD K, area m²)


def _limit_frame(netd_k: float, area_m2: float, delta_k: float, seed: int):
    """A flat interior wall (20 °C, 1 K/m stratification) with a cold disk of ``area_m2`` and ``delta_k``,
    its edge blurred as by the optics (σ 0.8 px), white noise of ``netd_k`` and a column pattern of 0.02 K."""
    import numpy as np
    from scipy import ndimage

    m, n = 480, 640
    p = LIMIT_WIDTH_M / n
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:m, 0:n]
    disk = ((yy - m / 2) ** 2 + (xx - n / 2) ** 2) * p * p <= area_m2 / np.pi
    t = 20.0 - 1.0 * (yy - m / 2) * p - delta_k * ndimage.gaussian_filter(disk.astype(float), 0.8)
    t += rng.normal(0.0, netd_k, (m, n)) + rng.normal(0.0, 0.02, (1, n))
    return t, disk, p


def smallest_contrast(seeds: int = 3) -> list[dict]:
    """The smallest contrast found against NETD and area, measured by bisection on synthetic frames.

    For each (NETD, area) of :data:`LIMIT_CASES` and each seed: the smallest disk contrast (K) that the
    detector alone finds (``detect_regions`` with no contrast floor: a region of the right sign lying at
    least half on the disk), and that the whole analysis reports with its defaults (``process_array``:
    an anomaly of the right sign lying at least half on the disk). Returns one row per case with the
    medians over the seeds and the white-noise limit of the documented formula.
    """
    import math

    import numpy as np

    from irseg.analysis._scales import min_detectable_contrast_k
    from irseg.analysis._significance import detect_regions
    from irseg.pipeline import process_array

    hfov = 45.0
    meta = {"camera": {"hfov_deg": hfov, "distance_m": LIMIT_WIDTH_M / (2 * math.tan(math.radians(hfov / 2)))},
            "surface": {"view": "interior", "emissivity": 1.0, "reflected_c": 20.0},
            "air": {"inside_c": 20.0, "outside_c": 0.0}}

    def on_disk(labels, disk, ids) -> bool:
        return any((disk & (labels == i)).sum() >= 0.5 * (labels == i).sum() for i in ids)

    def detector(netd, area, dt, seed) -> bool:
        t, disk, p = _limit_frame(netd, area, dt, seed)
        labels, _, info = detect_regions(t, None, noise_k=netd, pixel_m=p, min_contrast_k=0.0)
        return on_disk(labels, disk, [r.label for r in info.regions if r.sign < 0])

    def reported(netd, area, dt, seed) -> bool:
        t, disk, _ = _limit_frame(netd, area, dt, seed)
        an = process_array(t, dict(meta, camera=dict(meta["camera"], netd_k=netd))).analysis
        return on_disk(np.asarray(an.labels), disk, [a.anomaly for a in an.anomalies if a.delta_k < 0])

    def bisect(found, netd, area, seed) -> float:
        lo, hi = 0.0, 0.4
        if not found(netd, area, hi, seed):
            return float("inf")
        for _ in range(9):  # to 0.4/512 ≈ 0.8 mK
            mid = 0.5 * (lo + hi)
            lo, hi = (lo, mid) if found(netd, area, mid, seed) else (mid, hi)
        return hi

    rows = []
    for netd, area in LIMIT_CASES:
        det = [bisect(detector, netd, area, 7000 + k) for k in range(seeds)]
        rep = [bisect(reported, netd, area, 7000 + k) for k in range(seeds)]
        rows.append({"netd_k": netd, "area_m2": area, "white_k": min_detectable_contrast_k(
            area_m2=area, netd_k=netd, pixel_m=LIMIT_WIDTH_M / 640), "detector_k": float(np.median(det)),
            "detector_range_k": (min(det), max(det)), "reported_k": float(np.median(rep)),
            "reported_range_k": (min(rep), max(rep))})
        print(f"smallest contrast NETD {netd} K, {area} m²: detector {det}, reported {rep}", file=sys.stderr)
    return rows


def _misses(results: list[dict], series: dict[str, list[dict]]) -> str:
    """One line per defect and seed that misses a target, and per scene that disagrees across resolutions."""
    out = []
    for res in results:
        for d in res["defects"]:
            if d["checked"]:
                bad = [k for k, v in passes(d).items() if not v]
                if bad:
                    out.append(f"{res['image']} seed {res['camera']['seed']}, {d['name']}: {', '.join(bad)}")
    for stem, rs in series.items():
        cons = resolution_consistency(rs)
        if not cons["ok"]:
            out.append(f"{stem} across 320×240 / 640×480 / 1280×1024: " + "; ".join(
                f"{name} areas {' / '.join('n/a' if a is None else f'{a:.3f}' for a in d['areas_m2'])} m²"
                for name, d in cons["defects"].items() if not d["ok"])
                + f" (anomalies of defect causes {' / '.join(map(str, cons['anomaly_counts']))})")
    return "\n".join(f"- {line}" for line in out) if out else "Every target is met."


def _limit_table(rows: list[dict]) -> str:
    return _markdown_table(
        ["NETD", "area", "white-noise limit (formula)", "detector alone (no floor), median [range]",
         "reported with the defaults, median [range]"],
        [[f"{r['netd_k']:g} K", f"{r['area_m2']:g} m²", f"{r['white_k']:.4f} K",
          f"{r['detector_k']:.3f} K [{r['detector_range_k'][0]:.3f}–{r['detector_range_k'][1]:.3f}]",
          f"{r['reported_k']:.3f} K [{r['reported_range_k'][0]:.3f}–{r['reported_range_k'][1]:.3f}]"]
         for r in rows])


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=1, help="camera-noise seeds per scene")
    ap.add_argument("--doc", type=Path, default=ROOT / "docs" / "validation.md",
                    help="Markdown page to write (default: docs/validation.md)")
    ap.add_argument("--solver", action="store_true", help="only time the conduction solver against scipy peers")
    ap.add_argument("--with-lu", action="store_true", help="with --solver: also time scipy spsolve (slow)")
    ap.add_argument("--sample", type=Path, default=None,
                    help="compare the pipeline with the truth of a sample-survey folder (no doc written)")
    args = ap.parse_args(argv)
    if args.sample is not None:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            results = validate_sample(args.sample)
        _print_table(_rows(results))
        return 0
    if args.solver:
        res = solver_benchmark(with_lu=args.with_lu)
        base = res[0][1]
        for name, sec, resid in res:
            print(f"{name:45s} median {sec:7.3f} s  ratio {sec / base:6.1f}  max rel. residual {resid:.1e}")
        return 0
    t0 = time.perf_counter()
    results = []
    series: dict[str, list[dict]] = {}
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in VALIDATION_RECIPES:
            for k in range(args.seeds):
                results.append(validate_recipe(with_seed(r, r.camera.seed + 1000 * k), tmp))
                print(f"done {r.stem} seed {r.camera.seed + 1000 * k}", file=sys.stderr)
        for stem, recipes in RESOLUTION_SERIES.items():
            series[stem] = [validate_recipe(r, tmp) for r in recipes]
            print(f"done {stem} at three resolutions", file=sys.stderr)
    seconds = time.perf_counter() - t0
    _print_table(_rows(results))
    for stem, res in series.items():
        print(stem, resolution_consistency(res))
    pipe = [r["seconds"]["pipeline"] for r in results]
    sim = [r["seconds"]["simulate"] for r in results]
    print(f"median seconds per scene: simulate {statistics.median(sim):.2f}, pipeline {statistics.median(pipe):.2f}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        limits = smallest_contrast(seeds=3)
    write_doc(args.doc, results, args.seeds, seconds, series, limits)
    print(f"wrote {args.doc}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
