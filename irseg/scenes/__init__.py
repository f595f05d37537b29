"""Physics-based synthetic thermography scenes and the bundled sample survey.

- envelope elements and defects (``timber_frame_wall``, ``masonry_wall``, ``flat_roof``, ...);
- steady and transient 3-D finite-volume conduction with Robin surface conditions
  (``simulate_scene`` runs each scene with and without its defects to get the truth);
- a camera model (``CameraModel``, ``shoot``) and writers for every input format irseg reads;
- the sample survey of the invented Larchfield test house (``make_sample_survey``).

Run ``python -m irseg.scenes OUT`` (or ``irseg scene sample OUT``) to remake the sample survey.
"""

from __future__ import annotations

from irseg.scenes._camera import CameraModel, Shot, pixel_footprint_m, shoot, view_window
from irseg.scenes._conduction import build_operator, solve_steady, solve_transient, surface_fields
from irseg.scenes._elements import (
    MATERIALS,
    Block,
    Defect,
    Element,
    Layer,
    Material,
    air_layer,
    flat_roof,
    footprint,
    lintel,
    masonry_wall,
    missing_bay,
    missing_patch,
    partial_void,
    rasterise,
    settled_insulation,
    slab_edge,
    timber_ceiling,
    timber_frame_wall,
    wet_material,
    wet_patch,
)
from irseg.scenes._export import FORMATS, encode_values, toml_text, write_image, write_toml
from irseg.scenes._physics import Conditions, NightSchedule, h_convective_inside, h_convective_outside, h_radiative
from irseg.scenes._scene import DefectTruth, Scene, face_conditions, simulate_scene, truth_in_window
from irseg.scenes._survey import (
    PRESETS,
    SAMPLE_RECIPES,
    ImageRecipe,
    export_image,
    make_preset,
    make_sample_survey,
    render_recipe,
    write_truth_json,
)

__all__ = [
    "MATERIALS", "Material", "Layer", "Block", "Defect", "Element",
    "air_layer", "wet_material", "timber_frame_wall", "timber_ceiling", "masonry_wall", "flat_roof",
    "missing_bay", "settled_insulation", "partial_void", "missing_patch", "slab_edge", "lintel", "wet_patch",
    "footprint", "rasterise",
    "build_operator", "solve_steady", "solve_transient", "surface_fields",
    "Conditions", "NightSchedule", "h_radiative", "h_convective_inside", "h_convective_outside",
    "DefectTruth", "Scene", "simulate_scene", "face_conditions", "truth_in_window",
    "CameraModel", "Shot", "shoot", "pixel_footprint_m", "view_window",
    "FORMATS", "encode_values", "write_image", "write_toml", "toml_text",
    "ImageRecipe", "SAMPLE_RECIPES", "PRESETS", "make_preset", "render_recipe", "export_image",
    "make_sample_survey", "write_truth_json",
]
