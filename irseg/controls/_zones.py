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

import difflib
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ..errors import MetadataError
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

#: What a zone does: its pixels are left out, or measured with the zone's own emissivity.
ZONE_KINDS = ("exclude", "material")

#: Keys of a ``[[zone]]`` table.
ZONE_KEYS = ("label", "kind", "box", "polygon", "emissivity", "reflected_c")

_BOX_FIX = "write box = [row0, col0, row1, col1] in pixels with row0 < row1 and col0 < col1 (row1, col1 exclusive)"
_POLY_FIX = "write polygon = [[row, col], [row, col], [row, col], ...] with at least 3 corners enclosing an area"


def _name(zone_label: str | None, number: int) -> str:
    return f"zone {zone_label!r}" if zone_label else f"zone {number}"


def _fail(source: str, who: str, what: str, fix: str) -> MetadataError:
    return MetadataError(f"{source}: [[zone]] {who}: {what}; {fix}")


def _number(source: str, who: str, key: str, value: Any, fix: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(float(value)):
        raise _fail(source, who, f"{key} holds {value!r:.40}, not a finite number", fix)
    return float(value)


def _box(source: str, who: str, value: Any) -> tuple[int, int, int, int]:
    if not isinstance(value, (list, tuple)) or len(value) != 4:
        raise _fail(source, who, f"box = {value!r:.60} is not a list of 4 numbers", _BOX_FIX)
    out = []
    for v in value:
        x = _number(source, who, "box", v, _BOX_FIX)
        if x != int(x) or x < 0:
            raise _fail(source, who, f"box = {list(value)} holds {v!r}, not a whole pixel index >= 0", _BOX_FIX)
        out.append(int(x))
    r0, c0, r1, c1 = out
    if r1 <= r0 or c1 <= c0:
        raise _fail(source, who, f"box = {out} is empty (degenerate: no row or no column inside)", _BOX_FIX)
    return (r0, c0, r1, c1)


def _polygon(source: str, who: str, value: Any) -> tuple[tuple[float, float], ...]:
    if not isinstance(value, (list, tuple)) or not all(isinstance(p, (list, tuple)) and len(p) == 2 for p in value):
        raise _fail(source, who, f"polygon = {value!r:.60} is not a list of [row, col] pairs", _POLY_FIX)
    pts = tuple((_number(source, who, "polygon", p[0], _POLY_FIX), _number(source, who, "polygon", p[1], _POLY_FIX))
                for p in value)
    if any(r < 0 or c < 0 for r, c in pts):
        raise _fail(source, who, "polygon has a corner at a negative row or column", _POLY_FIX)
    if len(pts) < 3:
        raise _fail(source, who, f"polygon has {len(pts)} corner(s), so it is degenerate", _POLY_FIX)
    rows = np.array([p[0] for p in pts])
    cols = np.array([p[1] for p in pts])
    area = 0.5 * abs(float(np.dot(rows, np.roll(cols, 1)) - np.dot(cols, np.roll(rows, 1))))  # shoelace formula
    if area < 0.5:
        raise _fail(source, who, f"polygon encloses {area:g} square pixels, so it is degenerate (corners on one line)",
                    _POLY_FIX)
    return pts


def _zone(source: str, number: int, table: Any) -> Zone:
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: zone {number} is not a table; write each zone as a [[zone]] table of keys")
    label = table.get("label")
    if label is not None and (not isinstance(label, str) or not label.strip()):
        raise _fail(source, f"zone {number}", f"label = {label!r:.40} is not text", 'write label = "window", for instance')
    label = label.strip() if isinstance(label, str) else f"zone {number}"
    who = _name(label, number)
    for key in table:
        if key not in ZONE_KEYS:
            near = difflib.get_close_matches(str(key), ZONE_KEYS, n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise _fail(source, who, f"has no key {key!r}", f"{hint}valid keys: {', '.join(ZONE_KEYS)}")
    kind = table.get("kind")
    if not isinstance(kind, str) or kind.strip().lower() not in ZONE_KINDS:
        shown = "no kind" if kind is None else f"kind = {kind!r:.40} is unknown"
        raise _fail(source, who, shown, 'write kind = "exclude" (left out of the analysis) or kind = "material" '
                    "(with its own emissivity)")
    kind = kind.strip().lower()
    if ("box" in table) == ("polygon" in table):
        raise _fail(source, who, "needs exactly one of box and polygon",
                    "give box = [row0, col0, row1, col1] or polygon = [[row, col], ...]")
    box = _box(source, who, table["box"]) if "box" in table else None
    polygon = _polygon(source, who, table["polygon"]) if "polygon" in table else None
    emissivity = reflected = None
    if kind == "exclude" and ("emissivity" in table or "reflected_c" in table):
        raise _fail(source, who, "an exclude zone takes no emissivity or reflected_c",
                    'remove them, or write kind = "material" to correct the zone with them')
    if "emissivity" in table:
        emissivity = _number(source, who, "emissivity", table["emissivity"], "use the material's long-wave emissivity")
        if not 0.0 < emissivity <= 1.0:
            raise _fail(source, who, f"emissivity = {table['emissivity']!r} is outside (0, 1]",
                        "use the material's long-wave emissivity, e.g. 0.6 for a metallic paint")
    if "reflected_c" in table:
        reflected = _number(source, who, "reflected_c", table["reflected_c"], "give the reflected temperature in °C")
        if not -100.0 <= reflected <= 200.0:
            raise _fail(source, who, f"reflected_c = {reflected:g} is outside [-100, 200] °C",
                        "give the reflected temperature in °C")
    if kind == "material" and emissivity is None and reflected is None:
        raise _fail(source, who, "a material zone needs emissivity (and optionally reflected_c)",
                    "add emissivity = 0.6, for instance, or write kind = \"exclude\"")
    return Zone(label=label, kind=kind, box=box, polygon=polygon, emissivity=emissivity, reflected_c=reflected,
                source=source)


def check_zone_tables(source: str, value: Any) -> tuple[Zone, ...]:
    """Check the ``[[zone]]`` tables of one metadata document.

    Parameters
    ----------
    source : str
        The file (named in messages).
    value : Any
        The parsed value of ``zone``: a list of tables.

    Returns
    -------
    tuple of Zone
        In file order (a zone without a label is called ``"zone <n>"``).

    Raises
    ------
    MetadataError
        Naming the file, the zone's label and the fix: an unknown key or kind, a box or polygon
        that is malformed or degenerate, both or neither of them, an emissivity outside (0, 1],
        a reflected temperature outside [-100, 200] °C, a material zone without emissivity.
    """
    if isinstance(value, Mapping):
        raise MetadataError(f"{source}: [zone] is a single table; write [[zone]] (two brackets) before each zone")
    if not isinstance(value, (list, tuple)):
        raise MetadataError(f"{source}: zone = {value!r:.40} is not a list of zones; write each as a [[zone]] table")
    return tuple(_zone(source, k, table) for k, table in enumerate(value, start=1))


def zone_to_dict(zone: Zone) -> dict[str, Any]:
    """The ``[[zone]]`` table of a zone (JSON-ready; :func:`check_zone_tables` reads it back)."""
    out: dict[str, Any] = {"label": zone.label, "kind": zone.kind}
    if zone.box is not None:
        out["box"] = list(zone.box)
    if zone.polygon is not None:
        out["polygon"] = [list(p) for p in zone.polygon]
    if zone.emissivity is not None:
        out["emissivity"] = zone.emissivity
    if zone.reflected_c is not None:
        out["reflected_c"] = zone.reflected_c
    return out


# --------------------------------------------------------------------------- rasterised


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
        temperature = fill_masked(np.asarray(frame.temperature_c, dtype=np.float64), mask)
        layer = replace(self, excluded=new, excluded_c=np.asarray(frame.temperature_c)[new].astype(np.float64))
        return layer, replace(frame, temperature_c=temperature, mask=mask)

    def display_frame(self, frame: ThermalFrame) -> ThermalFrame:
        """The frame as the overlay shows it: excluded pixels back with the temperatures the camera saw."""
        if self.excluded is None or self.excluded_c is None or not self.excluded.any():
            return frame
        temperature = np.array(frame.temperature_c, dtype=np.float64, copy=True)
        temperature[self.excluded] = self.excluded_c
        return replace(frame, temperature_c=temperature, mask=frame.mask & ~self.excluded)


def _extent_error(zone: Zone, image: str, shape: tuple[int, int], where: str) -> MetadataError:
    m, n = shape
    return MetadataError(
        f"{zone.source or image}: [[zone]] {_name(zone.label, 0)} {where}, outside the image {image} of "
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
            f"{zone.source or image}: [[zone]] {_name(zone.label, 0)}: polygon covers no pixel centre of {image}, "
            f"so it is degenerate; {_POLY_FIX}"
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
