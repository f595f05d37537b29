"""Validation of construction in the picture (issue 12): bridges measured, framing summarised,
windows and heat emitters never defects.

Each scene combines construction with real defects and goes through the full pipeline
(:func:`irseg.scenes._validation.validate_recipe`). Per scene:

- the real defects keep the targets of :data:`irseg.scenes._validation.TARGETS` (IoU, area,
  excess heat, reference, cause, one anomaly);
- no window, radiator, pipe, slab edge, lintel or floor junction is reported as
  ``missing_insulation``, ``moisture`` or ``air_leakage`` (an anomaly lying mostly on it has none
  of those causes), and no framing member is reported as missing insulation;
- slab edges, lintels and floor junctions are found as ``thermal_bridge`` over at least 80 % of
  their length in view, with ψ within 25 % of the simulated ψ (excess heat with and without the
  bridge charged to it, per metre seen and per kelvin);
- framing one anomaly per image (every thermal bridge that is not on a truth bridge counts);
- a scene with a radiator or a pipe is also run without it: the defect beside it keeps its ΔT and
  excess heat within 5 %;
- an external wall corner seen from inside (:mod:`irseg.scenes._corner`: 2-D conduction of its
  section, a camera on its bisector at 45° to both faces) is a ``thermal_bridge`` whose reason names
  a geometric bridge (corner or junction), found over at least 80 % of its length, with ψ within
  25 % of the section's ψ_i. The corner line is vertical in the image and not foreshortened, so its
  length is rows × pixel side; the sidecar gives ``tilt_deg = 45`` (the angle between the line of
  sight and both faces' normals), so a pixel's area ``p²/cos 45°`` is the surface it sees at the
  corner line (everywhere in an orthographic projection: con7, and the wall/roof junction con8;
  con6 is rendered by a pinhole on the bisector, where the faces toward the frame's sides are
  nearer and seen more squarely, which the analysis is not told).
"""

from __future__ import annotations

import os
from dataclasses import replace

import numpy as np

from irseg.scenes._camera import CameraModel
from irseg.scenes._construction import truth_psi
from irseg.scenes._corner import CORNER_NAME, CORNER_VIEW_DEG, picture_u_m
from irseg.scenes._junction import JUNCTION_NAME
from irseg.scenes._survey import ImageRecipe
from irseg.scenes._validation import TARGETS, passes, validate_recipe

__all__ = ["CONSTRUCTION_RECIPES", "CONSTRUCTION_TARGETS", "validate_construction", "construction_passes",
           "bridge_rows", "GEOMETRIC_WORDS"]

#: Issue 12 targets: bridge length found, ψ against the simulation, the defect beside a radiator.
CONSTRUCTION_TARGETS = {"bridge_length_min": 0.80, "psi_rel": 0.25, "beside_emitter_rel": 0.05,
                        "framing_summaries_max": 1}

_DEFECT_CAUSES = ("missing_insulation", "moisture", "air_leakage")
#: A geometric bridge's reason names it so (checked for the corner truth items; the words of
#: irseg.analysis._classify.GEOMETRIC_REASON, repeated: the truth side does not import the analysis).
GEOMETRIC_WORDS = ("geometric thermal bridge",)
_CORNER_META = {"camera": {"tilt_deg": CORNER_VIEW_DEG}}  # the camera sees both faces at 45° to their normal
_BRIDGE_REACH_M = 0.10  # a bridge's anomaly may reach this far beyond its changed cells (the rim)


def _cam(**kw) -> CameraModel:
    return CameraModel(hfov_deg=45.0, **kw)


CONSTRUCTION_RECIPES: tuple[ImageRecipe, ...] = (
    ImageRecipe("con1_timber600_radiator", "timber wall, studs 600 mm: empty bay, radiator, timber header",
                "timber-wall", {"defects": ("bay:1",), "lintel": (1.53, 2.4, 0.27, 0.195), "inside_c": 21.0,
                                "outside_c": 1.0, "construction": ("radiator:1.55:2.2:1.15:1.6",)},
                _cam(distance_m=2.6, centre_m=(1.2, 0.9), seed=401), "tiff-float"),
    ImageRecipe("con2_timber400_window", "timber wall, studs 400 mm: settled fill, window", "timber-wall",
                {"spacing_m": 0.4, "defects": ("settled:3:0.25",), "inside_c": 20.0, "outside_c": 0.0,
                 "construction": ("window:0.3:0.95:0.45:1.25",)},
                _cam(distance_m=2.6, centre_m=(1.2, 0.9), seed=402), "tiff-float"),
    ImageRecipe("con3_facade_bridges", "brick + EPS wall from outside: slab edge, lintel over a window, missing boards",
                "masonry-wall", {"slab_y": 2.0, "lintel": (1.85, 3.35, 0.35, 0.2), "patch": (0.35, 1.15, 0.7, 1.4),
                                 "construction": ("window:2.0:3.2:0.6:1.65",), "inside_c": 20.0, "outside_c": 0.0,
                                 "wind_m_s": 1.5},
                _cam(distance_m=4.4, centre_m=(2.0, 1.5), seed=403), "tiff-float"),
    ImageRecipe("con5_timber600_pipe", "timber wall, studs 600 mm: heating pipe riser, settled fill",
                "timber-wall", {"defects": ("settled:3:0.3",), "inside_c": 20.0, "outside_c": 0.0,
                                "construction": ("pipe:1.2:0.0:1.8",)},
                _cam(distance_m=2.6, centre_m=(1.2, 0.9), seed=405), "tiff-float"),
    ImageRecipe("con4_floor_junction", "plastered brick + EPS wall from inside: floor junction, cold air from a sill",
                "masonry-wall", {"view": "interior", "slab_y": 2.2, "fan": (1.2, 0.75, 0.5, 6.0), "inside_c": 20.0,
                                 "outside_c": -1.0, "stratification_k_m2": 0.3},
                _cam(distance_m=4.4, centre_m=(2.0, 1.5), seed=404), "tiff-float"),
    ImageRecipe("con6_external_corner", "brick + EPS external corner from inside, camera at 45° to both faces, "
                "in perspective", "wall-corner", {"inside_c": 20.0, "outside_c": 0.0, "perspective_m": 2.6,
                                                 "view_y_m": 1.5},
                _cam(distance_m=2.6, centre_m=(picture_u_m(2.0, 2.6), 1.5), seed=406), "tiff-float",
                extra_meta=_CORNER_META),
    ImageRecipe("con7_corner_cold_air", "external corner from inside with cold air falling from a skirting gap "
                "1.6 m along one face", "wall-corner", {"inside_c": 21.0, "outside_c": -2.0, "width_m": 5.0,
                                                      "fan": (3.6, 1.2, 0.5, 6.0)},
                _cam(distance_m=2.6, centre_m=(2.0 * 0.5 ** 0.5 + 0.55, 1.5), seed=407), "tiff-float",
                extra_meta=_CORNER_META),
    ImageRecipe("con8_wall_roof_junction", "brick + EPS wall under a warm flat roof from inside, camera at 45° to "
                "the wall and the ceiling", "wall-roof-junction", {"inside_c": 21.0, "outside_c": -1.0, "wind_m_s": 2.0},
                _cam(distance_m=2.6, centre_m=(1.7, 1.8 * 0.5 ** 0.5 + 0.1), seed=408), "tiff-float",
                extra_meta=_CORNER_META),
)


def _length_px(mask: np.ndarray) -> tuple[np.ndarray, int]:
    """The mask's positions along its long axis (columns or rows holding it) and their count."""
    cols = np.flatnonzero(mask.any(axis=0))
    rows = np.flatnonzero(mask.any(axis=1))
    return (cols, 1) if cols.size >= rows.size else (rows, 0)


def bridge_rows(analysis, rec: dict) -> list[dict]:
    """Per linear bridge of the truth (cause ``thermal_bridge``): length found, ψ measured and simulated."""
    from scipy import ndimage

    labels = np.asarray(analysis.labels)
    pixel_m = float(rec["pixel_m"])
    sim = rec["simulation"]
    delta_air = float(sim["inside_c"]) - float(sim["outside_c"])
    bridges = {a.anomaly for a in analysis.anomalies if a.cause == "thermal_bridge"}
    by_id = {a.anomaly: a for a in analysis.anomalies}
    out = []
    for d in rec["defects"]:
        if d["cause"] != "thermal_bridge":
            continue
        fp = np.asarray(rec["_masks"][d["mask_index"]], bool)
        near = ndimage.binary_dilation(fp, iterations=max(1, int(round(_BRIDGE_REACH_M / pixel_m))))
        along, axis = _length_px(fp)
        on_bridge = np.isin(labels, list(bridges)) & near
        covered = on_bridge.any(axis=1 - axis) if axis == 1 else on_bridge.any(axis=1)
        found = float(covered[along].mean()) if along.size else 0.0
        ids = [i for i in bridges if (near & (labels == i)).sum() >= 0.5 * (labels == i).sum()]
        length_true = along.size * pixel_m
        psi_true = truth_psi(float(d["excess_w"]), length_true, delta_air)
        hits = [by_id[i] for i in ids if by_id[i].excess_w is not None and by_id[i].length_m]
        psi = (sum(a.excess_w for a in hits) / (sum(a.length_m for a in hits) * delta_air)) if hits else None
        out.append({
            "name": d["name"], "length_true_m": length_true, "length_found": found,
            "length_m": sum(by_id[i].length_m or 0.0 for i in ids) if ids else None,
            "psi_true_w_mk": psi_true, "psi_w_mk": psi,
            "psi_band": [(a.psi_low_w_mk, a.psi_high_w_mk) for a in hits],
            "psi_rel": None if psi is None or not psi_true else (psi - psi_true) / psi_true,
            "anomalies": sorted(ids),
            "geometric": d["name"] in (CORNER_NAME, JUNCTION_NAME),
            "named": bool(ids) and all(any(w in by_id[i].reason for w in GEOMETRIC_WORDS) for i in ids),
        })
    return out


def _without_emitters(recipe: ImageRecipe) -> ImageRecipe:
    kept = tuple(c for c in recipe.options.get("construction", ()) if not c.startswith(("radiator", "pipe")))
    return replace(recipe, stem=recipe.stem + "_plain", options={**recipe.options, "construction": kept})


def validate_construction(recipe: ImageRecipe, directory: str | os.PathLike[str]) -> dict:
    """Run one construction scene (and, with a radiator or pipe, the same scene without it).

    Returns
    -------
    dict
        :func:`irseg.scenes._validation.validate_recipe`'s figures plus ``bridges``
        (:func:`bridge_rows`), ``construction`` (per window/emitter: the causes found on it),
        ``framing_summaries`` (count) and, with emitters, ``beside`` (per checked defect: ΔT and
        excess heat relative to the scene without them).
    """
    keep: dict = {}
    res = validate_recipe(recipe, directory, keep=keep)
    analysis, rec = keep["analysis"], keep["record"]
    res["bridges"] = bridge_rows(analysis, rec)
    res["construction"] = [{"name": r["name"], "causes": r["causes"]} for r in res["defects"]
                           if r["cause"] == "unclassified"]
    res["framing_summaries"] = sum(1 for a in analysis.anomalies if "summarised as one anomaly" in a.reason)
    on_bridges = {i for b in res["bridges"] for i in b["anomalies"]}
    # framing members are every other thermal bridge: one anomaly per image when summarised
    res["framing_anomalies"] = sorted(a.anomaly for a in analysis.anomalies
                                      if a.cause == "thermal_bridge" and a.anomaly not in on_bridges)
    res["beside"] = []
    if any(c.startswith(("radiator", "pipe")) for c in recipe.options.get("construction", ())):
        plain = validate_recipe(_without_emitters(recipe), directory)
        for row in res["defects"]:
            if not row["checked"]:
                continue
            other = next(r for r in plain["defects"] if r["name"] == row["name"])
            res["beside"].append({
                "name": row["name"],
                "delta_k": _delta_of(res, row), "delta_k_plain": _delta_of(plain, other),
                "excess_w": row["excess_w"], "excess_w_plain": other["excess_w"],
            })
    return res


def _delta_of(result: dict, row: dict) -> float | None:
    found = [a for a in result["anomalies"] if a["id"] in row["anomalies"]]
    if not found:
        return None
    return float(np.mean([a["delta_k"] for a in found]))


def _rel(a: float | None, b: float | None) -> float | None:
    return None if a is None or b is None or b == 0 else (a - b) / abs(b)


def construction_passes(result: dict) -> dict[str, bool]:
    """Issue 12 targets of one scene (module docstring), by name."""
    t = CONSTRUCTION_TARGETS
    out = {
        "defects": all(all(passes(r).values()) for r in result["defects"] if r["checked"]),
        "construction not a defect": all(not set(r["causes"]) & set(_DEFECT_CAUSES)
                                         for r in result["defects"] if not r["checked"]),
        "framing not missing insulation": result["false_missing"] == [],
        "framing one anomaly": len(result["framing_anomalies"]) <= t["framing_summaries_max"],
    }
    for b in result["bridges"]:
        out[f"{b['name']} length"] = b["length_found"] >= t["bridge_length_min"]
        out[f"{b['name']} psi"] = b["psi_rel"] is not None and abs(b["psi_rel"]) <= t["psi_rel"]
        if b.get("geometric"):
            out[f"{b['name']} named geometric"] = b["named"]
    for b in result["beside"]:
        for key in ("delta_k", "excess_w"):
            rel = _rel(b[key], b[f"{key}_plain"])
            out[f"{b['name']} {key} beside emitters"] = rel is not None and abs(rel) <= t["beside_emitter_rel"]
    return out
