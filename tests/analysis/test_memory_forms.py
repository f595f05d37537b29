"""The analysis' memory-light forms give what the whole-frame forms gave (issue 15, memory).

Each check compares a compact or band-by-band form with the direct NumPy expression it replaces
(NumPy's own indexing, assignment and comparison semantics, common practice), with band sizes that
put band edges everywhere. No memory figure is asserted here: the peak per pixel is measured by
``benchmarks/bench_memory.py``.
"""

from __future__ import annotations

import numpy as np
import pytest

from irseg.analysis import _emitters, _reference
from irseg.analysis._emitters import emitter_mask
from irseg.analysis._reference import FieldWrites, _sample_pixels


def test_kept_writes_replayed_give_the_directly_written_field(rng):
    # the writes the measuring steps make: (rows, cols) with float64 values into a float32 field,
    # flat indices with float32 values, overlapping so that the order matters
    shape = (37, 53)
    base = rng.normal(20.0, 1.0, shape).astype(np.float32)
    base[rng.random(shape) < 0.05] = np.nan
    direct = base.copy()
    kept = FieldWrites(shape, np.float32)
    for k in range(6):
        rows = rng.integers(0, shape[0], 200)
        cols = rng.integers(0, shape[1], 200)
        values = rng.normal(19.0, 2.0, 200)  # float64: cast to float32 by the assignment
        direct[rows, cols] = values
        kept[rows, cols] = values
        flat = rng.integers(0, base.size, 150)
        fvalues = rng.normal(18.0, 1.0, 150).astype(np.float32)
        direct.flat[flat] = fvalues
        kept.flat[flat] = fvalues
        if k == 3:
            direct[4, 5] = 1.25  # a scalar write, as a broadcast assignment
            kept[np.array([4]), np.array([5])] = 1.25
    np.testing.assert_array_equal(kept.apply(base.copy()), direct)


def test_kept_writes_refuse_reading_and_boolean_masks():
    kept = FieldWrites((4, 5), np.float64)
    with pytest.raises(TypeError):
        kept[1, 2]  # noqa: B018 - reading is refused: nothing was formed yet
    with pytest.raises(TypeError):
        kept.flat[np.ones(20, bool)] = 1.0


@pytest.mark.parametrize("band", [1, 3, 7, 256])
@pytest.mark.parametrize("max_samples", [1, 5, 50, 10_000])
def test_sample_pixels_by_bands_are_every_step_th_pixel_in_raster_order(monkeypatch, rng, band, max_samples):
    monkeypatch.setattr(_reference, "_BAND_ROWS", band)
    mask = rng.random((29, 31)) < 0.4
    mask[5:9] = False  # empty bands too
    idx = np.flatnonzero(mask)
    step = max(1, idx.size // max_samples)
    want_r, want_c = np.divmod(idx[::step], mask.shape[1])
    got_r, got_c = _sample_pixels(mask, max_samples)
    np.testing.assert_array_equal(got_r, want_r)
    np.testing.assert_array_equal(got_c, want_c)
    assert got_r.dtype == want_r.dtype and got_c.dtype == want_c.dtype


@pytest.mark.parametrize("band", [1, 4, 256])
def test_emitters_told_in_float64_by_bands_as_from_a_float64_copy(monkeypatch, band):
    monkeypatch.setattr(_emitters, "_BAND_ROWS", band)
    inside_c = 19.1  # 22.1 °C, the emitter threshold, is not a float32 number: float32(22.1) lies above it
    limit = inside_c + _emitters.EMITTER_MARGIN_K
    just_above = np.float32(limit)  # rounded up to 22.10000038 (IEEE 754 binary32, round to nearest)
    assert float(just_above) > limit and not (just_above > np.float32(limit))  # float32 alone says "not warmer"
    t = np.full((24, 30), 18.0, np.float32)
    t[6:14, 8:20] = just_above  # warmer than the limit in float64 only
    t[18:22, 2:6] = 30.0
    valid = np.ones(t.shape, bool)
    valid[0, :] = False
    got = emitter_mask(t, valid, view="interior", inside_c=inside_c)
    want = emitter_mask(t.astype(np.float64), valid, view="interior", inside_c=inside_c)
    np.testing.assert_array_equal(got, want)
    assert got[10, 12] and got[20, 4]


def test_a_candidate_forms_its_pixels_distances_and_reference_as_the_held_arrays_were():
    # the arrays a candidate used to hold: np.nonzero of its region, scipy's exact Euclidean distance
    # transform of the rest of its crop, the ring plane evaluated on its pixels
    from scipy import ndimage

    from irseg.analysis._candidates import Candidate
    from irseg.analysis._reference import Plane, RingReference

    region = np.zeros((9, 12), bool)
    region[2:6, 3:9] = True
    region[6, 4] = True
    plane = Plane(20.0, 0.01, -0.02, 15.0, 40.0, 0.05, 30)
    ref = RingReference(plane, 0.05, 30, "ring")
    lazy = Candidate(7, 11, 33, (slice(11, 20), slice(33, 45)), region, None, ref, 18.0, 20.0, -2.0, 2.0)
    rr, cc = np.nonzero(region)
    np.testing.assert_array_equal(lazy.rr, rr)
    np.testing.assert_array_equal(lazy.cc, cc)
    np.testing.assert_array_equal(lazy.dist, ndimage.distance_transform_edt(~region))
    np.testing.assert_array_equal(lazy.ref_in, plane.evaluate(rr + 11.0, cc + 33.0))
    assert lazy.n_px == 25 and lazy.rim_reach_px == 3.0
    held = Candidate(7, 11, 33, lazy.crop, region, np.zeros(region.shape), ref, 18.0, 20.0, -2.0, 2.0,
                     rr[:3], cc[:3], np.ones(3))
    assert held.n_px == 3 and held.dist.sum() == 0.0 and held.ref_in.tolist() == [1.0, 1.0, 1.0]  # kept as given
    # reads of two candidates in turn (the last one read keeps what it formed) give each its own arrays
    other_region = np.zeros((5, 6), bool)
    other_region[1:4, 2] = True
    other = Candidate(8, 0, 0, (slice(0, 5), slice(0, 6)), other_region, None, ref, 18.0, 20.0, -2.0, 2.0)
    for _ in range(2):
        np.testing.assert_array_equal(other.dist, ndimage.distance_transform_edt(~other_region))
        np.testing.assert_array_equal(lazy.dist, ndimage.distance_transform_edt(~region))
        np.testing.assert_array_equal(other.rr, np.nonzero(other_region)[0])
        np.testing.assert_array_equal(lazy.ref_in, plane.evaluate(rr + 11.0, cc + 33.0))
        np.testing.assert_array_equal(other.ref_in, plane.evaluate(np.nonzero(other_region)[0] + 0.0,
                                                                   np.nonzero(other_region)[1] + 0.0))


@pytest.mark.parametrize("shape", [(1, 1), (1, 17), (23, 1), (61, 97), (700, 900)])
def test_distance_to_zeros_is_scipys_exact_distance_transform_value_for_value(shape):
    # [C] scipy.ndimage.distance_transform_edt is the reference exact Euclidean distance transform
    # (float64 square roots of integer squared distances); the OpenCV-based form must equal it bit for bit
    from scipy import ndimage

    from irseg.analysis._reach import distance_to_zeros

    rng = np.random.default_rng(sum(shape))
    for density in (0.0005, 0.02, 0.6):
        mask = rng.random(shape) > density
        mask.flat[rng.integers(0, mask.size)] = False  # at least one zero
        assert np.array_equal(distance_to_zeros(mask), ndimage.distance_transform_edt(mask))
    yy, xx = np.mgrid[: shape[0], : shape[1]]
    disk = (yy - shape[0] / 3) ** 2 + (xx - shape[1] / 2) ** 2 > (0.2 * min(shape)) ** 2
    assert np.array_equal(distance_to_zeros(disk), ndimage.distance_transform_edt(disk))
    ones = np.ones(shape, bool)  # no zero at all: scipy's own answer
    assert np.array_equal(distance_to_zeros(ones), ndimage.distance_transform_edt(ones))


def test_near_sources_agrees_with_scipys_exact_distance_transform():
    # [C] scipy.ndimage.distance_transform_edt is the reference exact Euclidean distance transform;
    # OpenCV's DIST_MASK_PRECISE must give the same pixels within reach (radii chosen off the
    # square roots of integers, where float32 rounding could tip a pixel)
    from scipy import ndimage

    from irseg.analysis._reach import near_sources, within_reach

    rng = np.random.default_rng(5)
    far = (rng.random((90, 130)) > 0.003).astype(np.uint8)
    far[40:50, 60:75] = 0
    for reach in (0.5, 2.3, 7.7, 25.4, 300.2):
        expected = ndimage.distance_transform_edt(far.astype(bool)) <= reach
        assert np.array_equal(near_sources(far, reach), expected)
    assert near_sources(np.ones((4, 5), np.uint8), 3.0).sum() == 0  # no source: nothing near
    assert near_sources(np.zeros((4, 5), np.uint8), 3.0).all()
    # within_reach on flat indices, cropped to the pixels' box, against the whole-frame transform
    shape = (90, 130)
    idx = np.flatnonzero(far == 0)
    pix = rng.choice(shape[0] * shape[1], 2000, replace=False)
    whole = ndimage.distance_transform_edt(far.astype(bool)).ravel()[pix] <= 11.6
    assert np.array_equal(within_reach(idx, pix, 11.6, shape), whole)


def test_group_max_is_numpys_maximum_at(rng):
    # the per-slice profiles of a detected anomaly's shape: NumPy's unbuffered np.maximum.at into a −inf
    # array is the reference (its semantics, NaN propagation included, common practice)
    from irseg.analysis._scales import _group_max

    for k in range(60):
        n = int(rng.integers(1, 40))
        size = int(rng.integers(0, 250))
        keys = rng.integers(0, n, size)
        values = rng.normal(0.0, 1.0, size).astype(np.float32 if k % 2 else np.float64)
        if k % 5 == 0 and size:
            values[rng.integers(0, size)] = np.nan
        expected = np.full(n, -np.inf)
        with np.errstate(invalid="ignore"):
            np.maximum.at(expected, keys, values)
            got = _group_max(keys, values, n)
        assert np.array_equal(got, expected, equal_nan=True)


def test_shape_outline_erosion_is_scipys_binary_erosion(rng):
    # reference library: scipy.ndimage.binary_erosion with its defaults (cross, border_value=0)
    from scipy import ndimage

    from irseg.analysis._shape import _eroded

    for shape in ((1, 1), (1, 9), (7, 1), (2, 2), (31, 47)):
        for density in (0.3, 0.8, 1.0):
            region = rng.random(shape) < density
            assert np.array_equal(_eroded(region), ndimage.binary_erosion(region))


def test_gradient_at_some_pixels_is_numpys_gradient_there(rng):
    # NumPy's np.gradient (central differences inside, one-sided at the border) is the reference
    from irseg.analysis._components import _gradient_at

    for shape in ((2, 2), (2, 9), (9, 2), (17, 23), (64, 48)):
        for dtype in (np.float32, np.float64):
            f = rng.normal(0.0, 3.0, shape).astype(dtype)
            rr, cc = np.nonzero(rng.random(shape) < 0.4)
            gr, gc = np.gradient(f)
            got_r, got_c = _gradient_at(f, rr, cc)
            assert got_r.dtype == dtype and np.array_equal(got_r, gr[rr, cc]) and np.array_equal(got_c, gc[rr, cc])


def test_fill_holes_is_scipys(rng):
    # reference library: scipy.ndimage.binary_fill_holes with its defaults (background 4-connected to the border)
    from scipy import ndimage

    from irseg.analysis._scales import _fill_holes

    for shape in ((1, 1), (3, 1), (1, 5), (25, 31), (80, 60)):
        for density in (0.3, 0.55, 0.7):
            mask = rng.random(shape) < density
            assert np.array_equal(_fill_holes(mask), ndimage.binary_fill_holes(mask))
