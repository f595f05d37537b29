"""Materials of the simulated envelope elements: λ and ρc, air layers, wet insulation.

Conductivities are typical design values inside the ranges published for each material
(EN ISO 10456 tables and manufacturers' declared values, as quoted by secondary sources;
EN 12524 for softwood; CIBSE Guide A for bitumen felt) [V, secondary] unless tagged
otherwise beside the value. Heat capacities ρc are typical handbook densities × specific
heats [M]. They are inputs of the simulation, not check values: any λ in the published
range would do.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

__all__ = ["Material", "MATERIALS", "air_layer", "wet_material"]


@dataclass(frozen=True)
class Material:
    """A homogeneous material: λ (W/m·K) and ρc (J/m³·K)."""

    name: str
    conductivity_w_mk: float
    heat_capacity_j_m3k: float


MATERIALS = MappingProxyType(
    {
        # gypsum plasterboard 0.25 [V, secondary] (ISO 10456: 0.21 at 700 kg/m³ [M]); ρc 700 kg/m³ x 1000 J/kgK [M]
        "plasterboard": Material("plasterboard", 0.25, 0.70e6),
        # gypsum plaster 0.7 [V, manufacturer's data sheet]; ρc 1200 x 1000 [M]
        "gypsum_plaster": Material("gypsum_plaster", 0.70, 1.2e6),
        # stone mineral wool 0.033-0.045, 0.035 a common design value [V, secondary]; 30 kg/m³ x 1030 [M]
        "mineral_wool": Material("mineral_wool", 0.035, 0.031e6),
        # softwood 0.12-0.13 (EN 12524 table, 500 kg/m³: 0.13) [V]; 500 x 1600 [M]
        "softwood": Material("softwood", 0.13, 0.80e6),
        # OSB 0.13 [V, secondary]; 600 x 1700 [M]
        "osb": Material("osb", 0.13, 1.02e6),
        # solid clay brick, UK outer-leaf design value 0.77 [V, secondary]; 1700 x 800 [M]
        "brick": Material("brick", 0.77, 1.36e6),
        # white EPS 0.036-0.040 [V, secondary]; 20 kg/m³ x 1450 [M]
        "eps": Material("eps", 0.036, 0.029e6),
        # PUR/PIR 0.020-0.028 [V, secondary]; 32 x 1400 [M]
        "pir": Material("pir", 0.022, 0.045e6),
        # cement plaster 1.4 [V, manufacturer's data sheet]; 1800 x 1000 [M]
        "render": Material("render", 1.4, 1.8e6),
        # reinforced concrete, 2400 kg/m³: 2.3 [V, building-physics data sheet] (ISO 10456, 1 % steel [M]);
        # ρc 2400 x 1000 [M]
        "concrete": Material("concrete", 2.3, 2.4e6),
        # roofing felt, bitumen 0.19-0.20 (CIBSE Guide A) [V, secondary]; 1100 x 1000 [M]
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


# ISO 10456 moisture conversion factor by volume for fired clay brick and gypsum plaster: f_psi = 10 [M]
_F_PSI_MASONRY = 10.0


def wet_material(name: str, water_volume_fraction: float) -> Material:
    """A material holding water: λ by the ISO 10456 moisture factor, ρc plus the water's.

    ``f_ψ`` is 4 for insulation (EPS, PIR, mineral wool) and 10 for brick and plaster [M].
    """
    base = MATERIALS[name]
    f_psi = _F_PSI_MASONRY if name in ("brick", "gypsum_plaster", "render") else _F_PSI
    return Material(
        f"wet_{name}",
        base.conductivity_w_mk * float(np.exp(f_psi * water_volume_fraction)),
        base.heat_capacity_j_m3k + water_volume_fraction * _WATER_RHO_C,
    )
