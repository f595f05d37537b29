"""Numbered confirmation marks on a roof overlay (where to take a core or a moisture reading)."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

import cv2
import numpy as np

from ._layout import ID_SCALE, OverlayLayout
from ._text import draw_text, text_width

__all__ = ["draw_confirm_marks", "CONFIRM_MARK_COLOURS"]

#: Ring colour of each kind of point (R, G, B): wet yellow, edge orange, dry white.
CONFIRM_MARK_COLOURS = {"wet": (255, 230, 0), "edge": (255, 140, 0), "dry": (255, 255, 255)}


def draw_confirm_marks(canvas: np.ndarray, points: Iterable[Any], lay: OverlayLayout) -> None:
    """Draw each point as a ringed cross with its number, in place.

    Parameters
    ----------
    canvas : (M', N', 3) uint8 ndarray
        The overlay from :func:`irseg.render.render_overlay`, laid out by ``lay``.
    points : iterable
        Records with ``row``, ``col`` (thermogram pixels), ``point`` (number) and ``kind``
        (``wet``, ``edge`` or ``dry``), e.g. :class:`irseg.repairs.ConfirmPoint`.
    lay : OverlayLayout
        :func:`irseg.render.overlay_layout` of the thermogram.
    """
    s, k = lay.scale, lay.shrink  # display pixels per thermogram pixel: s / k
    for p in points:
        x = int(lay.image_col0 + (int(p.col) + 0.5) * s / k)
        y = int(lay.image_row0 + (int(p.row) + 0.5) * s / k)
        colour = CONFIRM_MARK_COLOURS.get(str(p.kind), CONFIRM_MARK_COLOURS["dry"])
        cv2.circle(canvas, (x, y), 6, (0, 0, 0), 3, lineType=cv2.LINE_8)
        cv2.circle(canvas, (x, y), 6, colour, 1, lineType=cv2.LINE_8)
        cv2.line(canvas, (x - 3, y), (x + 3, y), colour, 1)
        cv2.line(canvas, (x, y - 3), (x, y + 3), colour, 1)
        text = str(int(p.point))
        w = text_width(text, ID_SCALE, 1)
        x0 = max(0, min(x + 8, canvas.shape[1] - w - 4))
        y0 = max(0, min(y - 8, canvas.shape[0] - 16))
        cv2.rectangle(canvas, (x0 - 2, y0 - 1), (x0 + w + 2, y0 + 14), (0, 0, 0), -1)
        draw_text(canvas, text, (x0, y0 + 11), ID_SCALE, colour, 1)
