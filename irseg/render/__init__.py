"""Annotated overlay and label images of one analysed thermogram (arrays only).

:func:`render_overlay` turns a corrected thermogram, its segmentation and its analysis into one
RGB picture (at display size: a thermogram longer than :data:`MAX_DISPLAY_SIDE` pixels is shown
reduced): the surface temperature in an open colour map, every anomaly outlined in the
colour of its probable cause with its id, a °C colour bar, a metre scale bar and a title line.
:func:`label_image` gives the 16-bit label image (pixel = anomaly id). Encoding and saving are
the job of :mod:`irseg.io`; nothing here touches the filesystem.
"""

from __future__ import annotations

from ._confirm_marks import draw_confirm_marks
from ._difference import diverging_lut, render_difference
from ._colours import COLORMAPS, colormap_lut, display_range
from ._layout import MAX_DISPLAY_SIDE, OverlayLayout, overlay_layout, scale_bar_length_m
from ._overlay import draw_zones, label_image, overlay_range_c, render_overlay

__all__ = [
    "COLORMAPS",
    "MAX_DISPLAY_SIDE",
    "OverlayLayout",
    "colormap_lut",
    "display_range",
    "overlay_layout",
    "scale_bar_length_m",
    "render_overlay",
    "label_image",
    "draw_zones",
    "draw_confirm_marks",
    "overlay_range_c",
    "render_difference",
    "diverging_lut",
]
