"""Numbered confirmation marks on an overlay canvas (irseg.render.draw_confirm_marks)."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from irseg.render import draw_confirm_marks, overlay_layout
from irseg.render._confirm_marks import CONFIRM_MARK_COLOURS


def test_each_mark_is_centred_on_its_pixel_in_its_kind_colour():
    shape = (60, 80)
    lay = overlay_layout(shape)
    canvas = np.zeros(lay.shape, np.uint8)
    points = [SimpleNamespace(point=1, kind="wet", row=10, col=20), SimpleNamespace(point=2, kind="edge", row=40, col=60)]
    draw_confirm_marks(canvas, points, lay)
    for p in points:
        # the display pixel of thermogram pixel (r, c) is image_row0 + (r + 0.5) * scale (overlay_layout)
        y = int(lay.image_row0 + (p.row + 0.5) * lay.scale)
        x = int(lay.image_col0 + (p.col + 0.5) * lay.scale)
        colour = np.array(CONFIRM_MARK_COLOURS[p.kind], np.uint8)
        assert (canvas[y, x] == colour).all()  # the cross's centre
        ring = canvas[y - 8:y + 9, x - 8:x + 9]
        assert (ring == colour).all(axis=-1).sum() > 20
    untouched = canvas[lay.image_row0 + 200:, :40]
    assert not untouched.any()
