"""The difference picture of a pair: scale, no-data pixels, outlines, layout."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from irseg.render import diverging_lut, overlay_layout, render_difference
from irseg.vocabulary import CAUSE_COLOURS


def test_the_scale_is_symmetric_and_its_ends_are_the_cool_warm_end_colours():
    lut = diverging_lut()
    # K. Moreland, "Diverging Color Maps for Scientific Visualization" (ISVC 2009): the cool-warm map's
    # end colours (59, 76, 192) and (180, 4, 38) [M: recalled from the paper, not re-read]
    assert tuple(lut[0]) == (59, 76, 192) and tuple(lut[255]) == (180, 4, 38)
    assert abs(int(lut[127][0]) - 221) <= 1 and abs(int(lut[128][0]) - 221) <= 1  # neutral grey at zero
    assert lut.shape == (256, 3) and lut.dtype == np.uint8


def test_leaks_are_outlined_and_uncovered_pixels_are_no_data():
    diff = np.zeros((60, 80), np.float32)
    diff[20:30, 30:45] = -1.5
    diff[:, :5] = np.nan
    labels = np.zeros((60, 80), np.int32)
    labels[20:30, 30:45] = 7
    leak = SimpleNamespace(anomaly=7, cause="air_leakage", bbox_row0=20, bbox_col0=30, bbox_row1=30, bbox_col1=45,
                           centroid_row=24.5, centroid_col=37.0)
    picture = render_difference(diff, labels, [leak], title="wall | 1 leak at 50 Pa", header="residual 0.05 px")
    lay = overlay_layout(diff.shape)
    assert picture.shape == lay.shape and picture.dtype == np.uint8
    image = picture[lay.image_row0:lay.image_row0 + lay.image_rows, lay.image_col0:lay.image_col0 + lay.image_cols]
    assert (image == np.array(CAUSE_COLOURS["air_leakage"], np.uint8)).all(axis=2).any()
    s = lay.scale
    grey = image[40 * s, 60 * s]
    assert abs(int(grey[0]) - 221) <= 2  # ΔT = 0 is the neutral grey
    corner = image[2 * s:4 * s, 0:2 * s].reshape(-1, 3)  # the checkerboard of pixels without a reference
    assert len({tuple(c) for c in corner}) == 2
