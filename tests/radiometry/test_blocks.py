"""Radiometry done block by block (issue 15, memory) gives what the whole frame gives.

``calibrate`` converts radiances and forms 3×3 medians one block of rows at a time
(``irseg.radiometry._dead_pixels.BLOCK_ROWS``) and returns float32 temperatures. These checks
run small frames with blocks of 1 to 7 rows, so that every block boundary falls next to a
dead pixel, a NaN patch or a step, against one block holding the whole frame, and against
the measurement equation and scipy's median filter. No memory figure is asserted here:
the peak per pixel is measured by ``benchmarks/bench_memory.py``.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage

from irseg.radiometry import (
    _dead_pixels,
    apparent_to_object,
    calibrate,
    fill_masked,
    mask_dead_pixels,
    object_to_apparent,
)
from irseg.types import Camera, RawFrame, Surface, SurveyMeta


def _scene(rng) -> np.ndarray:
    """An interior wall (float32 apparent °C) with a cold patch, dead pixels on block edges and NaNs."""
    img = (19.0 + rng.normal(0.0, 0.05, (29, 23))).astype(np.float32)
    img[6:15, 4:12] -= 2.5  # a cold patch across several blocks
    for r, c in ((0, 0), (6, 17), (7, 3), (13, 20), (14, 9), (28, 22)):
        img[r, c] += 9.0  # isolated hot pixels, at the frame's corners and on both sides of block edges
    img[20:22, 5:8] = np.nan  # a dead patch
    img[27, 1] = np.nan
    return img


def _calibrate(img, meta, monkeypatch, rows: int, **kwargs):
    monkeypatch.setattr(_dead_pixels, "BLOCK_ROWS", rows)
    return calibrate(RawFrame(path="wall.npy", data=img, format="npy"), meta, **kwargs)


@pytest.mark.parametrize("rows", [1, 2, 5, 7])
def test_calibrate_in_blocks_equals_the_whole_frame(rng, monkeypatch, rows):
    img = _scene(rng)
    meta = SurveyMeta(surface=Surface(emissivity=0.93, reflected_c=20.0))
    whole = _calibrate(img, meta, monkeypatch, 10_000)
    blocks = _calibrate(img, meta, monkeypatch, rows)
    np.testing.assert_array_equal(blocks.mask, whole.mask)
    np.testing.assert_array_equal(blocks.temperature_c, whole.temperature_c)
    assert (blocks.n_dead, blocks.n_nan) == (whole.n_dead, whole.n_nan) == (6, 7)
    assert blocks.temperature_c.dtype == np.float32  # half the memory of float64 (issue 15)


@pytest.mark.parametrize("rows", [1, 3])
def test_blocks_keep_the_measurement_equation(rng, monkeypatch, rows):
    # Planck 7.5-14 um with CODATA 2018 constants, measurement equation [C]: a 15.000 °C surface of
    # emissivity 0.93 under reflected 20 °C reads 15.359 °C apparent (as test_calibrate checks)
    app = np.full((11, 9), 15.359, np.float32)
    meta = SurveyMeta(surface=Surface(emissivity=0.93, reflected_c=20.0))
    f = _calibrate(app, meta, monkeypatch, rows)
    np.testing.assert_allclose(f.temperature_c, 15.0, atol=2e-3)
    # float32 keeps the inversion to well under 1 mK: forward again, the reading comes back [C]
    back = object_to_apparent(f.temperature_c.astype(np.float64), emissivity=0.93, reflected_c=20.0)
    np.testing.assert_allclose(back, 15.359, atol=1e-5)


def test_blocks_with_an_emissivity_map_and_an_export_emissivity(monkeypatch):
    # the camera applied emissivity 0.95 / reflected 18 °C to its export; a material zone (rows 4-9)
    # has emissivity 0.85: each pixel is corrected with its own value, whatever the block size
    true_c = np.linspace(5.0, 25.0, 17 * 13).reshape(17, 13)
    eps = np.full(true_c.shape, 0.95)
    eps[4:10] = 0.85
    reading = object_to_apparent(true_c, emissivity=eps, reflected_c=18.0)  # what the sensor saw (eps = 1)
    stored = apparent_to_object(reading, emissivity=0.95, reflected_c=18.0)  # the export's object temperature
    camera = Camera(export_emissivity=0.95, export_reflected_c=18.0)
    meta = SurveyMeta(camera=camera, surface=Surface(emissivity=0.95, reflected_c=18.0))
    whole = _calibrate(stored, meta, monkeypatch, 10_000, emissivity_map=eps)
    blocks = _calibrate(stored, meta, monkeypatch, 4, emissivity_map=eps)
    np.testing.assert_array_equal(blocks.temperature_c, whole.temperature_c)
    # the measurement equation inverted with each pixel's own emissivity gives the true temperature [C]
    np.testing.assert_allclose(blocks.temperature_c, true_c, atol=1e-3)


@pytest.mark.parametrize("rows", [1, 4])
def test_dead_pixels_and_fill_in_blocks_and_in_float32(rng, monkeypatch, rows):
    img = _scene(rng).astype(np.float64)
    invalid = ~np.isfinite(img)
    monkeypatch.setattr(_dead_pixels, "BLOCK_ROWS", 10_000)
    dead64 = mask_dead_pixels(img, invalid=invalid)
    monkeypatch.setattr(_dead_pixels, "BLOCK_ROWS", rows)
    dead32 = mask_dead_pixels(img.astype(np.float32), invalid=invalid)
    np.testing.assert_array_equal(dead32, dead64)
    assert sorted(map(tuple, np.argwhere(dead32).tolist())) == [(0, 0), (6, 17), (7, 3), (13, 20), (14, 9), (28, 22)]
    mask = invalid | dead64
    filled = fill_masked(img.astype(np.float32), mask)
    assert filled.dtype == np.float32 and np.isfinite(filled).all()
    # reference library: scipy.ndimage.median_filter(size=3, mode="mirror") of the frame with every
    # masked pixel replaced by its nearest valid value (scipy's Euclidean distance transform)
    idx = ndimage.distance_transform_edt(mask, return_distances=False, return_indices=True)
    expected = ndimage.median_filter(img[tuple(idx)], size=3, mode="mirror")
    np.testing.assert_allclose(filled[mask], expected[mask], atol=1e-5)
    np.testing.assert_array_equal(filled[~mask], img.astype(np.float32)[~mask])
