"""Defects of an envelope element: boxes of another material replacing the build-up.

Each constructor returns a :class:`Defect` whose ``cause`` is the class the analysis
should assign (``missing_insulation``, ``thermal_bridge``, ``moisture``).
"""

from __future__ import annotations

from dataclasses import dataclass

from irseg.errors import ConfigError
from irseg.scenes._elements import Block, Element, layer_z_m
from irseg.scenes._materials import MATERIALS, air_layer, wet_material

__all__ = [
    "Defect",
    "missing_bay",
    "settled_insulation",
    "partial_void",
    "missing_patch",
    "slab_edge",
    "lintel",
    "wet_patch",
]


@dataclass(frozen=True)
class Defect:
    """A defect: its cause (the class the analysis should assign) and its boxes."""

    name: str
    cause: str
    blocks: tuple[Block, ...]
    description: str = ""


def _bay(element: Element, bay: int) -> tuple[float, float]:
    if not element.bays:
        raise ConfigError(f"{element.kind} has no framing bays; use missing_patch for a rectangle")
    if not 0 <= bay < len(element.bays):
        raise ConfigError(f"bay {bay} does not exist; {element.kind} has bays 0..{len(element.bays) - 1}")
    return element.bays[bay]


def missing_bay(element: Element, bay: int, *, y0_m: float = 0.0, y1_m: float | None = None) -> Defect:
    """A framing bay (or part of its height) with no insulation: an air cavity."""
    a, b = _bay(element, bay)
    z0, z1 = element.insulation
    y1 = element.height_m if y1_m is None else y1_m
    mat = air_layer(z1 - z0, element.heat_flow)
    return Defect(f"missing_bay_{bay}", "missing_insulation", (Block(mat, a, b, y0_m, y1, z0, z1),),
                  f"bay {bay}: insulation missing")


def settled_insulation(element: Element, bay: int, *, void_m: float, top_m: float = 0.0) -> Defect:
    """Loose fill settled in a bay: an empty strip ``void_m`` high below ``top_m``."""
    a, b = _bay(element, bay)
    z0, z1 = element.insulation
    mat = air_layer(z1 - z0, element.heat_flow)
    return Defect(f"settled_bay_{bay}", "missing_insulation",
                  (Block(mat, a, b, top_m, top_m + void_m, z0, z1),),
                  f"bay {bay}: fill settled, {void_m * 1000:.0f} mm void at the top")


def partial_void(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, depth_m: float,
    side: str = "outside", name: str = "partial_void",
) -> Defect:
    """Insulation missing over part of its depth (``side`` of the insulation layer)."""
    z0, z1 = element.insulation
    if not 0 < depth_m <= z1 - z0:
        raise ConfigError(f"partial void depth_m={depth_m} must be in (0, {z1 - z0:.3f}] m")
    zz = (z1 - depth_m, z1) if side == "outside" else (z0, z0 + depth_m)
    mat = air_layer(depth_m, element.heat_flow)
    return Defect(name, "missing_insulation", (Block(mat, x0_m, x1_m, y0_m, y1_m, *zz),),
                  f"{depth_m * 1000:.0f} mm deep void on the {side} of the insulation")


def missing_patch(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, name: str = "missing_patch"
) -> Defect:
    """Insulation boards missing over a rectangle (an air gap of the layer's depth)."""
    z0, z1 = element.insulation
    mat = air_layer(z1 - z0, element.heat_flow)
    return Defect(name, "missing_insulation", (Block(mat, x0_m, x1_m, y0_m, y1_m, z0, z1),),
                  "insulation boards missing")


def slab_edge(element: Element, *, y0_m: float, height_m: float = 0.2, edge_insulation_m: float = 0.04) -> Defect:
    """Floor slab edge through the brick leaf, its nose reaching into the insulation layer.

    Only ``edge_insulation_m`` of insulation covers the slab nose (thin edge strip).
    """
    if element.kind != "masonry_wall":
        raise ConfigError("slab_edge needs a masonry_wall element")
    zb = layer_z_m(element.layers, 1)
    z0, z1 = element.insulation
    conc = MATERIALS["concrete"]
    y1 = y0_m + height_m
    return Defect("slab_edge", "thermal_bridge", (
        Block(conc, 0.0, element.width_m, y0_m, y1, zb[0], zb[1]),
        Block(conc, 0.0, element.width_m, y0_m, y1, z0, z1 - edge_insulation_m),
    ), "floor slab edge with a thin insulation strip")


def lintel(element: Element, *, x0_m: float, x1_m: float, y0_m: float, height_m: float = 0.2) -> Defect:
    """A lintel: concrete through the brick (masonry) or a solid timber header (timber frame)."""
    if element.kind == "masonry_wall":
        z = layer_z_m(element.layers, 1)
        mat = MATERIALS["concrete"]
        zi = element.insulation
        blocks = (Block(mat, x0_m, x1_m, y0_m, y0_m + height_m, *z),
                  Block(mat, x0_m, x1_m, y0_m, y0_m + height_m, zi[0], zi[0] + 0.5 * (zi[1] - zi[0])))
        text = "concrete lintel, insulation thinned over it"
    else:
        blocks = (Block(MATERIALS["softwood"], x0_m, x1_m, y0_m, y0_m + height_m, *element.insulation),)
        text = "solid timber header"
    return Defect("lintel", "thermal_bridge", blocks, text)


def wet_patch(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, water_fraction: float = 0.15,
    name: str = "wet_insulation",
) -> Defect:
    """Wet insulation over an elliptical area (full depth of the insulation layer)."""
    z0, z1 = element.insulation
    ins = element.layers[1].material
    return Defect(name, "moisture", (Block(wet_material(ins, water_fraction), x0_m, x1_m, y0_m, y1_m, z0, z1,
                                           "ellipse"),), f"wet {ins}, {water_fraction:.0%} water by volume")
