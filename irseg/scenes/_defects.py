"""Defects of an envelope element: boxes of another material replacing the build-up.

Each constructor returns a :class:`Defect` whose ``cause`` is the class the analysis
should assign (``missing_insulation``, ``thermal_bridge``, ``moisture``).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

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
    "partial_fill",
    "settled_fill",
    "tapered_wet_patch",
    "rising_damp",
    "cold_air_fan",
    "TRUTH_KINDS",
]

#: How a defect's truth region is defined: ``sharp`` = the cells it changes (a plateau with a step
#: edge); ``graded`` and ``diffuse`` = where its own simulated contrast holds half of its peak.
TRUTH_KINDS = ("sharp", "graded", "diffuse")


@dataclass(frozen=True)
class Defect:
    """A defect: its cause (the class the analysis should assign) and its boxes.

    Attributes
    ----------
    truth_kind : {"sharp", "graded", "diffuse"}
        How its truth region is defined (:data:`TRUTH_KINDS`).
    region : (ny, nx) bool ndarray or None
        Its region on the surface grid when it changes no build-up (a cold-air fan).
    wet_surface : (ny, nx) ndarray or None
        Wet fraction of the viewed (inside) face, 0..1: evaporation draws latent heat there.
    air_change_k : (ny, nx) ndarray or None
        Change of the inside air temperature next to the face, K (a cold-air fan from a gap).
    face_c : (ny, nx) ndarray or None
        Temperature of an object in front of the viewed face (a radiator, a pipe), °C, NaN
        elsewhere: the camera sees it instead of the wall (:mod:`irseg.scenes._construction`).
    emissivity : (ny, nx) ndarray or None
        Emissivity of the viewed face where it differs from the scene's (glass), NaN elsewhere.
    """

    name: str
    cause: str
    blocks: tuple[Block, ...]
    description: str = ""
    truth_kind: str = "sharp"
    region: np.ndarray | None = field(default=None, compare=False, repr=False)
    wet_surface: np.ndarray | None = field(default=None, compare=False, repr=False)
    air_change_k: np.ndarray | None = field(default=None, compare=False, repr=False)
    face_c: np.ndarray | None = field(default=None, compare=False, repr=False)
    emissivity: np.ndarray | None = field(default=None, compare=False, repr=False)


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


def _grid(element: Element) -> tuple[np.ndarray, np.ndarray]:
    """Cell-centre coordinates (y column, x row) of the element's surface grid, m."""
    c = element.cell_m
    return (np.arange(element.ny) + 0.5)[:, None] * c, (np.arange(element.nx) + 0.5)[None, :] * c


def _smoothstep(v):
    v = np.clip(v, 0.0, 1.0)
    return v * v * (3.0 - 2.0 * v)


def _framing_plane(element: Element, z0: float, z1: float) -> np.ndarray:
    """Cells of framing members crossing the z-range (a void in the insulation leaves them in place)."""
    y, x = _grid(element)
    out = np.zeros((element.ny, element.nx), bool)
    for b in element.framing:
        if b.z0_m < z1 and b.z1_m > z0:
            out |= ((y >= b.y0_m) & (y < b.y1_m)) & ((x >= b.x0_m) & (x < b.x1_m))
    return out


def _depth_blocks(element: Element, depth: np.ndarray, z0: float, z1: float, heat_flow: str) -> tuple[Block, ...]:
    """Air blocks removing insulation from the outer side down to ``depth`` (m, per surface cell).

    One block per z-cell of the range, set where the void reaches at least half into that cell and
    no framing member crosses that cell (the members stay).
    """
    edges = element.z_edges_m()
    cells = [(a, b) for a, b in zip(edges[:-1], edges[1:]) if a >= z0 - 1e-9 and b <= z1 + 1e-9]
    blocks = []
    for a, b in cells:
        plane = (depth >= (z1 - 0.5 * (a + b)) - 1e-9) & ~_framing_plane(element, a, b)
        if plane.any():
            mat = air_layer(float(depth[plane].mean()), heat_flow)
            blocks.append(Block(mat, 0.0, element.width_m, 0.0, element.height_m, a, b, "mask", plane))
    return tuple(blocks)


def _insulated_range(element: Element) -> tuple[float, float]:
    """z-range from the main insulation layer to the end of the insulation layers that follow it."""
    z0, z1 = element.insulation
    zs = 0.0
    for layer in element.layers:
        a, zs = zs, zs + layer.thickness_m
        if a >= z1 - 1e-9 and layer.material in ("mineral_wool", "eps", "pir") and abs(a - z1) < 1e-9:
            z1 = zs
    return z0, z1


def partial_fill(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, remaining: float,
    name: str = "partial_fill",
) -> Defect:
    """Insulation left at a fraction ``remaining`` of its depth over a rectangle (the rest removed on the
    outer side; framing members stay), e.g. a loft insulated to a third of its depth in one place."""
    if not 0.0 < remaining < 1.0:
        raise ConfigError(f"remaining={remaining} must be a fraction of the depth in (0, 1)")
    z0, z1 = _insulated_range(element)
    y, x = _grid(element)
    inside = ((y >= y0_m) & (y < y1_m)) & ((x >= x0_m) & (x < x1_m))
    depth = np.where(inside, (1.0 - remaining) * (z1 - z0), 0.0)
    return Defect(name, "missing_insulation", _depth_blocks(element, depth, z0, z1, element.heat_flow),
                  f"insulation left at {remaining:.0%} of its depth", truth_kind="graded")


def settled_fill(
    element: Element, bay: int, *, void_m: float, soft_m: float, wave_m: float = 0.0, wave_period_m: float = 0.3,
    top_m: float = 0.0,
) -> Defect:
    """Loose fill settled in a bay, its top soft and uneven.

    Above the fill top (``top_m + void_m``, rising and falling by ``wave_m`` across the bay) the bay
    is empty; below it, over ``soft_m``, the fill thins out toward its top (the void reaches less
    and less deep from the outer side), as loose fill lies at its angle of repose.
    """
    a, b = _bay(element, bay)
    z0, z1 = element.insulation
    y, x = _grid(element)
    top = top_m + void_m + wave_m * np.sin(2.0 * np.pi * (x - a) / wave_period_m)
    frac = np.where(y < top, 1.0, 1.0 - np.clip((y - top) / max(soft_m, 1e-9), 0.0, 1.0))
    frac = np.where(y < top_m, 0.0, frac)
    inside = (x >= a) & (x < b)
    depth = np.where(inside, frac * (z1 - z0), 0.0)
    return Defect(f"settled_fill_{bay}", "missing_insulation", _depth_blocks(element, depth, z0, z1,
                                                                             element.heat_flow),
                  f"bay {bay}: fill settled {void_m * 1000:.0f} mm, soft top over {soft_m * 1000:.0f} mm",
                  truth_kind="graded")


def tapered_wet_patch(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, water_fraction: float = 0.15,
    rings: int = 4, name: str = "wet_insulation",
) -> Defect:
    """Wet insulation over an ellipse whose wetness tapers toward its edge.

    ``rings`` nested ellipses (the outer one the full size), water fraction rising from
    ``water_fraction/rings`` in the outer ring to ``water_fraction`` in the core.
    """
    z0, z1 = element.insulation
    ins = element.layers[1].material
    cx, cy = 0.5 * (x0_m + x1_m), 0.5 * (y0_m + y1_m)
    rx, ry = 0.5 * (x1_m - x0_m), 0.5 * (y1_m - y0_m)
    blocks = []
    for k in range(rings):
        f = 1.0 - 0.6 * k / rings  # the core keeps 40 % of the outer size
        blocks.append(Block(wet_material(ins, water_fraction * (k + 1) / rings), cx - f * rx, cx + f * rx,
                            cy - f * ry, cy + f * ry, z0, z1, "ellipse"))
    return Defect(name, "moisture", tuple(blocks),
                  f"wet {ins} tapering from {water_fraction:.0%} water to the edge", truth_kind="graded")


def rising_damp(
    element: Element, *, tide_m: float, wave_m: float = 0.06, soft_m: float = 0.12, water_fraction: float = 0.08,
    wet_surface: float = 0.3, x0_m: float = 0.0, x1_m: float | None = None, name: str = "rising_damp",
) -> Defect:
    """Damp masonry along the base of a wall: wet brick and plaster below a wavy tide line, evaporating.

    The tide line stands ``tide_m`` above the element's bottom edge and rises and falls by about
    ``wave_m`` (two incommensurate waves); the water content rises from zero at the tide line to
    ``water_fraction`` over ``soft_m`` below it (4 bands), and the inside face is wet over the same
    taper (``wet_surface`` at full wetness), so it evaporates into the room (latent heat).
    """
    y, x = _grid(element)
    x1 = element.width_m if x1_m is None else x1_m
    wave = wave_m * (np.sin(2 * np.pi * x / 0.55) + 0.5 * np.sin(2 * np.pi * x / 0.23 + 1.0)) / 1.5
    tide = element.height_m - tide_m - wave
    wet = np.clip((y - tide) / max(soft_m, 1e-9), 0.0, 1.0) * ((x >= x0_m) & (x < x1))
    blocks = []
    n_bands = 4
    for k in range(n_bands):
        plane = wet >= (k + 0.5) / n_bands - 1e-9
        if not plane.any():
            continue
        for i, layer in enumerate(element.layers[:2]):  # plaster and brick
            z = layer_z_m(element.layers, i)
            mat = wet_material(layer.material, water_fraction * (k + 1) / n_bands)
            blocks.append(Block(mat, 0.0, element.width_m, 0.0, element.height_m, z[0], z[1], "mask", plane))
    return Defect(name, "moisture", tuple(blocks),
                  f"rising damp, {water_fraction:.0%} water, tide line {tide_m:.2f} m up",
                  truth_kind="graded", wet_surface=wet_surface * wet)


def cold_air_fan(
    element: Element, *, x_m: float, y_m: float, width_m: float = 0.4, drop_k: float = 6.0, decay_m: float = 0.5,
    spread: float = 0.45, name: str = "cold_air_fan",
) -> Defect:
    """Cold outside air falling along the inside face from a gap (a sill or skirting joint).

    An analytic overlay of the *air* (no flow is solved): next to the face the inside air is
    colder by ``drop_k·exp(−d/decay)`` at ``d`` below the gap, over a fan whose half-width grows from
    ``width_m/2`` by ``spread`` per metre, with soft sides. The wall's response (the surface
    temperature) is the 3-D conduction of the scene.
    """
    y, x = _grid(element)
    d = np.clip(y - y_m, 0.0, None)
    half = 0.5 * width_m + spread * d
    lateral = _smoothstep((half - np.abs(x - x_m)) / (0.5 * half))
    top = _smoothstep((y - (y_m - 0.03)) / 0.03)
    change = -drop_k * np.exp(-d / decay_m) * lateral * top
    region = change <= -0.1 * drop_k
    return Defect(name, "air_leakage", (), f"cold air falling from a gap, {drop_k:.0f} K below the room at the gap",
                  truth_kind="diffuse", region=region, air_change_k=change)
