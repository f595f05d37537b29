"""Where to confirm a roof moisture anomaly: one point wet, one at its edge, one in sound roof.

Infrared findings on a roof are confirmed with cores or a moisture probe (ASTM C1153 describes
confirming the infrared survey by core samples); the usual practice takes one reading inside
the suspect area, one at its boundary and one in sound roof nearby, so that the wet and the dry
readings bracket the boundary the thermogram shows. This module proposes those three points for
each moisture anomaly of a roof view, as pixel coordinates and, when one pixel's size on the
surface is known, metres from the image's top-left corner.

Pure functions of arrays and records; :func:`confirm_points` runs after the analysis.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

__all__ = ["CONFIRM_COLUMNS", "CONFIRM_KINDS", "DRY_GAP_M", "DRY_GAP_PX", "ConfirmPoint", "confirm_points"]

#: Columns of OUT/confirm_points.csv, in order (an interface).
CONFIRM_COLUMNS = ("uid", "point", "kind", "row", "col", "x_m", "y_m")

#: Kinds of point, in the order proposed.
CONFIRM_KINDS = ("wet", "edge", "dry")

#: Smallest distance of the dry point from any anomaly, metres, when the pixel size is known
#: (common practice: clear of the boundary's uncertainty, still on the same roof area).
DRY_GAP_M = 0.3

#: The same distance in pixels when the pixel size is not known, and the least ever used.
DRY_GAP_PX = 5

#: Side of the box average that smooths the temperature before looking for the warmest point (px).
_SMOOTH_PX = 3


@dataclass(frozen=True)
class ConfirmPoint:
    """One proposed confirmation point.

    Attributes
    ----------
    anomaly : int
        The anomaly's id in its image.
    point : int
        Number drawn on the overlay: 1, 2, 3 ... in the image, three per anomaly in id order.
    kind : {"wet", "edge", "dry"}
    row, col : int
        The pixel.
    x_m, y_m : float or None
        The pixel's centre in metres from the image's top-left corner (``(col + 0.5) × pixel_m``,
        ``(row + 0.5) × pixel_m``); None without the pixel size. On an oblique view one axis is
        foreshortened by cos(tilt): measure from a landmark on site.
    """

    anomaly: int
    point: int
    kind: str
    row: int
    col: int
    x_m: float | None = None
    y_m: float | None = None


def _nearest(candidates: np.ndarray, row: float, col: float) -> tuple[int, int] | None:
    """The candidate pixel nearest to (row, col); ties go to the first in raster order."""
    rows, cols = np.nonzero(candidates)
    if rows.size == 0:
        return None
    k = int(np.argmin((rows - row) ** 2 + (cols - col) ** 2))
    return int(rows[k]), int(cols[k])


def _three(temp: np.ndarray, valid: np.ndarray, labels: np.ndarray, region: np.ndarray,
           gap_px: int) -> list[tuple[str, tuple[int, int]]]:
    from scipy import ndimage as ndi

    region = ndi.binary_fill_holes(region)  # a hole in a wet area is wet area: its rim is no boundary
    inside = region & valid
    if not inside.any():
        return []
    depth = ndi.distance_transform_edt(np.pad(region, 1))[1:-1, 1:-1]
    smooth = ndi.uniform_filter(np.where(inside, temp, 0.0), _SMOOTH_PX, mode="constant")
    weight = ndi.uniform_filter(inside.astype(float), _SMOOTH_PX, mode="constant")
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(inside & (weight > 0), smooth / np.where(weight > 0, weight, 1.0), -np.inf)
    hot = np.unravel_index(int(np.argmax(mean)), mean.shape)
    # wet: well inside (the inner half of the area's depth), as near the warmest point as that allows
    core = inside & (depth >= max(1.0, 0.5 * float(depth[inside].max())))
    wet = _nearest(core, *hot)
    points: list[tuple[str, tuple[int, int]]] = [("wet", wet)]
    boundary = inside & ~ndi.binary_erosion(region, border_value=0)
    edge = _nearest(boundary, *wet)
    if edge is not None:
        points.append(("edge", edge))
    anomalies = ndi.binary_fill_holes(labels > 0)
    for gap in dict.fromkeys((gap_px, 1)):  # relax to any sound pixel when the roof is small
        clear = ndi.distance_transform_edt(~anomalies) > gap if anomalies.any() else np.ones_like(anomalies)
        dry = _nearest(valid & ~anomalies & clear, *(edge or wet))
        if dry is not None:
            points.append(("dry", dry))
            break
    return points


def confirm_points(
    temperature_c: Any, mask: Any, labels: Any, anomalies: Iterable[Any], *, pixel_m: float | None = None,
    view: str | None = "roof",
) -> tuple[ConfirmPoint, ...]:
    """Confirmation points of every moisture anomaly of a roof view.

    Parameters
    ----------
    temperature_c : (M, N) array
        Surface temperature, °C.
    mask : (M, N) bool array or None
        Invalid pixels (and excluded zones): never proposed.
    labels : (M, N) int array
        Anomaly id per pixel (0 = sound), as ``Analysis.labels``.
    anomalies : iterable
        Records with ``anomaly`` (id) and ``cause``; only ``"moisture"`` ones get points.
    pixel_m : float, optional
        One pixel's side on the surface, m: gives ``x_m``, ``y_m``.
    view : str, optional
        ``[surface] view``; points are proposed for ``"roof"`` only.

    Returns
    -------
    tuple of ConfirmPoint
        Per anomaly in id order, its holes filled: ``wet`` (inside the area, at least half its depth from the
        boundary, nearest to its warmest point after a 3×3 average), ``edge`` (the boundary
        pixel nearest to the wet point), ``dry`` (the sound pixel nearest to the edge point that is
        more than 0.3 m, or 5 px without the pixel size, from any anomaly; any sound pixel when
        none is that far). Numbered 1, 2, 3 ... across the image.
    """
    if view != "roof":
        return ()
    labels = np.asarray(labels)
    temp = np.asarray(temperature_c, dtype=float)
    valid = np.isfinite(temp) if mask is None else ~np.asarray(mask, bool) & np.isfinite(temp)
    size = float(pixel_m) if pixel_m is not None and math.isfinite(float(pixel_m)) and pixel_m > 0 else None
    gap_px = DRY_GAP_PX if size is None else max(DRY_GAP_PX, math.ceil(DRY_GAP_M / size))
    out: list[ConfirmPoint] = []
    for a in sorted((a for a in anomalies if getattr(a, "cause", None) == "moisture"), key=lambda a: int(a.anomaly)):
        for kind, (row, col) in _three(temp, valid, labels, labels == int(a.anomaly), gap_px):
            x_m = None if size is None else (col + 0.5) * size
            y_m = None if size is None else (row + 0.5) * size
            out.append(ConfirmPoint(int(a.anomaly), len(out) + 1, kind, row, col, x_m, y_m))
    return tuple(out)
