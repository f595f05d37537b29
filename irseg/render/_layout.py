"""Where things sit in an overlay: margins, the thermogram's upscale, the colour bar, the scale bar."""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..errors import ConfigError
from ._margins import LEFT as _LEFT

__all__ = ["OverlayLayout", "overlay_layout", "scale_bar_length_m", "BACKGROUND", "ID_SCALE", "MAX_DISPLAY_SIDE"]

BACKGROUND = (26, 28, 34)

# layout, display pixels
_TITLE_H = 46
_BOTTOM_H = 64
_PANEL_W = 86
_MIN_AREA_H = 200
_MIN_AREA_W = 380
_TARGET_LONG_SIDE = 480
_MAX_UPSCALE = 16
#: Longest side of the displayed thermogram, display pixels: larger thermograms are shown
#: reduced by a whole factor (block means), so an overlay stays a picture for a screen or a
#: report page (a 8000 x 6000 frame is drawn 1600 x 1200), whatever the sensor.
MAX_DISPLAY_SIDE = 1600
ID_SCALE = 0.45


@dataclass(frozen=True)
class OverlayLayout:
    """Where things sit in an overlay of a given input shape (display pixels).

    Attributes
    ----------
    shape : tuple of int
        ``(M', N', 3)``: shape of the overlay array.
    scale : int
        Integer nearest-neighbour upscale of the thermogram (small sensors are enlarged so that
        the longer side reaches about 480 pixels); 1 when the thermogram is reduced.
    image_row0, image_col0 : int
        Top-left display pixel of the thermogram; input pixel ``(r, c)`` covers display rows
        ``image_row0 + r*scale ... + scale - 1`` and the same for columns.
    image_rows, image_cols : int
        Size of the displayed thermogram, ``M*scale`` and ``N*scale``.
    bar_row0, bar_row1, bar_col0, bar_col1 : int
        The colour bar (rows/columns, end exclusive); the top row is the warm end.
    legend_row0 : int
        First row of the bottom strip (scale bar and cause legend).
    shrink : int
        Whole reduction factor of thermograms whose longer side exceeds
        :data:`MAX_DISPLAY_SIDE` (1 otherwise): display pixel ``(i, j)`` shows the block of
        input rows ``i*shrink ... i*shrink + shrink - 1`` and the same for columns.
    """

    shape: tuple[int, int, int]
    scale: int
    image_row0: int
    image_col0: int
    image_rows: int
    image_cols: int
    bar_row0: int
    bar_row1: int
    bar_col0: int
    bar_col1: int
    legend_row0: int
    shrink: int = 1


def overlay_layout(shape: tuple[int, int]) -> OverlayLayout:
    """Return the layout :func:`render_overlay` uses for an ``(M, N)`` thermogram.

    Parameters
    ----------
    shape : tuple of int
        ``(M, N)``, rows and columns of the thermogram.

    Returns
    -------
    OverlayLayout
        The output shape is ``(46 + max(M*s, 200) + 64, 10 + max(N*s, 380) + 86, 3)`` with the
        upscale ``s = clip(ceil(480 / max(M, N)), 1, 16)``; a thermogram longer than
        :data:`MAX_DISPLAY_SIDE` is shown reduced by ``k = ceil(max(M, N) / 1600)``, as
        ``ceil(M / k)`` by ``ceil(N / k)`` display pixels.
    """
    m, n = int(shape[0]), int(shape[1])
    if m < 1 or n < 1:
        raise ConfigError(f"render_overlay: image shape {shape} is empty; nothing to draw")
    s = int(min(_MAX_UPSCALE, max(1, math.ceil(_TARGET_LONG_SIDE / max(m, n)))))
    k = max(1, -(-max(m, n) // MAX_DISPLAY_SIDE))
    rows, cols = (m * s, n * s) if k == 1 else (-(-m // k), -(-n // k))
    area_h, area_w = max(rows, _MIN_AREA_H), max(cols, _MIN_AREA_W)
    bar_col0 = _LEFT + area_w + 12
    return OverlayLayout(
        shape=(_TITLE_H + area_h + _BOTTOM_H, _LEFT + area_w + _PANEL_W, 3),
        scale=s,
        image_row0=_TITLE_H,
        image_col0=_LEFT,
        image_rows=rows,
        image_cols=cols,
        bar_row0=_TITLE_H + 18,
        bar_row1=_TITLE_H + area_h - 6,
        bar_col0=bar_col0,
        bar_col1=bar_col0 + 14,
        legend_row0=_TITLE_H + area_h,
        shrink=k,
    )


def scale_bar_length_m(pixel_m: float, *, width_px: int) -> float:
    """Length of the overlay's scale bar: the largest 1-2-5 step not above 25 % of the width.

    Parameters
    ----------
    pixel_m : float
        Footprint of one thermogram pixel on the surface, metres (> 0).
    width_px : int
        Width of the thermogram, pixels (input pixels, before any display upscale).

    Returns
    -------
    float
        Bar length, metres (1, 2 or 5 times a power of ten). The bar is drawn
        ``round(length_m / pixel_m * scale)`` display pixels long.
    """
    target = 0.25 * float(width_px) * float(pixel_m)
    mag = 10.0 ** math.floor(math.log10(target))
    best = mag
    for f in (2.0, 5.0):
        if f * mag <= target * (1 + 1e-12):
            best = f * mag
    return float(f"{best:.12g}")
