"""``[[zone]]`` tables: parsing and validation into :class:`~irseg.types.Zone` records.

Rasterising zones and applying them to a frame is :mod:`irseg.controls`' job; here only the
metadata is read and checked, so that the metadata stage needs nothing beyond itself.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from ..errors import MetadataError
from ..types import Zone

__all__ = ["ZONE_KINDS", "ZONE_KEYS", "POLY_FIX", "check_zone_tables", "zone_to_dict", "zone_name"]

#: What a zone does: its pixels are left out, or measured with the zone's own emissivity.
ZONE_KINDS = ("exclude", "material")

#: Keys of a ``[[zone]]`` table.
ZONE_KEYS = ("label", "kind", "box", "polygon", "emissivity", "reflected_c")

_BOX_FIX = "write box = [row0, col0, row1, col1] in pixels with row0 < row1 and col0 < col1 (row1, col1 exclusive)"
POLY_FIX = "write polygon = [[row, col], [row, col], [row, col], ...] with at least 3 corners enclosing an area"


def zone_name(zone_label: str | None, number: int) -> str:
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
        raise _fail(source, who, f"polygon = {value!r:.60} is not a list of [row, col] pairs", POLY_FIX)
    pts = tuple((_number(source, who, "polygon", p[0], POLY_FIX), _number(source, who, "polygon", p[1], POLY_FIX))
                for p in value)
    if any(r < 0 or c < 0 for r, c in pts):
        raise _fail(source, who, "polygon has a corner at a negative row or column", POLY_FIX)
    if len(pts) < 3:
        raise _fail(source, who, f"polygon has {len(pts)} corner(s), so it is degenerate", POLY_FIX)
    rows = np.array([p[0] for p in pts])
    cols = np.array([p[1] for p in pts])
    area = 0.5 * abs(float(np.dot(rows, np.roll(cols, 1)) - np.dot(cols, np.roll(rows, 1))))  # shoelace formula
    if area < 0.5:
        raise _fail(source, who, f"polygon encloses {area:g} square pixels, so it is degenerate (corners on one line)",
                    POLY_FIX)
    return pts


def _zone(source: str, number: int, table: Any) -> Zone:
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: zone {number} is not a table; write each zone as a [[zone]] table of keys")
    label = table.get("label")
    if label is not None and (not isinstance(label, str) or not label.strip()):
        raise _fail(source, f"zone {number}", f"label = {label!r:.40} is not text", 'write label = "window", for instance')
    label = label.strip() if isinstance(label, str) else f"zone {number}"
    who = zone_name(label, number)
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
