"""Envelope elements (layer build-ups plus framing) and their defects, as material boxes.

Geometry is in metres on the surface plane as seen from the viewed side: ``x`` to
the right, ``y`` downwards from the top edge (image rows), ``z`` through the
thickness from the *inside* face. Everything is snapped to the cell grid when it
is rasterised, and the snapped geometry is what the truth reports.

Material data: conductivities from the handbook/standard ranges collected in the
project's reference notes (REFERENCE-VALUES §2.4, tags kept beside each value);
heat capacities ρc are typical handbook densities × specific heats [M].
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from types import MappingProxyType

import numpy as np

from irseg.errors import ConfigError

__all__ = [
    "Material",
    "Layer",
    "Block",
    "Defect",
    "Element",
    "MATERIALS",
    "air_layer",
    "wet_material",
    "timber_frame_wall",
    "timber_ceiling",
    "masonry_wall",
    "flat_roof",
    "missing_bay",
    "settled_insulation",
    "partial_void",
    "missing_patch",
    "slab_edge",
    "lintel",
    "wet_patch",
    "rasterise",
]


@dataclass(frozen=True)
class Material:
    """A homogeneous material: λ (W/m·K) and ρc (J/m³·K)."""

    name: str
    conductivity_w_mk: float
    heat_capacity_j_m3k: float


MATERIALS = MappingProxyType(
    {
        # REFERENCE-VALUES §2.4: gypsum plasterboard 0.25 [V, secondary]; ρc 700 kg/m³ x 1000 J/kgK [M]
        "plasterboard": Material("plasterboard", 0.25, 0.70e6),
        # §2.4: gypsum plaster 0.7 [V, data sheet]; ρc 1200 x 1000 [M]
        "gypsum_plaster": Material("gypsum_plaster", 0.70, 1.2e6),
        # §2.4: mineral wool, stone 0.033-0.045, 0.035 used by a secondary source [V]; 30 kg/m³ x 1030 [M]
        "mineral_wool": Material("mineral_wool", 0.035, 0.031e6),
        # §2.4: softwood timber 0.12-0.13 (EN 12524, 500 kg/m³: 0.13) [V]; 500 x 1600 [M]
        "softwood": Material("softwood", 0.13, 0.80e6),
        # §2.4: OSB 0.13 [V, secondary]; 600 x 1700 [M]
        "osb": Material("osb", 0.13, 1.02e6),
        # §2.4: solid clay brick, UK outer leaf 0.77 [V, secondary]; 1700 x 800 [M]
        "brick": Material("brick", 0.77, 1.36e6),
        # §2.4: EPS white 0.036-0.040 [V, secondary]; 20 kg/m³ x 1450 [M]
        "eps": Material("eps", 0.036, 0.029e6),
        # §2.4: PUR/PIR 0.020-0.028 [V, secondary]; 32 x 1400 [M]
        "pir": Material("pir", 0.022, 0.045e6),
        # §2.4: cement plaster 1.4 [V, data sheet]; 1800 x 1000 [M]
        "render": Material("render", 1.4, 1.8e6),
        # §2.4: reinforced concrete (2400 kg/m³) 2.3 [V]; 2400 x 1000 [M]
        "concrete": Material("concrete", 2.3, 2.4e6),
        # §2.4: roofing felt, bitumen 0.19-0.20 (CIBSE Guide A) [V]; 1100 x 1000 [M]
        "bitumen": Material("bitumen", 0.20, 1.1e6),
    }
)

# ISO 6946 thermal resistance of an unventilated air layer >= 25 mm thick, m²K/W:
# horizontal heat flow 0.18, upward 0.16, downward 0.22 [M, ISO 6946 Table 8 from memory].
_AIR_LAYER_R = {"horizontal": 0.18, "upward": 0.16, "downward": 0.22}
# ISO 10456 moisture conversion lambda_wet = lambda_dry * exp(f_psi * psi), f_psi = 4 for EPS
# and mineral wool [M]; water rho*c = 1000 kg/m³ x 4186 J/kgK [M].
_F_PSI = 4.0
_WATER_RHO_C = 4.186e6


def air_layer(thickness_m: float, heat_flow: str = "horizontal") -> Material:
    """Equivalent material of an unventilated air layer (convection + radiation), λ = d/R."""
    r = _AIR_LAYER_R[heat_flow]
    # below 25 mm the resistance falls roughly linearly towards still air [M]
    r = r * min(1.0, thickness_m / 0.025)
    return Material(f"air_{heat_flow}", max(thickness_m / r, 0.025), 1.2e3)


def wet_material(name: str, water_volume_fraction: float) -> Material:
    """Insulation holding water: λ by the ISO 10456 moisture factor, ρc plus the water's."""
    base = MATERIALS[name]
    return Material(
        f"wet_{name}",
        base.conductivity_w_mk * float(np.exp(_F_PSI * water_volume_fraction)),
        base.heat_capacity_j_m3k + water_volume_fraction * _WATER_RHO_C,
    )


@dataclass(frozen=True)
class Layer:
    """One layer of the build-up, inside to outside."""

    material: str
    thickness_m: float
    cells: int


@dataclass(frozen=True)
class Block:
    """A box of one material replacing whatever the build-up has there.

    ``shape`` is ``"rect"`` or ``"ellipse"`` (inscribed in the box, in plane).
    """

    material: Material
    x0_m: float
    x1_m: float
    y0_m: float
    y1_m: float
    z0_m: float
    z1_m: float
    shape: str = "rect"


@dataclass(frozen=True)
class Defect:
    """A defect: its cause (the class the analysis should assign) and its boxes."""

    name: str
    cause: str
    blocks: tuple[Block, ...]
    description: str = ""


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


def _layer_z(layers: tuple[Layer, ...], index: int) -> tuple[float, float]:
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
    zi = _layer_z(layers, 1)
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
        "masonry_wall", layers, width_m, height_m, cell_m, "horizontal", (), _layer_z(layers, 2), (),
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
        "flat_roof", layers, width_m, height_m, cell_m, "upward", (), _layer_z(layers, 1), (),
        f"warm flat roof: 150 mm concrete deck, {insulation_m * 1000:.0f} mm {insulation.upper()} boards, "
        "bitumen membrane",
    )


# --------------------------------------------------------------------------- defects


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
    zb = _layer_z(element.layers, 1)
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
        z = _layer_z(element.layers, 1)
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


# --------------------------------------------------------------------------- rasterise


def _plane_mask(element: Element, b: Block) -> np.ndarray:
    c = element.cell_m
    xc = (np.arange(element.nx) + 0.5) * c
    yc = (np.arange(element.ny) + 0.5) * c
    if b.shape == "ellipse":
        cx, cy = 0.5 * (b.x0_m + b.x1_m), 0.5 * (b.y0_m + b.y1_m)
        rx, ry = 0.5 * (b.x1_m - b.x0_m), 0.5 * (b.y1_m - b.y0_m)
        return ((xc[None, :] - cx) / rx) ** 2 + ((yc[:, None] - cy) / ry) ** 2 <= 1.0
    return ((yc >= b.y0_m) & (yc < b.y1_m))[:, None] & ((xc >= b.x0_m) & (xc < b.x1_m))[None, :]


def footprint(element: Element, defect: Defect) -> np.ndarray:
    """(ny, nx) bool: cells whose build-up the defect changes, projected on the surface."""
    m = np.zeros((element.ny, element.nx), bool)
    for b in defect.blocks:
        m |= _plane_mask(element, b)
    return m


def rasterise(element: Element, defects: tuple[Defect, ...] = ()) -> tuple[np.ndarray, np.ndarray]:
    """Conductivity and heat-capacity fields (nz, ny, nx) of the element with its defects.

    Framing is applied first, then the defects in order (a later box wins).
    """
    dz = element.dz_m()
    zc = element.z_edges_m()[:-1] + 0.5 * dz
    k = np.concatenate([np.full(l.cells, MATERIALS[l.material].conductivity_w_mk) for l in element.layers])
    rc = np.concatenate([np.full(l.cells, MATERIALS[l.material].heat_capacity_j_m3k) for l in element.layers])
    shape = element.shape
    k3 = np.broadcast_to(k[:, None, None], shape).copy()
    c3 = np.broadcast_to(rc[:, None, None], shape).copy()
    for b in element.framing + tuple(b for d in defects for b in d.blocks):
        zm = (zc >= b.z0_m - 1e-9) & (zc < b.z1_m - 1e-9)
        m = zm[:, None, None] & _plane_mask(element, b)[None]
        k3[m] = b.material.conductivity_w_mk
        c3[m] = b.material.heat_capacity_j_m3k
    return k3, c3
