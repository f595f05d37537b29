"""Physics-based synthetic thermography scenes and the bundled sample survey.

- envelope materials, elements and defects (``timber_frame_wall``, ``masonry_wall``,
  ``flat_roof``, ``missing_bay``, ...) rasterised onto a cell grid, soft and graded ones too
  (``partial_fill``, ``settled_fill``, ``tapered_wet_patch``, ``rising_damp`` with evaporation,
  and ``cold_air_fan``, an analytic overlay of the air next to the face);
- steady and transient 3-D finite-volume conduction with convective-radiative surface
  coefficients on both faces (``simulate_scene`` runs each scene with and without its
  defects to get the truth);
- a camera model (``CameraModel``, ``shoot``) and the export of its images in every input
  format irseg reads (the encoders and atomic writers belong to the I/O layer);
- the sample survey of the invented Larchfield test house (``make_sample_survey``).

The package computes (physics, camera, truth) and leaves every file to :mod:`irseg.io`.
Run ``irseg scene sample OUT`` (or ``python -m irseg.scenes OUT``) to remake the sample
survey, ``irseg scene make KIND OUT`` for one scene.
"""

from __future__ import annotations

from irseg.scenes._camera import CameraModel, Shot, pixel_footprint_m, shoot, view_window
from irseg.scenes._conduction import build_operator, solve_steady, solve_transient, surface_fields
from irseg.scenes._defects import (
    TRUTH_KINDS,
    Defect,
    cold_air_fan,
    lintel,
    missing_bay,
    missing_patch,
    partial_fill,
    partial_void,
    rising_damp,
    settled_fill,
    settled_insulation,
    slab_edge,
    tapered_wet_patch,
    wet_patch,
)
from irseg.scenes._elements import (
    Block,
    Element,
    Layer,
    flat_roof,
    masonry_wall,
    solid_wall,
    timber_ceiling,
    timber_frame_wall,
)
from irseg.scenes._export import FORMATS, encode_values, write_image, write_toml
from irseg.scenes._materials import MATERIALS, Material, air_layer, wet_material
from irseg.scenes._physics import (
    Conditions,
    NightSchedule,
    evaporation_w_m2,
    h_convective_exterior,
    h_convective_interior,
    h_radiative,
    saturation_pressure_pa,
)
from irseg.scenes._presets import PRESETS, make_preset
from irseg.scenes._raster import defect_mask, rasterise
from irseg.scenes._scene import DefectTruth, Scene, face_conditions, simulate_scene, truth_in_window
from irseg.scenes._survey import (
    SAMPLE_RECIPES,
    ImageRecipe,
    export_image,
    make_sample_survey,
    render_recipe,
    write_truth_json,
)

__all__ = [
    "MATERIALS", "Material", "air_layer", "wet_material",
    "Layer", "Block", "Element", "timber_frame_wall", "timber_ceiling", "masonry_wall", "flat_roof", "solid_wall",
    "Defect", "missing_bay", "settled_insulation", "partial_void", "missing_patch", "slab_edge", "lintel",
    "wet_patch", "partial_fill", "settled_fill", "tapered_wet_patch", "rising_damp", "cold_air_fan", "TRUTH_KINDS",
    "defect_mask", "rasterise",
    "build_operator", "solve_steady", "solve_transient", "surface_fields",
    "Conditions", "NightSchedule", "h_radiative", "h_convective_interior", "h_convective_exterior",
    "saturation_pressure_pa", "evaporation_w_m2",
    "DefectTruth", "Scene", "simulate_scene", "face_conditions", "truth_in_window",
    "CameraModel", "Shot", "shoot", "pixel_footprint_m", "view_window",
    "FORMATS", "encode_values", "write_image", "write_toml",
    "ImageRecipe", "SAMPLE_RECIPES", "PRESETS", "make_preset", "render_recipe", "export_image",
    "make_sample_survey", "write_truth_json",
]
