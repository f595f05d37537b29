"""Rasterise an element and its defects: conductivity and heat-capacity fields, defect masks."""

from __future__ import annotations

import numpy as np

from irseg.errors import ConfigError

from irseg.scenes._defects import Defect
from irseg.scenes._elements import Block, Element
from irseg.scenes._materials import MATERIALS

__all__ = ["defect_mask", "rasterise"]


def _plane_mask(element: Element, b: Block) -> np.ndarray:
    """(ny, nx) bool: cells whose centre lies in the box's plan (rectangle or inscribed ellipse)."""
    c = element.cell_m
    xc = (np.arange(element.nx) + 0.5) * c
    yc = (np.arange(element.ny) + 0.5) * c
    if b.shape == "mask":
        if b.plane is None or b.plane.shape != (element.ny, element.nx):
            raise ConfigError(f"a mask block needs a plane of shape {(element.ny, element.nx)}")
        return np.asarray(b.plane, bool)
    if b.shape == "ellipse":
        cx, cy = 0.5 * (b.x0_m + b.x1_m), 0.5 * (b.y0_m + b.y1_m)
        rx, ry = 0.5 * (b.x1_m - b.x0_m), 0.5 * (b.y1_m - b.y0_m)
        return ((xc[None, :] - cx) / rx) ** 2 + ((yc[:, None] - cy) / ry) ** 2 <= 1.0
    return ((yc >= b.y0_m) & (yc < b.y1_m))[:, None] & ((xc >= b.x0_m) & (xc < b.x1_m))[None, :]


def defect_mask(element: Element, defect: Defect) -> np.ndarray:
    """(ny, nx) bool: the defect's region, the cells whose build-up it changes, projected on the surface.

    A defect that changes the surface conditions instead (``Defect.region``, a cold-air fan) gives
    that region.
    """
    m = np.zeros((element.ny, element.nx), bool) if defect.region is None else np.asarray(defect.region, bool).copy()
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
