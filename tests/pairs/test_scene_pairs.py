"""The pair scene maker's truth: its transform, drift and footprints describe the shots it makes."""

from __future__ import annotations

import numpy as np
from scipy import ndimage

from irseg.scenes._pairs import LEAK_FRACTION, _PSF_PX, make_pair


def test_the_true_transform_brings_the_reference_onto_the_pressurised_shot():
    scene = make_pair(3, n_rows=240, n_cols=320, netd_k=0.0)
    m, n = scene.pressed_c.shape
    rows, cols = np.mgrid[0:m, 0:n].astype(float)
    q_cols = scene.matrix[0, 0] * cols + scene.matrix[0, 1] * rows + scene.matrix[0, 2]
    q_rows = scene.matrix[1, 0] * cols + scene.matrix[1, 1] * rows + scene.matrix[1, 2]
    # scipy.ndimage.map_coordinates samples the reference where the truth says each pixel came from
    moved = ndimage.map_coordinates(scene.reference_c, [q_rows, q_cols], order=3, mode="nearest")
    inside = (q_rows > 5) & (q_rows < m - 6) & (q_cols > 5) & (q_cols < n - 6)
    outside_leaks = inside & ~ndimage.binary_dilation(scene.footprints.any(axis=0), iterations=25)
    change = scene.pressed_c - moved
    # [C] by construction: away from the leaks the shots differ by the drift (a few tenths of a kelvin, a
    # slope of ±0.1 K across the frame) and by resampling at sharp edges (the window's glass)
    assert abs(float(np.median(change[outside_leaks])) - scene.drift_k) < 0.03
    assert float(np.percentile(np.abs(change[outside_leaks] - scene.drift_k), 90)) < 0.1


def test_each_footprint_holds_its_share_of_the_jets_peak_and_the_far_pair_has_none():
    scene = make_pair(5, n_rows=240, n_cols=320)
    assert scene.footprints.shape == (4, 240, 320) and len(scene.jets) == 4
    assert all(fp.sum() > 50 for fp in scene.footprints)
    assert not (scene.footprints[0] & scene.footprints[1]).any()  # the jets stay apart
    assert LEAK_FRACTION == 0.3 and _PSF_PX > 0
    assert -0.4 <= scene.drift_k <= -0.15
    assert abs(scene.rotation_deg) <= 3.0 and 1.0 <= scene.zoom <= 1.02
    assert max(abs(v) for v in scene.shift_px) <= 20.0
    far = make_pair(5, n_rows=240, n_cols=320, far=True)
    assert far.footprints.shape[0] == 0 and far.jets == ()
