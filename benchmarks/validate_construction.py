"""Construction in the picture (issue 12): linear thermal bridges, framing, windows and heat emitters.

Usage::

    OMP_NUM_THREADS=1 python benchmarks/validate_construction.py [--doc docs/validation.md] [--sample DIR]

Simulates the construction scenes of ``irseg.scenes._construction_validation`` (a radiator beside
an empty bay, a pipe riser beside settled fill, a window seen from inside and from outside, a slab edge and a lintel
from outside, a floor junction from inside, studs at 400 and 600 mm, an external corner seen from inside at 45°,
alone and beside cold air from a gap, a wall/flat-roof junction seen from inside at 45°), runs the full pipeline on
each (a scene with emitters once more without them) and compares with the simulated truth. With
``--sample`` it also measures ψ of the sample survey's thermal bridges against its truth files.
Prints the tables; with ``--doc`` replaces the construction section of that file (between its
``<!-- construction -->`` markers, appended when missing).
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

from irseg import __version__
from irseg.io import write_text
from irseg.scenes._construction_validation import (
    CONSTRUCTION_RECIPES,
    CONSTRUCTION_TARGETS,
    bridge_rows,
    construction_passes,
    validate_construction,
)

START, END = "<!-- construction -->", "<!-- /construction -->"


def _f(v, spec: str = ".3f", pct: bool = False) -> str:
    if v is None:
        return "n/a"
    return f"{100 * v:+.1f} %" if pct else format(v, spec)


def _sample_rows(folder: Path) -> list[list[str]]:
    from irseg.pipeline import process_image

    truth = json.loads((folder / "truth.json").read_text(encoding="utf-8"))
    masks = np.load(folder / "truth_masks.npz")
    rows = []
    for rec in truth["images"]:
        if not any(d["cause"] == "thermal_bridge" for d in rec["defects"]):
            continue
        res = process_image(folder / rec["image"])
        rec = dict(rec, _masks=masks[Path(rec["image"]).stem])
        for b in bridge_rows(res.analysis, rec):
            rows.append([rec["image"], b["name"], f"{b['length_true_m']:.2f}", _f(b["length_m"], ".2f"),
                         _f(b["length_found"], ".2f"), _f(b["psi_true_w_mk"]), _f(b["psi_w_mk"]),
                         _f(b["psi_rel"], pct=True)])
    return rows


def _table(header: list[str], rows: list[list[str]]) -> list[str]:
    return ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)] + ["| " + " | ".join(r) + " |" for r in rows]


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--doc", type=Path, default=None, help="replace the construction section of this Markdown file")
    ap.add_argument("--sample", type=Path, default=None, help="a sample survey folder (with truth.json) to measure")
    args = ap.parse_args(argv)
    results = []
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for r in CONSTRUCTION_RECIPES:
            results.append((r, validate_construction(r, tmp)))
    seconds = time.perf_counter() - t0
    target_rows, defect_rows, bridge_table, beside_rows = [], [], [], []
    for r, res in results:
        ok = construction_passes(res)
        target_rows.append([res["image"], r.title, ", ".join(k for k, v in ok.items() if v) or "-",
                            ", ".join(k for k, v in ok.items() if not v) or "none"])
        for d in res["defects"]:
            defect_rows.append([res["image"], d["name"], d["cause"], ",".join(d["causes"]) or "(none)",
                                _f(d["iou"]), _f(d["area_rel"], pct=True), _f(d["excess_rel"], pct=True),
                                _f(d["reference_err_k"], "+.2f")])
        for b in res["bridges"]:
            bridge_table.append([res["image"], b["name"], f"{b['length_true_m']:.2f}", _f(b["length_m"], ".2f"),
                                 _f(b["length_found"], ".2f"), _f(b["psi_true_w_mk"]), _f(b["psi_w_mk"]),
                                 ", ".join(f"{lo:.3f}-{hi:.3f}" for lo, hi in b["psi_band"]) or "n/a",
                                 _f(b["psi_rel"], pct=True)])
        for b in res["beside"]:
            beside_rows.append([res["image"], b["name"], _f(b["delta_k_plain"], "+.2f"), _f(b["delta_k"], "+.2f"),
                                _f(b["excess_w_plain"], ".2f"), _f(b["excess_w"], ".2f")])
    lines = [
        START, "", "## Construction in the picture (issue 12)", "",
        f"irseg {__version__}; `python benchmarks/validate_construction.py` ({seconds:.0f} s on this machine). "
        "Scenes of `irseg.scenes._construction_validation`, through `irseg.pipeline.process_image`. Targets: "
        f"the real defects keep the targets above; no window, radiator, pipe, slab edge, lintel, floor or roof junction "
        "reported as missing_insulation, moisture or air_leakage; slab edges, lintels and junctions found as "
        f"thermal_bridge over at least {CONSTRUCTION_TARGETS['bridge_length_min']:.0%} of their length with ψ "
        f"within {CONSTRUCTION_TARGETS['psi_rel']:.0%} of the simulated ψ; framing one anomaly per image (every "
        "thermal bridge not on a simulated bridge counts); a defect beside a radiator keeps ΔT and heat within "
        f"{CONSTRUCTION_TARGETS['beside_emitter_rel']:.0%} of the same scene without it. The simulated ψ is the excess heat through the viewed face with and "
        "without the bridge (windows and emitters present in both runs), charged to the bridge (its cells and a "
        "0.3 m rim), per metre of its length in view and per kelvin of inside-outside difference. "
        "External corners (con6, con7): the 2-D steady conduction of the corner's horizontal section "
        "(`irseg.scenes._corner`; the solver reproduces ISO 10211's test reference cases 1 and 2) gives the "
        "inside surface temperatures and ψ_i (internal dimensions, ISO 14683), added to the 3-D simulation of "
        "the unfolded faces; the camera on the corner's bisector sees both faces at 45° (sidecar "
        "`tilt_deg = 45`), the corner line vertical and not foreshortened; con6 through a pinhole 2.6 m from "
        "the corner (perspective: the faces at the frame's sides nearer and seen more squarely, a pixel there "
        "covering 0.35 of the surface it covers at the corner, which the analysis is not told; the truth counted "
        "over the surface), con7 orthographically. The simulated ψ is the corner's "
        "extra heat through both inside faces over the plane wall, per metre of corner in view (rows × pixel "
        "side) and per kelvin of air difference; it must be a thermal_bridge whose reason says \"geometric "
        "thermal bridge\", never missing_insulation, moisture or air_leakage. The wall/flat-roof junction (con8, "
        "`irseg.scenes._junction`) is solved the same way in its vertical section (the brick + EPS wall under a "
        "150 mm concrete deck with 150 mm EPS, each inside face with its own surface coefficient: the wall's for "
        "horizontal, the soffit's for upward heat flow), the camera on its bisector seeing the wall and the "
        "ceiling at 45°, the junction line horizontal. A lintel directly over a window head (con3) is looked "
        "for from the window (docs/analysis.md §3.2).", "",
        "### Targets per scene", "",
        *_table(["image", "scene", "met", "missed"], target_rows), "",
        "### Linear thermal bridges: length and ψ", "",
        *_table(["image", "bridge", "length in view m", "length measured m", "share found", "ψ simulated W/(m·K)",
                 "ψ measured", "ψ band (5-95 %)", "ψ error"], bridge_table), "",
        "### Every truth item", "",
        *_table(["image", "item", "truth cause", "found as", "IoU", "area err", "excess err", "reference err K"],
                defect_rows), "",
        "### A defect beside heat emitters (same scene without them)", "",
        *_table(["image", "defect", "ΔT without K", "ΔT with K", "heat without W", "heat with W"], beside_rows), "",
    ]
    if args.sample is not None:
        lines += ["### Sample survey: ψ of its thermal bridges", "",
                  *_table(["image", "bridge", "length in view m", "length measured m", "share found",
                           "ψ simulated W/(m·K)", "ψ measured", "ψ error"], _sample_rows(args.sample)), ""]
    lines += [
        "### What this version does not reach yet", "",
        "- **ψ of the header crossed by studs (con1)** is now within target (+18 %): the cross-profile is",
        "  read position by position along the header, so where a stud crosses it the stud is its own plane",
        "  wall. On one side the wall keeps warming slowly over the whole 0.3 m read, so the profile is",
        "  read about 0.13 m to each side (as far as the other side meets the sound level); the +18 % left",
        "  is not traced further.",
        "- **The stud at the radiator's edge (con1)** comes out beside the radiator as a piece about",
        "  200 mm wide (the member and the radiator's blurred edge) read as air leakage; below the",
        "  radiator the two studs are the image's one framing summary.",
        "- **The lintel directly over the window head (con3)** is found from the window over its whole",
        "  length with ψ 20 % low (20, 24 and 30 % low on three other camera-noise seeds: at the edge of",
        "  the target). Its ψ is read in the flanks beyond the jambs (0.15 m each), where the lintel's band",
        "  fades toward its ends; over the head part of its extra heat shows on the window's frame (the",
        "  truth charges a 0.3 m rim that reaches into the window) and cannot be told from the window's own.",
        "- **Cold air beside a corner (con7)**: the fan 1.6 m along one face from the corner, its side 0.30 m",
        "  from the frame's right edge, is found as air leakage with IoU 0.93, its area 7 % small and its",
        "  reference 0.05 K cold (IoU 0.85, 15 % small and 0.09 K cold before the fix below). Its faint halo",
        "  runs out of the frame at the bottom and right edges. The second sound surface leaves the",
        "  significant area out, so no rejected block was left there to seed the halo beside it as a",
        "  held-out tail: the halo came back into the fit and, with the right edge's decay (unconfirmed",
        "  once the halo is held out), put the surface 0.09 K into the fan. Now the blocks bordering the",
        "  left-out area seed the tails where they exceed one scale within three decay lengths of an edge",
        "  whose decay is in use, and an edge decay the held-out blocks leave unconfirmed is switched off",
        "  (docs/analysis.md §2.1). The 7 % left is the halo at the frame edge, which cannot be told from",
        "  the sound wall there.",
        "- **ψ of the wall/flat-roof junction (con8)** is now within target (14.5 % low): the view is",
        "  declared upward (a ceiling), so the face above the junction line is read with the soffit's",
        "  surface coefficient (upward heat flow, R_si 0.10 m²K/W) and the wall below with a wall's",
        "  (horizontal, R_si 0.13; docs/analysis.md §3.4); with the wall's on both faces it was 31.5 % low",
        "  (the soffit carries about 80 % of the extra heat). The 14.5 % left is the reading of the planes:",
        "  the ceiling's contrast sums 16 % low (0.014 K of tail left at the 0.6 m read's end, 0.85 m along",
        "  the soffit, taken as its plane: 6 %; beyond it about 1 %), the wall's 19 % (the stratification's",
        "  slope, fitted over the side's outer half, takes in the last of the tail). A read that goes on",
        "  until the side has returned to its plane would not extend here: the frame cuts the ceiling at",
        "  0.98 m and the wall's tail hides in the stratification's slope.",
        "- **Corners in perspective**: con6 is rendered through a pinhole 2.6 m from the corner (1.08 m of",
        "  each face in view, 1.52 m orthographically; a pixel at the frame's sides covers 0.35 of the",
        "  surface it covers at the corner), its truth counted over the surface: its ψ comes within 1 %",
        "  (7.7 % low orthographically, whose truth also counts faces beyond a pinhole's frame); irseg's one",
        "  pixel size per image would give an area defect at the frame's sides up to 2.8× too large",
        "  (docs/analysis.md §3.4). con7 and con8 stay orthographic: con7's fan, 1.6 m along its face,",
        "  lies outside a pinhole's 45° frame on the bisector (2.0 m off the axis; the frame's half-width is",
        "  1.08 m). Moved to 1.0 m from the corner, the nearest such a frame holds with the corner, the fan",
        "  comes out with IoU 0.50 and 30 % too large in perspective (IoU 0.80 and 20 % small",
        "  orthographically, the corner then not named geometric): not a validation scene of this version.",
        "  3-D corners (two walls and a ceiling) are not simulated.",
        "- **A pipe's own row (con5)** reads \"(none)\": its truth region is the pipe with the air it warms,",
        "  and the heat source found on it lies mostly on the pipe; it is never a defect, and the defect",
        "  beside it keeps its figures.",
        "",
    ]
    lines.append(END)
    text = "\n".join(lines) + "\n"
    print(text)
    if args.doc is not None:
        old = args.doc.read_text(encoding="utf-8") if args.doc.exists() else ""
        if START in old and END in old:
            new = old[:old.index(START)] + text + old[old.index(END) + len(END) + 1:]
        else:
            new = old.rstrip("\n") + "\n\n" + text
        write_text(args.doc, new)
        print(f"wrote {args.doc}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
