"""Fragments of a damp zone's tide line are no framing member (issue 11, val8 seed 1208).

The shapes below are the tide-line fragments the segmentation cut off the rising-damp zone of the
validation wall (benchmarks/validate_scenes.py, val8_damp_base, camera seed 1208): short pieces
along one horizontal ragged edge, tilted 10-40° from it. Framing members stand side by side
(studs at 400-600 mm centres run over the same height of a wall, common practice) and a straight
member's pieces run along its line; the real sets and lines beside them must still be found.
"""

from __future__ import annotations

import math

from irseg.analysis._framing import find_lines, find_regular_sets
from irseg.analysis._shape import Shape


def _piece(row: float, col: float, length: float, width: float, orientation: float) -> Shape:
    area = int(round(length * width))
    return Shape(area_px=area, perimeter_px=int(2 * (length + width)), length_px=length, width_px=width,
                 elongation=length / width, rect_fill=0.6, solidity=0.9, orientation_deg=orientation,
                 centroid_row=row, centroid_col=col, transition_px=3.0, nonuniformity=0.05, taper=1.0)


PIXEL_M = 0.00388  # 640 px across 2.48 m (the validation wall's frame)


def test_tide_line_fragments_strung_along_one_edge_are_no_set():
    # three fragments at rows 339-347 spread over 300 px: on lines tilted 13-27° they are 0.51 m
    # apart across the line, but they do not stand beside one another
    shapes = {3: _piece(339, 399, 22.2, 4.6, 167), 8: _piece(345, 108, 16.5, 4.2, 153),
              15: _piece(347, 391, 19.3, 3.5, 153)}
    kinds = dict.fromkeys(shapes, "cold")
    assert find_regular_sets(shapes, kinds, pixel_m=PIXEL_M) == {}


def test_studs_side_by_side_are_still_a_set():
    # two studs 130 px (0.50 m) apart over the same height: a set of two at a framing centre [CP]
    shapes = {1: _piece(200, 100, 300, 12, 90), 2: _piece(180, 230, 250, 12, 90)}
    kinds = dict.fromkeys(shapes, "cold")
    found = find_regular_sets(shapes, kinds, pixel_m=PIXEL_M)
    assert set(found) == {1, 2} and found[1][0] == 2 and math.isclose(found[1][1], 130.0)


def test_two_fragments_meeting_at_an_angle_are_no_line():
    # a tide-line fragment at 170° and its neighbour at 29° (elongation 2.9: its axis is its own)
    shapes = {20: _piece(352, 397, 21.1, 6.9, 170), 19: _piece(348, 421, 14.9, 5.2, 29)}
    kinds = dict.fromkeys(shapes, "cold")
    assert find_lines(shapes, kinds, {20: -1.04, 19: -0.58}, pixel_m=PIXEL_M) == {}
    # the same neighbour running along the line joins it: one stud cut in two
    shapes[19] = _piece(352, 421, 14.9, 5.2, 175)
    found = find_lines(shapes, kinds, {20: -1.04, 19: -0.58}, pixel_m=PIXEL_M)
    assert set(found) == {19, 20}
