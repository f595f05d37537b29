"""Zones: ``[[zone]]`` tables checked into :class:`~irseg.types.Zone` records, rasterised to masks.

A zone is a box ``[row0, col0, row1, col1]`` (row1/col1 exclusive, like the CSV's bbox
columns) or a polygon of ``[row, col]`` vertices. ``kind = "exclude"`` takes its pixels out of
the analysis (the pipeline ORs them into the frame's invalid mask before segmentation, so they
are neither anomaly nor sound reference and carry no edge); ``kind = "material"`` gives its
pixels their own emissivity and reflected temperature for the radiometric correction.

Checks that need no image (keys, kinds, emissivity, degenerate shapes) run when the metadata
is read (:func:`check_zone_tables`); the extent is checked against the image's size when the
image is read (:func:`zone_layer`). Every message names the file, the zone's label and the fix.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from ..errors import MetadataError
from ..metadata import ZONE_KEYS, ZONE_KINDS, check_zone_tables, zone_to_dict
from ..metadata._zones import POLY_FIX, zone_name
from ..types import SurveyMeta, ThermalFrame, Zone

__all__ = [
    "ZONE_KINDS",
    "ZONE_KEYS",
    "check_zone_tables",
    "zone_to_dict",
    "ZoneMask",
    "ZoneLayer",
    "zone_layer",
    "material_maps",
]

@dataclass(frozen=True)
class ZoneMask:
    """A zone rasterised on one image.

    Attributes
    ----------
    zone : Zone
    mask : (M, N) bool ndarray
        The zone's pixels.
    """

    zone: Zone
    mask: np.ndarray

    @property
    def label(self) -> str:
        """The zone's label."""
        return self.zone.label

    @property
    def kind(self) -> str:
        """``"exclude"`` or ``"material"``."""
        return self.zone.kind


@dataclass(frozen=True)
class ZoneLayer:
    """The zones of one image and what the exclusion took out of its frame.

    Attributes
    ----------
    zones : tuple of ZoneMask
        In metadata order.
    excluded : (M, N) bool ndarray or None
        Pixels that only an exclude zone made invalid (None until :meth:`exclude` ran).
    excluded_c : 1-D float ndarray or None
        Their corrected temperatures before exclusion, °C (for the overlay only).
    """

    zones: tuple[ZoneMask, ...]
    excluded: np.ndarray | None = None
    excluded_c: np.ndarray | None = None

    def of_kind(self, kind: str) -> tuple[ZoneMask, ...]:
        """The zones of one kind."""
        return tuple(z for z in self.zones if z.kind == kind)

    def exclusion_mask(self, shape: tuple[int, int]) -> np.ndarray:
        """The union of the exclude zones' masks."""
        out = np.zeros(shape, bool)
        for z in self.of_kind("exclude"):
            out |= z.mask
        return out

    def exclude(self, frame: ThermalFrame) -> tuple[ZoneLayer, ThermalFrame]:
        """The frame with the exclude zones ORed into its invalid mask (and filled), and this layer
        recording what was taken out.

        The filled values (a local median, :func:`irseg.radiometry.fill_masked`) keep the frame's
        promise that masked pixels hold a finite fill value; the values taken out are kept here so
        the overlay can still show the zone as the camera saw it.
        """
        from ..radiometry import fill_masked

        zone = self.exclusion_mask(frame.mask.shape)
        if not zone.any():
            return self, frame
        new = zone & ~frame.mask
        mask = frame.mask | zone
        if mask.all():
            labels = ", ".join(repr(z.label) for z in self.of_kind("exclude"))
            raise MetadataError(
                f"{frame.path}: the exclude zone(s) {labels} cover every valid pixel, so nothing is left to "
                "analyse; make the zones smaller"
            )
        # in the frame's own float type (float32 from calibrate): a float64 copy would double the frame and
        # every field segmented and analysed from it (memory, issue 15)
        temperature = fill_masked(np.asarray(frame.temperature_c), mask)
        layer = replace(self, excluded=new, excluded_c=np.asarray(frame.temperature_c)[new].astype(np.float64))
        return layer, replace(frame, temperature_c=temperature, mask=mask)

    def display_frame(self, frame: ThermalFrame) -> ThermalFrame:
        """The frame as the overlay shows it: excluded pixels back with the temperatures the camera saw."""
        if self.excluded is None or self.excluded_c is None or not self.excluded.any():
            return frame
        temperature = np.array(frame.temperature_c, copy=True)  # the frame's float type: the values it held
        temperature[self.excluded] = self.excluded_c
        return replace(frame, temperature_c=temperature, mask=frame.mask & ~self.excluded)


def _extent_error(zone: Zone, image: str, shape: tuple[int, int], where: str) -> MetadataError:
    m, n = shape
    return MetadataError(
        f"{zone.source or image}: [[zone]] {zone_name(zone.label, 0)} {where}, outside the image {image} of "
        f"{m} rows x {n} columns; keep rows in 0..{m} and columns in 0..{n}, or move the zone to the "
        "sidecar of the image it belongs to"
    )


def _rasterise(zone: Zone, shape: tuple[int, int], image: str) -> np.ndarray:
    m, n = shape
    out = np.zeros(shape, bool)
    if zone.box is not None:
        r0, c0, r1, c1 = zone.box
        if r1 > m or c1 > n:
            raise _extent_error(zone, image, shape, f"box = {list(zone.box)} reaches past the image")
        out[r0:r1, c0:c1] = True
        return out
    from skimage.draw import polygon2mask

    assert zone.polygon is not None
    pts = np.asarray(zone.polygon, dtype=float)
    if (pts[:, 0] > m).any() or (pts[:, 1] > n).any():
        raise _extent_error(zone, image, shape, "polygon has a corner past the image")
    out = polygon2mask(shape, pts)
    if not out.any():
        raise MetadataError(
            f"{zone.source or image}: [[zone]] {zone_name(zone.label, 0)}: polygon covers no pixel centre of {image}, "
            f"so it is degenerate; {POLY_FIX}"
        )
    return out


def zone_layer(zones: Sequence[Zone], shape: tuple[int, ...], *, image: str = "the image") -> ZoneLayer | None:
    """Rasterise an image's zones (box: the pixels inside; polygon: :func:`skimage.draw.polygon2mask`).

    Parameters
    ----------
    zones : sequence of Zone
        ``SurveyMeta.zones``.
    shape : tuple of int
        The image's ``(M, N)``; another number of dimensions returns None (the calibration
        refuses such an image with its own message).
    image : str
        The image's name, for messages.

    Returns
    -------
    ZoneLayer or None
        None when there is no zone.

    Raises
    ------
    MetadataError
        A zone reaching past the image, or a polygon covering no pixel centre, naming the file,
        the zone's label and the fix.
    """
    if not zones or len(shape) != 2:
        return None
    size = (int(shape[0]), int(shape[1]))
    return ZoneLayer(tuple(ZoneMask(z, _rasterise(z, size, image)) for z in zones))


def material_maps(layer: ZoneLayer | None, meta: SurveyMeta) -> dict[str, np.ndarray]:
    """Per-pixel emissivity and reflected temperature for :func:`irseg.radiometry.calibrate`.

    Outside every material zone the maps hold ``[surface] emissivity`` and the reflected
    temperature in force; inside, the zone's values (where zones overlap, the later one wins).

    Returns
    -------
    dict
        ``{"emissivity_map": ..., "reflected_map": ...}`` (only the maps a zone changes; empty
        without material zones), to be passed as keyword arguments.
    """
    from .._defaults import resolve_reflected_c

    zones = () if layer is None else layer.of_kind("material")
    if not zones:
        return {}
    shape = zones[0].mask.shape
    out: dict[str, np.ndarray] = {}
    if any(z.zone.emissivity is not None for z in zones):
        emissivity = np.full(shape, float(meta.surface.emissivity))
        for z in zones:
            if z.zone.emissivity is not None:
                emissivity[z.mask] = z.zone.emissivity
        out["emissivity_map"] = emissivity
    if any(z.zone.reflected_c is not None for z in zones):
        reflected = np.full(shape, float(resolve_reflected_c(meta)[0]))
        for z in zones:
            if z.zone.reflected_c is not None:
                reflected[z.mask] = z.zone.reflected_c
        out["reflected_map"] = reflected
    return out
