"""One-image export with its sidecar and truth, and the bundled sample survey.

The sample survey is set at an invented building, "the Larchfield test house": a
two-storey timber-frame house with a rear extension of solid brick (external EPS
and render) under a warm flat roof. Everything is seeded, so remaking it gives
byte-identical files.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy import ndimage

from irseg.io import write_text
from irseg.io import write_exact_json, write_npz
from irseg.scenes._camera import CameraModel, Shot, shoot, view_window
from irseg.scenes._export import encode_values, write_image, write_toml
from irseg.scenes._presets import make_preset
from irseg.scenes._scene import Scene, truth_in_window

__all__ = ["ImageRecipe", "SAMPLE_RECIPES", "render_recipe", "export_image", "make_sample_survey",
           "write_truth_json", "graded_region", "GRADED_FRACTION"]

# Camera settings shared by the whole sample survey (survey.toml).
_SURVEY_DEFAULTS = {
    "camera": {"band_um": (7.5, 14.0), "netd_k": 0.05},
    "surface": {"emissivity": 0.9},
    "analysis": {"degree_days": 3000.0},
}


@dataclass(frozen=True)
class ImageRecipe:
    """Everything needed to make one image: scene, camera, file encoding."""

    stem: str
    title: str
    preset: str
    options: dict
    camera: CameraModel
    fmt: str
    units: str = "celsius"
    scale: float = 1.0
    offset: float = 0.0
    delimiter: str = ","
    decimal: str = "."
    export_emissivity: float = 1.0
    extra_meta: dict = field(default_factory=dict)


# --------------------------------------------------------------------------- export


#: A graded defect's truth region: half of its own peak contrast (the rule the analysis documents).
GRADED_FRACTION = 0.5
_GRADED_REACH_M = 0.15  # looked for this far around the cells the defect changes
MEMBER_WIDTH_M = 0.12  # narrower structures (studs, joists) are members, not part of a graded defect


def _without_members(c: np.ndarray, pixel_m: float) -> np.ndarray:
    """``c`` with structures narrower than :data:`MEMBER_WIDTH_M` taken out (grey opening with a disk),
    on a copy reduced so that the disk keeps about 8 px across; never above ``c``."""
    across = MEMBER_WIDTH_M / pixel_m
    f = max(1, int(across // 8))
    m, n = c.shape
    mb, nb = m // f, n // f
    if mb < 3 or nb < 3:
        return c.copy()
    small = c[: mb * f, : nb * f].reshape(mb, f, nb, f).mean(axis=(1, 3))
    r = max(1, int(round(0.5 * across / f)))
    yy, xx = np.mgrid[-r:r + 1, -r:r + 1]
    opened = ndimage.grey_opening(small, footprint=(yy**2 + xx**2) <= r * r, mode="nearest")
    up = ndimage.zoom(opened, (m / mb, n / nb), order=1, mode="nearest")[:m, :n]
    full = np.empty_like(c)
    full[: up.shape[0], : up.shape[1]] = up
    full[up.shape[0]:, :] = full[up.shape[0] - 1: up.shape[0], :] if up.shape[0] < m else full[up.shape[0]:, :]
    full[:, up.shape[1]:] = full[:, up.shape[1] - 1: up.shape[1]] if up.shape[1] < n else full[:, up.shape[1]:]
    return np.minimum(full, c)


def graded_region(contrast: np.ndarray, mask: np.ndarray, pixel_m: float) -> np.ndarray:
    """Where a graded or diffuse defect's noise-free contrast holds half of its own peak.

    ``contrast`` is the simulated surface temperature with minus without the defects (camera
    grid, no noise), ``mask`` the pixels whose build-up (or air) the defect changes. Both the peak
    and the region are read on the contrast with its narrow members taken out (a grey opening with
    a disk :data:`MEMBER_WIDTH_M` across: a stud or joist the defect exposes or runs past is a
    line of its own, neither the defect's peak nor a change of its outline): the peak is the 99th
    percentile over the mask; the region is where the contrast holds half of the peak, read on
    long members (lines standing a quarter of the peak out of the opened contrast, at least three
    disk widths long, with their flanks: half a disk width) on the opened contrast, within 0.15 m of the mask, its parts that touch
    the mask.
    """
    if not mask.any():
        return mask.copy()
    sign = 1.0 if float(np.median(contrast[mask])) >= 0 else -1.0
    c = sign * contrast
    broad = _without_members(c, pixel_m)
    reach = max(1, int(round(_GRADED_REACH_M / pixel_m)))
    near = ndimage.binary_dilation(mask, iterations=reach)
    peak = float(np.percentile(broad[mask], 99))
    lines, k = ndimage.label(c - broad >= 0.5 * GRADED_FRACTION * peak)
    long = np.zeros(k + 1, bool)
    for i, sl in enumerate(ndimage.find_objects(lines), start=1):
        long[i] = max(sl[0].stop - sl[0].start, sl[1].stop - sl[1].start) * pixel_m >= 3.0 * MEMBER_WIDTH_M
    long[0] = False
    on_member = ndimage.binary_dilation(long[lines], iterations=max(1, int(round(0.5 * MEMBER_WIDTH_M / pixel_m))))
    half = near & (np.where(on_member, broad, c) >= GRADED_FRACTION * peak)
    lab, _ = ndimage.label(half)
    keep = np.unique(lab[half & mask])
    return np.isin(lab, keep[keep > 0])


def render_recipe(recipe: ImageRecipe) -> tuple[Scene, Shot]:
    """Simulate and image one recipe (no files written)."""
    scene = make_preset(recipe.preset, name=recipe.stem, **recipe.options)
    return scene, shoot(scene, recipe.camera)


def _sidecar(recipe: ImageRecipe, scene: Scene, shot: Shot) -> dict:
    cam = recipe.camera
    cond = scene.conditions
    integer = recipe.fmt in ("tiff-u16", "png16")
    camera = {"hfov_deg": cam.hfov_deg, "distance_m": cam.distance_m, "tilt_deg": cam.tilt_deg,
              "units": recipe.units, "netd_k": cam.netd_k}
    if integer:
        camera.update(scale=recipe.scale, offset=recipe.offset)
    if recipe.export_emissivity != 1.0:
        camera.update(export_emissivity=recipe.export_emissivity, export_reflected_c=round(shot.reflected_c, 2))
    surface = {"emissivity": cond.emissivity, "reflected_c": round(shot.reflected_c, 2), "view": scene.view,
               "heat_flow": scene.element.heat_flow}
    air = {"inside_c": cond.inside_c, "outside_c": round(float(scene.settings["outside_c"]), 2),
           "wind_m_s": cond.wind_m_s}
    out = {"camera": camera, "surface": surface, "air": air}
    for sec, keys in recipe.extra_meta.items():
        out.setdefault(sec, {}).update(keys)
    return out


def export_image(recipe: ImageRecipe, directory: str | os.PathLike[str], *, sidecar: bool = True) -> dict:
    """Simulate, image and write one recipe (image + ``<stem>.toml``); returns its truth record.

    Returns
    -------
    dict
        JSON-ready truth: defects in view (area, excess W, reference °C, mask pixels),
        camera geometry, energy balance and simulation settings. The key ``"_masks"``
        holds the (k, M, N) camera-grid defect masks (not JSON).
    """
    scene, shot = render_recipe(recipe)
    d = Path(directory)
    refl = round(shot.reflected_c, 2)
    vals = encode_values(shot.apparent_c, units=recipe.units, export_emissivity=recipe.export_emissivity,
                         export_reflected_c=refl, band_um=recipe.camera.band_um)
    path = write_image(d, recipe.stem, vals, fmt=recipe.fmt, scale=recipe.scale, offset=recipe.offset,
                       delimiter=recipe.delimiter, decimal=recipe.decimal)
    meta = _sidecar(recipe, scene, shot)
    if sidecar:
        write_toml(d / f"{recipe.stem}.toml", meta, header=f"{recipe.title}\nSynthetic image made by irseg.scenes.")
    x0, x1, y0, y1 = view_window(scene.element, recipe.camera)
    tw = truth_in_window(scene, x0_m=x0, x1_m=x1, y0_m=y0, y1_m=y1)
    names = [t.name for t in scene.truth]
    masks = shot.defect_masks.copy()
    px_area = shot.pixel_m ** 2 / float(np.cos(np.radians(recipe.camera.tilt_deg))) * scene.area_scale
    defects = []
    for t in tw:
        k = names.index(t.name)
        kind = scene.defects[k].truth_kind
        area, reference, mean = t.area_m2, t.reference_c, t.mean_c
        if kind != "sharp":
            # graded or diffuse: the truth region is where its own simulated contrast holds half its peak
            masks[k] = graded_region(shot.object_c - shot.baseline_c, shot.defect_masks[k], shot.pixel_m)
            area = float(masks[k].sum()) * px_area if shot.area_map is None else \
                float(shot.area_map[masks[k]].sum()) * px_area / scene.area_scale
            # the sound surface as this camera records it: the lens shading is the frame's, not the defect's
            shade = 0.0 if shot.shading_k is None else shot.shading_k[masks[k]] / scene.conditions.emissivity
            reference = float((shot.baseline_c[masks[k]] + shade).mean())
            mean = float((shot.object_c[masks[k]] + shade).mean())
        fp = masks[k]
        rows, cols = np.nonzero(fp)
        row = {
            "name": t.name, "cause": t.cause, "description": t.description,
            "area_m2": round(area, 4), "excess_w": round(t.excess_w, 3),
            "excess_footprint_w": round(t.excess_footprint_w, 3),
            "reference_c": round(reference, 3), "mean_c": round(mean, 3),
            "delta_k": round(mean - reference, 3), "area_px": int(fp.sum()), "mask_index": k,
            "bbox": [int(rows.min()), int(cols.min()), int(rows.max()) + 1, int(cols.max()) + 1] if fp.any() else None,
        }
        if kind != "sharp":  # only then, so the truth files of sharp scenes stay as they were
            row["kind"] = kind
        defects.append(row)
    return {
        "image": path.name, "title": recipe.title, "view": scene.view, "format": recipe.fmt,
        "size": [int(shot.apparent_c.shape[0]), int(shot.apparent_c.shape[1])],
        "pixel_m": round(shot.pixel_m, 6), "view_window_m": [round(v, 4) for v in (x0, x1, y0, y1)],
        "camera": {"hfov_deg": recipe.camera.hfov_deg, "distance_m": recipe.camera.distance_m,
                   "tilt_deg": recipe.camera.tilt_deg, "psf_sigma_px": recipe.camera.psf_sigma_px,
                   "netd_k": recipe.camera.netd_k, "column_sigma_k": recipe.camera.column_sigma_k,
                   "shading": recipe.camera.shading, "dead_pixels": recipe.camera.dead_pixels,
                   "seed": recipe.camera.seed},
        "metadata": meta, "defects": defects,
        "energy_balance": {k: (None if v is None else round(v, 6) if k != "relative_imbalance"
                               else float(f"{v:.3g}")) for k, v in scene.balance.items()},
        "simulation": scene.settings,
        "_masks": masks,
        "_scene": scene, "_shot": shot,
    }


# --------------------------------------------------------------------------- the sample survey


SAMPLE_RECIPES: tuple[ImageRecipe, ...] = (
    ImageRecipe("lf01_lounge_north_wall", "Lounge, north wall from inside: studs at 600 mm, one empty bay",
                "timber-wall", {"defects": ("bay:1",), "outside_c": 1.0},
                CameraModel(hfov_deg=45.0, distance_m=2.6, centre_m=(1.2, 0.9), seed=101, dead_pixels=3),
                "tiff-float"),
    ImageRecipe("lf02_bedroom1_west_wall", "Bedroom 1, west wall from inside: studs at 400 mm, settled fill",
                "timber-wall", {"spacing_m": 0.4, "defects": ("settled:2:0.30", "void:1.43:1.79:1.05:1.5:0.098"),
                                "outside_c": 1.0},
                CameraModel(hfov_deg=45.0, distance_m=2.6, centre_m=(1.2, 0.9), seed=102), "png16",
                scale=0.01, offset=-50.0),
    ImageRecipe("lf03_landing_wall", "Landing wall from inside: timber header and a half-empty bay",
                "timber-wall", {"defects": ("bay:3:0.9",), "lintel": (0.0, 1.2, 0.3, 0.195), "outside_c": 1.0},
                CameraModel(n_cols=160, n_rows=120, hfov_deg=45.0, distance_m=2.6, centre_m=(1.2, 0.9), seed=103,
                            psf_sigma_px=0.7), "csv", delimiter=";", decimal=","),
    ImageRecipe("lf04_bedroom2_ceiling", "Bedroom 2 ceiling below the loft: insulation pushed aside",
                "ceiling", {"outside_c": 1.0, "patch": (1.32, 1.95, 0.6, 1.2)},
                CameraModel(hfov_deg=45.0, distance_m=2.4, centre_m=(1.2, 0.9), seed=104), "npy"),
    ImageRecipe("lf05_extension_east_wall", "Rear extension, east wall from outside: slab edge and a missing board",
                "masonry-wall", {"slab_y": 1.9, "patch": (0.9, 1.7, 0.7, 1.3), "outside_c": 1.0, "wind_m_s": 1.5},
                CameraModel(hfov_deg=45.0, distance_m=4.4, centre_m=(2.0, 1.5), seed=105, dead_pixels=2), "tiff-u16",
                units="kelvin", scale=0.01, offset=0.0),
    ImageRecipe("lf06_extension_south_wall", "Rear extension, south wall from outside: window lintel, thin boards",
                "masonry-wall", {"lintel": (1.1, 2.9, 0.6, 0.2), "void": (2.6, 3.4, 1.5, 2.3, 0.075),
                                 "outside_c": 1.0, "wind_m_s": 1.5},
                CameraModel(n_cols=160, n_rows=120, hfov_deg=45.0, distance_m=4.4, centre_m=(2.0, 1.5), seed=106,
                            psf_sigma_px=0.7), "csv", export_emissivity=0.95),
    ImageRecipe("lf07_extension_roof_west", "Extension flat roof, west half, 22:00 after a sunny day: wet boards",
                "flat-roof", {"wet": ((1.0, 2.4, 0.8, 1.9, 0.15),)},
                CameraModel(hfov_deg=45.0, distance_m=3.5, tilt_deg=30.0, centre_m=(2.0, 1.5), seed=107), "tiff-float",
                units="kelvin"),
    ImageRecipe("lf08_extension_roof_east", "Extension flat roof, east half, 22:00: two damp patches",
                "flat-roof", {"wet": ((0.8, 1.8, 0.9, 1.7, 0.10), (2.5, 3.1, 1.6, 2.2, 0.25))},
                CameraModel(hfov_deg=45.0, distance_m=4.4, centre_m=(2.0, 1.5), seed=108), "png16",
                scale=0.005, offset=-60.0),
)


def make_sample_survey(directory: str | os.PathLike[str], *, recipes: tuple[ImageRecipe, ...] = SAMPLE_RECIPES,
                       on_image=None) -> list[dict]:
    """Write the sample survey (images, ``survey.toml``, sidecars, ``truth.json``, ``truth_masks.npz``).

    Parameters
    ----------
    directory : path-like
        Output folder (created).
    recipes : tuple of ImageRecipe
    on_image : callable, optional
        ``on_image(stem)`` after each image (progress).

    Returns
    -------
    list of dict
        The truth records (as written to ``truth.json``).
    """
    d = Path(directory)
    write_toml(d / "survey.toml", _SURVEY_DEFAULTS,
               header="The Larchfield test house (invented): survey defaults.\n"
                      "Each image's <stem>.toml overrides these key by key.")
    records, masks = [], {}
    for r in recipes:
        rec = export_image(r, d)
        masks[r.stem] = rec.pop("_masks")
        rec.pop("_scene"), rec.pop("_shot")
        records.append(rec)
        if on_image is not None:
            on_image(r.stem)
    payload = {"building": "the Larchfield test house (invented)", "images": records,
               "notes": "Synthetic truth from irseg.scenes; excess_w is the change in heat flow through the "
                        "viewed face, charged to each defect's footprint plus a 0.3 m rim."}
    write_truth_json(d / "truth.json", payload)
    write_text(d / "README.md", _readme(records))
    write_npz(d / "truth_masks.npz", {stem: np.asarray(m, bool) for stem, m in masks.items()})
    if recipes is SAMPLE_RECIPES:  # the pair under a pressure difference (irseg.scenes._pairs; issue 16)
        from irseg.scenes._pairs import export_sample_pair

        pair = export_sample_pair(d)
        if on_image is not None:
            on_image(str(pair["reference"]))
            on_image(Path(str(pair["image"])).stem)
    return records


_README_HEAD = """# Sample survey: the Larchfield test house (invented)

Synthetic thermograms of an invented building, made by irseg's physics scene maker. The
Larchfield test house is a two-storey timber-frame house (plasterboard, mineral wool between
softwood studs, OSB sheathing, ventilated cladding) with a rear extension of 215 mm solid brick
with 100 mm external EPS and render, under a warm flat roof (concrete deck, EPS boards, bitumen
membrane). The survey was "taken" on a winter night: inside 20 °C, outside about 1 °C; the roof
images at 22:00 after a clear sunny day. No real place, person or product is depicted.

Remake these files (byte-identical, seeded) with

    irseg scene sample sample_images        # or: python -m irseg.scenes sample_images

Run the analysis on them with

    irseg segment sample_images -o survey_out    # then open survey_out/report.html

`survey.toml` holds the survey-wide defaults; each `<image>.toml` sidecar gives that image's
camera geometry, encoding (scale/offset/units, export emissivity), surface and air data.
`truth.json` is the simulated truth for every image; `truth_masks.npz` holds one boolean
array (defects × rows × columns) of camera-grid footprints per image stem.

Truth definitions: *area* = defect footprint within the view (m²); *excess W* = change of
the heat flow through the viewed face caused by the defects, charged to the footprint plus a
0.3 m rim; *reference* = the no-defect surface temperature averaged over the footprint;
*ΔT* = mean surface temperature over the footprint minus the reference. These are the figures
the analysis estimates from the image; like the analysis, they are *estimates* of a model,
and real findings must be confirmed on site under local codes and licensed practice.

| image | format | view | defect | cause | area m² | excess W | reference °C | ΔT K |
|---|---|---|---|---|---|---|---|---|
"""


def _readme(records: list[dict]) -> str:
    rows = []
    for r in records:
        for d in r["defects"]:
            rows.append(f"| {r['image']} | {r['format']} | {r['view']} | {d['description']} | {d['cause']} | "
                        f"{d['area_m2']:.3f} | {d['excess_w']:.1f} | {d['reference_c']:.2f} | {d['delta_k']:+.2f} |")
    titles = "\n".join(f"- `{r['image']}`: {r['title']}." for r in records)
    return _README_HEAD + "\n".join(rows) + "\n\nImages:\n\n" + titles + "\n" + _README_PAIR


_README_PAIR = """
A pair under a pressure difference (an airtightness test; see docs/pairs.md):

- `lf10_lounge_east_wall_0pa.tiff`: Lounge, east wall from inside at ambient pressure: studs at
  600 mm, a double-glazed window, a bay without its batt, ceiling junction and skirting.
- `lf11_lounge_east_wall_50pa.tiff`: the same view after 15 minutes with the house depressurised
  by 50 Pa, the tripod moved a little; its sidecar's `[pressure]` section names lf10 as the
  reference. Cold air enters at the skirting board, the window frame, a socket and the ceiling
  junction. `pair_truth.json` holds the true camera move and leaks, `pair_truth_masks.npz` each
  leak's cooled footprint (where its own cooling holds 30 % of its peak).

The analysis reports the leaks as air_leakage rows of lf11 (with `pressure_pa`, `cooling_k`,
`cooling_max_k`), writes `lf11_lounge_east_wall_50pa/difference.png` and `pair_labels.png`, and
counts the defects both shots show once, with lf10.
"""


def write_truth_json(path: str | os.PathLike[str], record: dict) -> Path:
    """Write a truth record as sorted, indented JSON (keys starting with ``_`` are left out)."""
    clean = {k: v for k, v in record.items() if not k.startswith("_")}
    return write_exact_json(path, clean, indent=1)
