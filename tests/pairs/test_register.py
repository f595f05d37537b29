"""Registration of the reference onto the pressurised image, checked against scikit-image's warps.

The moved camera is simulated with ``skimage.transform.SimilarityTransform`` and ``skimage.transform.warp``
(scikit-image 0.2x documentation, "Geometrical transformations of images"): the reference library defines
what a shift, rotation and scale are, and irseg must recover them. Convention checked: a positive rotation
turns the +col axis towards +row (scikit-image's ``rotation`` in image coordinates).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import ndimage
from skimage.transform import AffineTransform, SimilarityTransform, warp

from irseg.errors import InputError
from irseg.pairs import MIN_OVERLAP, register


def _wall(rng: np.random.Generator, shape=(240, 320)) -> np.ndarray:
    """A wall with structure: smooth texture, two cold bands (studs), a cold rectangle (a window), °C."""
    m, n = shape
    texture = ndimage.gaussian_filter(rng.normal(0.0, 1.0, shape), 6.0)
    t = 18.5 + 2.0 * texture / texture.std() * 0.15
    t[:, 60:70] -= 0.5
    t[:, 200:212] -= 0.5
    t[80:160, 120:180] -= 3.0
    t[20:30, :] -= 1.0
    return ndimage.gaussian_filter(t, 1.2)


def _moved(reference: np.ndarray, tform: SimilarityTransform) -> np.ndarray:
    """The second shot: ``pressed(p) = reference(T⁻¹ p)`` (skimage.transform.warp takes the inverse map)."""
    return warp(reference, tform.inverse, order=3, mode="edge", preserve_range=True)


def _frame_rms(matrix: np.ndarray, truth: np.ndarray, shape: tuple[int, int]) -> float:
    rows, cols = np.mgrid[0:shape[0], 0:shape[1]]
    pts = np.stack([cols.ravel(), rows.ravel(), np.ones(rows.size)])
    return float(np.sqrt(np.mean(np.sum((matrix @ pts - truth @ pts) ** 2, axis=0))))


@pytest.mark.parametrize("shift, rotation_deg, scale", [((12.0, -15.0), 2.5, 1.02), ((-18.0, 6.0), -3.0, 0.985),
                                                         ((0.4, 0.3), 0.0, 1.0)])
def test_a_known_similarity_is_recovered_to_a_tenth_of_a_pixel(rng, shift, rotation_deg, scale):
    reference = _wall(rng)
    m, n = reference.shape
    centre = np.array([(n - 1) / 2.0, (m - 1) / 2.0])
    # the camera turns and zooms about the frame centre, then the centre moves by shift (row, col)
    about = SimilarityTransform(translation=-centre)
    turn = SimilarityTransform(scale=scale, rotation=math.radians(rotation_deg))
    back = SimilarityTransform(translation=centre + np.array([shift[1], shift[0]]))
    tform = SimilarityTransform(matrix=back.params @ turn.params @ about.params)
    pressed = _moved(reference, tform) + rng.normal(0.0, 0.05, reference.shape)
    pressed += 0.3  # a drift of the whole wall between the shots
    pressed[150:190, 40:80] -= ndimage.gaussian_filter(np.ones((40, 40)), 6.0) * 1.5  # a leak
    reg = register(reference + rng.normal(0.0, 0.05, reference.shape), pressed, noise_k=0.07)
    truth = tform.inverse.params[:2]  # pressurised pixel -> reference pixel
    # [C] the truth is the transform scikit-image applied; the tolerances are [CP]: "sub-pixel" registration,
    # a tenth of a pixel RMS over the frame (the issue asks 0.5 px), the angle, zoom and shift to match
    assert _frame_rms(reg.matrix, truth, reference.shape) <= 0.1
    assert reg.rotation_deg == pytest.approx(rotation_deg, abs=0.05)
    assert reg.scale == pytest.approx(scale, abs=0.002)
    assert reg.shift_px[0] == pytest.approx(shift[0], abs=0.15)
    assert reg.shift_px[1] == pytest.approx(shift[1], abs=0.15)
    assert reg.overlap > 0.85
    assert reg.rms_px is None or reg.rms_px < 0.3
    assert set(reg.to_json()) == {"shift_px", "rotation_deg", "scale", "rms_px", "overlap"}


def test_the_residual_measures_a_misregistration_left_in_place(rng):
    # shift the reference by a known 0.8 px after registration: the tile residual must see about that much
    from irseg.pairs._register import _structure, _tile_residual

    reference = _wall(rng)
    moved = ndimage.shift(reference, (0.0, 0.8), order=3, mode="nearest")
    valid = np.ones(reference.shape, bool)
    valid[:, -4:] = False
    rms = _tile_residual(_structure(reference), _structure(moved), valid, 0.0)
    assert rms == pytest.approx(0.8, abs=0.15)  # [C] the shift applied by scipy.ndimage.shift


@pytest.mark.parametrize("flip", [False, True])
def test_views_that_do_not_match_fail_with_a_message_naming_both(rng, flip):
    reference = _wall(rng)
    # another wall: its own texture, and (flip) its features elsewhere, or (not flip) upside down
    other = _wall(np.random.default_rng(99))
    other = other[:, ::-1].copy() if flip else other[::-1, :].copy()
    with pytest.raises(InputError, match=r"lounge_50pa\.tif: cannot register its reference lounge_0pa\.tif") as err:
        register(reference, other, noise_k=0.07, names=("lounge_0pa.tif", "lounge_50pa.tif"))
    assert "same view" in str(err.value)


def test_a_shift_beyond_the_overlap_limit_fails(rng):
    reference = _wall(rng, shape=(240, 320))
    tform = SimilarityTransform(translation=(200.0, 0.0))  # 200 of 320 columns: overlap about 37 %
    pressed = _moved(reference, tform)
    assert MIN_OVERLAP == 0.5
    with pytest.raises(InputError, match="overlap|same view|converge"):
        register(reference, pressed, noise_k=0.05)


@pytest.mark.parametrize("matrix", [
    # another zoom: 20 % closer (a different shot, not a knocked tripod)
    SimilarityTransform(scale=1.2, translation=(-30.0, -25.0)).params,
    # unequal stretch of the two directions (8 %), which no camera moved before a plane wall gives
    AffineTransform(scale=(0.95, 1.03), translation=(6.0, -4.0)).params,
])
def test_a_map_a_moved_tripod_cannot_give_fails(rng, matrix):
    # [CP] common practice: between the two shots of a pair the tripod is re-placed, not the lens
    # changed; the camera before a plane wall then moves by a near-similarity (scikit-image's
    # AffineTransform / SimilarityTransform define the maps applied)
    from irseg.pairs._register import _MAX_ANISOTROPY, _SCALE_RANGE

    assert _SCALE_RANGE == (0.9, 1.1) and _MAX_ANISOTROPY == 1.04
    reference = _wall(rng)
    pressed = warp(reference, np.linalg.inv(matrix), order=3, mode="edge", preserve_range=True)
    with pytest.raises(InputError, match="same view"):
        register(reference, pressed + rng.normal(0.0, 0.05, reference.shape), noise_k=0.07)
