"""Envelope elements: layer build-ups plus framing, as material boxes on a cell grid.

Geometry is in metres on the surface plane as seen from the viewed side: ``x`` to
the right, ``y`` downwards from the top edge (image rows), ``z`` through the
thickness from the *inside* face. Everything is snapped to the cell grid when it
is rasterised, and the snapped geometry is what the truth reports.

Materials are in :mod:`irseg.scenes._materials`, defects in :mod:`irseg.scenes._defects`,
the conductivity and heat-capacity fields in :mod:`irseg.scenes._raster`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from irseg.scenes._materials import MATERIALS, Material

__all__ = [
    "Layer",
    "Block",
    "Element",
    "layer_z_m",
    "timber_frame_wall",
    "timber_ceiling",
    "masonry_wall",
    "flat_roof",
    "solid_wall",
]


@dataclass(frozen=True)
class Layer:
    """One layer of the build-up, inside to outside."""

    material: str
    thickness_m: float
    cells: int


@dataclass(frozen=True)
class Block:
    """A box of one material replacing whatever the build-up has there.

    ``shape`` is ``"rect"``, ``"ellipse"`` (inscribed in the box, in plane) or ``"mask"``:
    the cells where ``plane`` (a (ny, nx) bool array on the element's surface grid) is set,
    for outlines no box describes (a wavy tide line, a fill top).
    """

    material: Material
    x0_m: float
    x1_m: float
    y0_m: float
    y1_m: float
    z0_m: float
    z1_m: float
    shape: str = "rect"
    plane: np.ndarray | None = field(default=None, compare=False, repr=False)


@dataclass(frozen=True)
class Element:
    """A rectangular piece of envelope on a uniform in-plane grid."""

    kind: str
    layers: tuple[Layer, ...]
    width_m: float
    height_m: float
    cell_m: float
    heat_flow: str
    framing: tuple[Block, ...] = ()
    insulation: tuple[float, float] = (0.0, 0.0)  # z-range of the main insulation layer, m
    bays: tuple[tuple[float, float], ...] = ()  # clear spans between framing members, x ranges, m
    description: str = ""

    @property
    def shape(self) -> tuple[int, int, int]:
        return (sum(l.cells for l in self.layers), self.ny, self.nx)

    @property
    def nx(self) -> int:
        return int(round(self.width_m / self.cell_m))

    @property
    def ny(self) -> int:
        return int(round(self.height_m / self.cell_m))

    def dz_m(self) -> np.ndarray:
        return np.concatenate([np.full(l.cells, l.thickness_m / l.cells) for l in self.layers])

    def z_edges_m(self) -> np.ndarray:
        return np.concatenate([[0.0], np.cumsum(self.dz_m())])

    def thickness_m(self) -> float:
        return float(sum(l.thickness_m for l in self.layers))


def layer_z_m(layers: tuple[Layer, ...], index: int) -> tuple[float, float]:
    """z-range (from the inside face) of layer ``index``, m."""
    z0 = sum(l.thickness_m for l in layers[:index])
    return z0, z0 + layers[index].thickness_m


def _snap(v: float, cell: float) -> float:
    """Nearest cell edge (halves round up, so equal widths stay equal)."""
    return float(np.floor(v / cell + 0.5 + 1e-9)) * cell


def timber_frame_wall(
    *,
    width_m: float = 2.4,
    height_m: float = 1.8,
    cell_m: float = 0.015,
    stud_spacing_m: float = 0.6,
    stud_width_m: float = 0.045,
    first_stud_m: float = 0.3,
    insulation_m: float = 0.14,
    plate_rows: tuple[tuple[float, float], ...] = (),
) -> Element:
    """Timber frame wall: plasterboard / mineral wool between softwood studs / OSB sheathing.

    Studs run full height; ``plate_rows`` adds horizontal plates or noggings (y0, y1) in m.
    The ventilated cladding outside the sheathing is not modelled; its effect is the
    exterior surface resistance (ISO 6946: a well-ventilated layer counts as R_se = R_si) [M].
    """
    layers = (
        Layer("plasterboard", 0.0125, 2),
        Layer("mineral_wool", insulation_m, 10),
        Layer("osb", 0.012, 2),
    )
    zi = layer_z_m(layers, 1)
    wood = MATERIALS["softwood"]
    framing, bays, studs = [], [], []
    x = first_stud_m
    while x - stud_width_m / 2 < width_m:
        a = _snap(x - stud_width_m / 2, cell_m)
        b = a + max(1, round(stud_width_m / cell_m)) * cell_m
        studs.append((max(a, 0.0), min(b, width_m)))
        x += stud_spacing_m
    for a, b in studs:
        framing.append(Block(wood, a, b, 0.0, height_m, *zi))
    edges = [0.0] + [v for s in studs for v in s] + [width_m]
    for a, b in zip(edges[0::2], edges[1::2]):
        if b - a > 2 * cell_m:
            bays.append((a, b))
    for y0, y1 in plate_rows:
        framing.append(Block(wood, 0.0, width_m, _snap(y0, cell_m), _snap(y1, cell_m), *zi))
    return Element(
        "timber_frame_wall", layers, width_m, height_m, cell_m, "horizontal", tuple(framing), zi,
        tuple(bays), f"timber frame wall, studs {stud_width_m * 1000:.0f} mm at {stud_spacing_m * 1000:.0f} mm, "
        f"{insulation_m * 1000:.0f} mm mineral wool, plasterboard inside, OSB sheathing",
    )


def timber_ceiling(
    *, width_m: float = 2.4, height_m: float = 1.8, cell_m: float = 0.015, joist_spacing_m: float = 0.6
) -> Element:
    """Ceiling under a cold loft: plasterboard / 150 mm wool between joists / 100 mm wool over them."""
    base = timber_frame_wall(
        width_m=width_m, height_m=height_m, cell_m=cell_m, stud_spacing_m=joist_spacing_m,
        insulation_m=0.15,
    )
    layers = (Layer("plasterboard", 0.0125, 2), Layer("mineral_wool", 0.15, 10), Layer("mineral_wool", 0.10, 4))
    return replace(
        base, kind="timber_ceiling", layers=layers, heat_flow="upward",
        description="ceiling below a ventilated loft: plasterboard, 150 mm mineral wool between joists "
        "at 600 mm, 100 mm mineral wool over the joists",
    )


def masonry_wall(
    *, width_m: float = 4.0, height_m: float = 3.0, cell_m: float = 0.025, eps_m: float = 0.10
) -> Element:
    """Solid brick wall with external EPS and render: plaster / brick 215 / EPS / render."""
    layers = (
        Layer("gypsum_plaster", 0.015, 1),
        Layer("brick", 0.215, 5),
        Layer("eps", eps_m, 8),
        Layer("render", 0.010, 1),
    )
    return Element(
        "masonry_wall", layers, width_m, height_m, cell_m, "horizontal", (), layer_z_m(layers, 2), (),
        f"215 mm solid brick, {eps_m * 1000:.0f} mm EPS external insulation, 10 mm render, plastered inside",
    )


def flat_roof(
    *, width_m: float = 4.0, height_m: float = 3.0, cell_m: float = 0.025, insulation: str = "eps",
    insulation_m: float = 0.15,
) -> Element:
    """Warm flat roof: concrete deck / EPS or PIR boards / bitumen membrane (inside = deck soffit)."""
    layers = (
        Layer("concrete", 0.15, 3),
        Layer(insulation, insulation_m, 8),
        Layer("bitumen", 0.008, 1),
    )
    return Element(
        "flat_roof", layers, width_m, height_m, cell_m, "upward", (), layer_z_m(layers, 1), (),
        f"warm flat roof: 150 mm concrete deck, {insulation_m * 1000:.0f} mm {insulation.upper()} boards, "
        "bitumen membrane",
    )


def solid_wall(*, width_m: float = 3.0, height_m: float = 2.4, cell_m: float = 0.02) -> Element:
    """Uninsulated solid brick wall: gypsum plaster 15 / brick 215 / render 10 (an older wall, rising damp).

    The brick layer stands in for the insulation layer of the other elements (``insulation``
    is its z-range), so defects that replace "the main layer" act on the brick.
    """
    layers = (
        Layer("gypsum_plaster", 0.015, 1),
        Layer("brick", 0.215, 6),
        Layer("render", 0.010, 1),
    )
    return Element(
        "solid_wall", layers, width_m, height_m, cell_m, "horizontal", (), layer_z_m(layers, 1), (),
        "215 mm solid brick, plastered inside, rendered outside, no insulation",
    )
