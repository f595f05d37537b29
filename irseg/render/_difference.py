"""The difference picture of a pair (``difference.png``): ΔT with the leaks outlined (arrays only).

ΔT = pressurised − registered reference, drift removed, K, in a diverging scale symmetric about
zero (blue: cooled, grey: unchanged, red: warmed; the end colours of K. Moreland's cool-warm
map, "Diverging Color Maps for Scientific Visualization", ISVC 2009, joined through a neutral
grey), pixels the reference does not cover as the no-data checkerboard, each pair anomaly
outlined in the air-leakage colour with its id, a colour bar in K, and a header giving the
pressure and the registration (shift, rotation, scale, overlap and its residual in pixels).
"""

from __future__ import annotations

import math
from typing import Any

import cv2
import numpy as np

from ..vocabulary import CAUSE_COLOURS
from ._layout import BACKGROUND, overlay_layout
from ._margins import FONT_SCALE, FOREGROUND, LEFT, MUTED, NO_DATA, TITLE_SCALE, _fit, draw_colour_bar
from ._overlay import _block_reduce, _draw_ids, _draw_outlines
from ._text import draw_text

__all__ = ["render_difference", "diverging_lut"]

_COOL, _MID, _WARM = (59, 76, 192), (221, 221, 221), (180, 4, 38)


def diverging_lut() -> np.ndarray:
    """256 RGB entries from blue (0, most cooled) through grey (127.5, unchanged) to red (255)."""
    t = np.linspace(0.0, 1.0, 256)[:, None]
    low = np.array(_COOL) + (np.array(_MID) - np.array(_COOL)) * np.clip(2 * t, 0, 1)
    high = np.array(_MID) + (np.array(_WARM) - np.array(_MID)) * np.clip(2 * t - 1, 0, 1)
    return np.round(np.where(t <= 0.5, low, high)).astype(np.uint8)


def _range_k(difference_k: np.ndarray) -> float:
    """Half-width of the symmetric scale: the 99.5th percentile of |ΔT|, at least 0.5 K, rounded up."""
    finite = np.abs(difference_k[np.isfinite(difference_k)])
    top = float(np.percentile(finite, 99.5)) if finite.size else 1.0
    return max(0.5, math.ceil(top * 4.0) / 4.0)


def render_difference(difference_k: np.ndarray, labels: np.ndarray, anomalies: Any, *, title: str,
                      header: str) -> np.ndarray:
    """Draw the difference picture of one pair.

    Parameters
    ----------
    difference_k : (M, N) float ndarray
        ΔT, K; NaN where the reference does not cover the image.
    labels : (M, N) int ndarray
        Pair anomaly ids (0 elsewhere).
    anomalies : sequence
        Records with ``anomaly``, ``cause``, ``bbox_*`` and ``centroid_*`` (``irseg.pairs.PairAnomaly``).
    title, header : str
        The two lines at the top (the image, the leak count; pressure and registration).

    Returns
    -------
    (M', N', 3) uint8 ndarray
        RGB, laid out as the overlay (:func:`irseg.render.overlay_layout`).
    """
    diff = np.asarray(difference_k, dtype=np.float32)
    lay = overlay_layout(diff.shape)
    s, k = lay.scale, lay.shrink
    half = _range_k(diff)
    nodata = ~np.isfinite(diff)
    if k > 1:
        diff = _block_reduce(np.nan_to_num(diff), k, "mean")
        nodata = _block_reduce(nodata, k, "majority")
    lut = diverging_lut()
    idx = np.clip((np.nan_to_num(diff) + half) * (255.0 / (2 * half)) + 0.5, 0, 255).astype(np.uint8)
    rgb = lut[idx]
    if nodata.any():
        checker = (np.add.outer(np.arange(diff.shape[0]), np.arange(diff.shape[1])) & 1) == 0
        rgb[nodata & checker] = NO_DATA[0]
        rgb[nodata & ~checker] = NO_DATA[1]
    if s > 1:
        rgb = np.repeat(np.repeat(rgb, s, axis=0), s, axis=1)
    canvas = np.empty(lay.shape, dtype=np.uint8)
    canvas[...] = BACKGROUND
    canvas[lay.image_row0:lay.image_row0 + lay.image_rows, lay.image_col0:lay.image_col0 + lay.image_cols] = rgb
    records = tuple(anomalies)
    _draw_outlines(canvas, np.asarray(labels), records, lay)
    _draw_ids(canvas, records, lay)
    draw_colour_bar(canvas, lut, -half, half, lay, unit="K")
    width = lay.shape[1] - 2 * LEFT
    draw_text(canvas, _fit(title, width, TITLE_SCALE), (LEFT, 19), TITLE_SCALE, FOREGROUND, 1)
    draw_text(canvas, _fit(header, width, FONT_SCALE), (LEFT, 38), FONT_SCALE, MUTED, 1)
    y = lay.legend_row0 + 24
    cv2.rectangle(canvas, (LEFT, y - 10), (LEFT + 14, y + 2), CAUSE_COLOURS["air_leakage"], 2)
    legend = "air leakage: found between the shots; blue cooled, red warmed, grey unchanged"
    draw_text(canvas, _fit(legend, width - 24, FONT_SCALE), (LEFT + 22, y), FONT_SCALE, FOREGROUND, 1)
    return canvas
