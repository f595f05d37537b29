"""Confirmation points of roof moisture on a constructed label image (irseg.repairs.confirm_points).

Usual practice of core or probe confirmation (ASTM C1153 describes confirming infrared roof findings
with cores) [M]: one reading inside the wet area, one at its boundary, one in sound roof nearby.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
from scipy import ndimage as ndi

from irseg.repairs import confirm_points

SHAPE = (80, 100)


def _roof():
    """A 2 °C roof with a 30×40 px wet area (rows 20-50, cols 30-70) warmest near (28, 62)."""
    rows, cols = np.indices(SHAPE)
    temp = np.full(SHAPE, 2.0)
    labels = np.zeros(SHAPE, np.int32)
    labels[20:50, 30:70] = 1
    labels[34, 45] = 0  # a hole inside the wet area: its rim is not the boundary
    temp[labels == 1] += 3.0 - 0.05 * np.hypot(rows - 28, cols - 62)[labels == 1]
    labels[60:70, 80:95] = 2  # another anomaly (not moisture): the dry point keeps clear of it
    anomalies = [SimpleNamespace(anomaly=1, cause="moisture"), SimpleNamespace(anomaly=2, cause="unclassified")]
    return temp, labels, anomalies


def test_wet_edge_and_dry_points_on_a_constructed_roof():
    temp, labels, anomalies = _roof()
    points = confirm_points(temp, np.zeros(SHAPE, bool), labels, anomalies, pixel_m=0.01, view="roof")
    assert [(p.anomaly, p.point, p.kind) for p in points] == [(1, 1, "wet"), (1, 2, "edge"), (1, 3, "dry")]
    wet, edge, dry = points
    region = labels == 1
    filled = ndi.binary_fill_holes(region)
    depth = ndi.distance_transform_edt(np.pad(filled, 1))[1:-1, 1:-1]
    # wet: inside, in the inner half of the area's depth (max depth 15 px -> at least 7.5 px in), near (28, 62)
    assert region[wet.row, wet.col] and depth[wet.row, wet.col] >= 7.5
    assert np.hypot(wet.row - 28, wet.col - 62) <= 3.0
    # edge: a pixel of the area with a neighbour outside it (the hole's rim does not count)
    assert region[edge.row, edge.col]
    assert not filled[edge.row - 1:edge.row + 2, edge.col - 1:edge.col + 2].all()
    # dry: sound roof, more than 0.3 m = 30 px from any anomaly, and the nearest such pixel to the edge point
    clear = ndi.distance_transform_edt(labels == 0)
    assert labels[dry.row, dry.col] == 0 and clear[dry.row, dry.col] > 30
    candidates = np.argwhere(clear > 30)
    nearest = np.min(np.hypot(candidates[:, 0] - edge.row, candidates[:, 1] - edge.col))
    assert np.hypot(dry.row - edge.row, dry.col - edge.col) == pytest.approx(nearest)
    # metres from the image's top-left corner, pixel centres: (col + 0.5) × pixel_m, (row + 0.5) × pixel_m
    for p in points:
        assert (p.x_m, p.y_m) == (pytest.approx((p.col + 0.5) * 0.01), pytest.approx((p.row + 0.5) * 0.01))


def test_no_metres_without_the_pixel_size_and_no_points_off_the_roof():
    temp, labels, anomalies = _roof()
    points = confirm_points(temp, None, labels, anomalies, pixel_m=None, view="roof")
    assert len(points) == 3 and all(p.x_m is None and p.y_m is None for p in points)
    # without the pixel size the dry point keeps 5 px clear
    clear = ndi.distance_transform_edt(labels == 0)
    assert clear[points[2].row, points[2].col] > 5
    assert confirm_points(temp, None, labels, anomalies, pixel_m=0.01, view="exterior") == ()


def test_masked_pixels_are_never_proposed():
    temp, labels, anomalies = _roof()
    mask = np.zeros(SHAPE, bool)
    mask[:, :] = True
    mask[10:60, 20:80] = False  # only a window around the wet area is valid
    points = confirm_points(temp, mask, labels, anomalies, pixel_m=0.01, view="roof")
    assert all(not mask[p.row, p.col] for p in points)
    assert [p.kind for p in points][:2] == ["wet", "edge"]
