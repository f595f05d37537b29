"""Issue 14 overlay features: a fixed colour range, the shot's header, an unslashed zero, outline colours."""

from __future__ import annotations

import itertools

import cv2
import numpy as np
import pytest
from skimage.color import deltaE_ciede2000, rgb2lab

from irseg.errors import ConfigError
from irseg.render import colormap_lut, render_overlay
from irseg.render._colours import COLORMAPS
from irseg.render._layout import overlay_layout
from irseg.render._margins import _header_parts
from irseg.render._text import draw_text
from irseg.types import Air, Camera, ImageDetails, SurveyMeta, Surface
from irseg.vocabulary import CAUSE_COLOURS
from tests.render.test_overlay import make_inputs


def _lab(rgb) -> np.ndarray:
    return rgb2lab(np.asarray(rgb, float).reshape(1, -1, 3) / 255.0)[0]


def test_fixed_range_maps_the_ends_of_the_range_to_the_ends_of_the_map():
    frame, seg, analysis, meta = make_inputs((40, 60), rects=())
    lut = colormap_lut("gray")
    lay = overlay_layout((40, 60))
    # the scene spans 18.0-19.0 °C; a range of 10-30 °C puts it at (18-10)/20*255 ≈ 102..115 grey
    img = render_overlay(frame, seg, analysis, meta, cmap="gray", range_c=(10.0, 30.0))
    area = img[lay.image_row0: lay.image_row0 + lay.image_rows, lay.image_col0: lay.image_col0 + lay.image_cols]
    levels = np.unique(area[..., 0])
    assert levels.min() >= int((18.0 - 10.0) / 20.0 * 255) and levels.max() <= int((19.0 - 10.0) / 20.0 * 255) + 1
    own = render_overlay(frame, seg, analysis, meta, cmap="gray")
    own_area = own[lay.image_row0: lay.image_row0 + lay.image_rows, lay.image_col0: lay.image_col0 + lay.image_cols]
    assert own_area[..., 0].max() - own_area[..., 0].min() > 200  # own range: nearly the whole map
    assert tuple(lut[0]) == (0, 0, 0)
    with pytest.raises(ConfigError, match="range_c"):
        render_overlay(frame, seg, analysis, meta, range_c=(30.0, 10.0))


def test_header_names_view_delta_t_emissivity_reflected_distance_and_time():
    meta = SurveyMeta(surface=Surface(view="interior", emissivity=0.94, reflected_c=19.5),
                      air=Air(inside_c=20.0, outside_c=2.0), camera=Camera(distance_m=3.0),
                      image=ImageDetails(time="2026-01-14 06:40"))
    parts = _header_parts(meta)
    assert parts == ["interior view", "ΔT in–out 18.0 K", "emissivity 0.94", "refl. 19.5 °C", "3.0 m away",
                     "2026-01-14 06:40"]
    assert _header_parts(SurveyMeta())[1] == "ΔT in–out unknown"


def test_zero_is_drawn_without_a_slash():
    # OpenCV's Hershey simplex zero carries a diagonal stroke through its middle (seen on the overlays,
    # issue 14); the zero drawn here is an oval: its centre pixel stays background.
    img = np.zeros((80, 80, 3), np.uint8)
    draw_text(img, "0", (20, 60), 2.0, (255, 255, 255), 2)
    ink = np.nonzero(img[..., 0] > 60)
    r_mid, c_mid = (ink[0].min() + ink[0].max()) // 2, (ink[1].min() + ink[1].max()) // 2
    assert img[r_mid - 2: r_mid + 3, c_mid - 2: c_mid + 3].max() < 60
    font = np.zeros((80, 80, 3), np.uint8)
    cv2.putText(font, "0", (20, 60), cv2.FONT_HERSHEY_SIMPLEX, 2.0, (255, 255, 255), 2)
    fr, fc = np.nonzero(font[..., 0] > 60)
    fm = ((fr.min() + fr.max()) // 2, (fc.min() + fc.max()) // 2)
    assert font[fm[0] - 2: fm[0] + 3, fm[1] - 2: fm[1] + 3].max() > 60  # the font's own zero: slashed


def test_cause_colours_are_distinct_and_none_is_lost_in_any_colour_map():
    # CIEDE2000 (CIE 142-2001) through scikit-image; 20 units is far beyond a just-noticeable
    # difference (about 1-2.3 units, common practice). [CP]
    colours = {c: _lab(rgb)[0] for c, rgb in CAUSE_COLOURS.items()}
    for a, b in itertools.combinations(colours, 2):
        assert deltaE_ciede2000(colours[a], colours[b]) > 20, (a, b)
    # moisture and missing insulation were near hues (blue, cyan) before issue 14
    assert deltaE_ciede2000(colours["moisture"], colours["missing_insulation"]) > 40
    # every outline is light (CIE L* > 55) and drawn over a black casing (L* = 0), so it keeps a contrast of
    # at least 55 L* units against its casing on every colour map, including turbo's green middle
    for cause, lab in colours.items():
        assert lab[0] > 55, cause
    for name in COLORMAPS:
        lut_lab = _lab(colormap_lut(name))
        for cause, lab in colours.items():
            # an outline colour may coincide with one end of a map only (there its black casing carries it):
            # at most a fifth of any map lies within 10 CIEDE2000 units of it (white: the top of gray)
            near = deltaE_ciede2000(lut_lab, np.broadcast_to(lab, lut_lab.shape)) < 10
            assert near.mean() <= 0.2, (name, cause, near.mean())
    # the old thermal-bridge green sat inside turbo's middle: a third of its entries were that close
    old_green = _lab((60, 255, 40))[0]
    turbo = _lab(colormap_lut("turbo"))
    assert (deltaE_ciede2000(turbo, np.broadcast_to(old_green, turbo.shape)) < 20).mean() > \
        (deltaE_ciede2000(turbo, np.broadcast_to(colours["thermal_bridge"], turbo.shape)) < 20).mean()


def test_outline_has_a_black_casing():
    frame, seg, analysis, meta = make_inputs((48, 64), rects=(((8, 8, 24, 28), "missing_insulation"),))
    img = render_overlay(frame, seg, analysis, meta, cmap="turbo")
    colour = np.array(CAUSE_COLOURS["missing_insulation"], np.uint8)
    on_outline = np.all(img == colour, axis=2)
    assert on_outline.any()
    rows, cols = np.nonzero(on_outline)
    lay = overlay_layout((48, 64))
    inner = (rows > lay.image_row0) & (cols > lay.image_col0) & (cols < lay.image_col0 + lay.image_cols)
    r, c = rows[inner][0], cols[inner][0]
    window = img[r - 3: r + 4, c - 3: c + 4].reshape(-1, 3)
    assert (window.sum(axis=1) == 0).any()  # black casing pixels beside the coloured line
