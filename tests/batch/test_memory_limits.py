"""Memory: a feature size larger than the image is refused, report images stay at display size,
the default worker count fits the memory, and the memory-lean blockwise kernels give the same
bits as their whole-frame definitions.

Issue 15 items 15 and 20. Check values:
- the discrete operators' whole-frame definitions (forward differences owned by the pixel at
  their start, Neumann border; docs/method.md), written out here with plain NumPy slicing, and
  the valley rule of irseg.segmentation._regions in its whole-frame form [CP];
- block means by reshaping, the textbook definition of area averaging [CP];
- PNG IHDR layout: width then height as 4-byte big-endian integers at bytes 16-23
  (ISO/IEC 15948:2004, clause 11.2.2) [V]; NPY shapes from numpy.save; TIFF from tifffile.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest
from tests.support.survey import make_survey

from irseg.batch import _pool
from irseg.errors import ConfigError
from irseg.pipeline import failure_stage, process_image
from irseg.render import MAX_DISPLAY_SIDE, overlay_layout, render_overlay
from irseg.segmentation import segment
from irseg.segmentation._operators import Workspace, apply_weighted_laplacian, gradient_sq
from irseg.segmentation._regions import _valley
from tests.support.at_images import whole_weighted_laplacian

# ----------------------------------------------------------------------------- item 15


def test_a_feature_larger_than_the_image_is_refused_before_any_allocation():
    # 30 000 px on an 80 x 120 image asked ~900 MB (a 30 000-square window); 1e9 blamed the
    # pixel budget. Now: a ConfigError naming the key and the range for this image.
    image = np.full((80, 120), 20.0)
    for value in (30_000, 1e9, 81):
        with pytest.raises(ConfigError) as err:
            segment(image, min_feature_px=value)
        text = str(err.value)
        assert "[segment] min_feature_px" in text and "1 to 80 px" in text and "max_pixels" not in text
    assert segment(image, min_feature_px=80).n_regions >= 1  # the shorter side itself is valid


def test_a_survey_image_fails_at_segment_naming_the_key(tmp_path):
    # within the metadata's fixed range (the [segment] min_feature_px bound of irseg.metadata)
    # but wider than this 64 x 80 image: the segment stage refuses it for this image only
    make_survey(tmp_path / "s", 1, tiff=False)
    path = tmp_path / "s" / "wall_00.npy"
    with pytest.raises(ConfigError) as err:
        process_image(path, overrides={"segment": {"min_feature_px": 90}})
    assert failure_stage(err.value) == "segment"
    assert "[segment] min_feature_px" in str(err.value) and "1 to 64 px" in str(err.value)


# ----------------------------------------------------------------------------- item 20: report images


def _render_inputs(shape, *, mask_box=None):
    m, n = shape
    t = np.full(shape, 18.0) + np.linspace(0.0, 1.0, n)[None, :]
    labels = np.zeros(shape, np.int32)
    labels[m // 4 : m // 2, n // 4 : n // 2] = 1
    t[labels == 1] -= 3.0
    mask = np.zeros(shape, bool)
    if mask_box is not None:
        r0, c0, r1, c1 = mask_box
        mask[r0:r1, c0:c1] = True
    edges = np.zeros(shape, bool)
    edges[m // 4, n // 4 : n // 2] = True
    rows, cols = np.nonzero(labels)
    anomaly = SimpleNamespace(anomaly=1, cause="missing_insulation", centroid_row=rows.mean(),
                              centroid_col=cols.mean(), bbox_row0=rows.min(), bbox_col0=cols.min(),
                              bbox_row1=rows.max() + 1, bbox_col1=cols.max() + 1)
    frame = SimpleNamespace(temperature_c=t, mask=mask, path="big.tif")
    analysis = SimpleNamespace(labels=labels, anomalies=(anomaly,), pixel_m=0.002)
    meta = None
    return frame, SimpleNamespace(edges=edges), analysis, meta


@pytest.mark.parametrize("shape", [(1200, 1600), (1601, 900), (3000, 4000), (6000, 8000)])
def test_overlay_layout_caps_the_displayed_thermogram(shape):
    lay = overlay_layout(shape)
    k = -(-max(shape) // MAX_DISPLAY_SIDE)
    assert lay.shrink == k and (lay.scale == 1)
    assert (lay.image_rows, lay.image_cols) == (-(-shape[0] // k), -(-shape[1] // k))
    assert max(lay.image_rows, lay.image_cols) <= MAX_DISPLAY_SIDE


def test_a_large_thermogram_is_drawn_reduced_with_its_outline_in_place():
    shape = (2000, 3300)  # not a multiple of the reduction factor 3
    frame, seg, analysis, meta = _render_inputs(shape, mask_box=(0, 0, 30, 30))
    img = render_overlay(frame, seg, analysis, meta)
    lay = overlay_layout(shape)
    assert img.shape == lay.shape and max(lay.image_rows, lay.image_cols) <= MAX_DISPLAY_SIDE
    k = lay.shrink
    # the outline colour of missing insulation surrounds the anomaly's block in display pixels
    from irseg.vocabulary import CAUSE_COLOURS

    colour = np.array(CAUSE_COLOURS["missing_insulation"], np.uint8)
    r0, c0 = lay.image_row0 + (shape[0] // 4) // k, lay.image_col0 + (shape[1] // 4) // k
    r1, c1 = lay.image_row0 + (shape[0] // 2 - 1) // k, lay.image_col0 + (shape[1] // 2 - 1) // k
    for r, c in ((r0, (c0 + c1) // 2), (r1, (c0 + c1) // 2), ((r0 + r1) // 2, c0), ((r0 + r1) // 2, c1)):
        window = img[r - 1 : r + 2, c - 1 : c + 2].reshape(-1, 3)
        assert (window == colour).all(axis=1).any(), (r, c)


def test_block_reduction_matches_reshape_means():
    from irseg.render._overlay import _block_reduce

    rng = np.random.default_rng(3)
    a = rng.normal(size=(301, 205))
    k = 4
    padded = np.full((304, 208), np.nan)
    padded[:301, :205] = a
    blocks = padded.reshape(76, 4, 52, 4)
    expected = np.nanmean(blocks, axis=(1, 3))
    np.testing.assert_allclose(_block_reduce(a, k, "mean"), expected, rtol=1e-12)
    b = rng.random((301, 205)) > 0.9
    pb = np.zeros((304, 208), bool)
    pb[:301, :205] = b
    np.testing.assert_array_equal(_block_reduce(b, k, "any"), pb.reshape(76, 4, 52, 4).any(axis=(1, 3)))
    counts = np.ones((301, 205))
    pc = np.zeros((304, 208))
    pc[:301, :205] = counts
    n = pc.reshape(76, 4, 52, 4).sum(axis=(1, 3))
    true = pb.reshape(76, 4, 52, 4).sum(axis=(1, 3))
    np.testing.assert_array_equal(_block_reduce(b, k, "majority"), true > 0.5 * n)


# ----------------------------------------------------------------------------- item 20: workers


def test_default_jobs_fits_the_memory():
    tasks = [{"path": "/nonexistent/a.npy", "settings": SimpleNamespace(max_pixels=12_000_000)}] * 8
    per_worker = _pool.WORKER_BASE_BYTES + _pool.PEAK_BYTES_PER_PIXEL * 12_000_000
    plenty = int(10 * per_worker / _pool.MEMORY_SHARE) + 1
    assert _pool.default_jobs(tasks, cpus=4, available=plenty) == 4  # cores are the limit
    three = int(3 * per_worker / _pool.MEMORY_SHARE) + 1
    assert _pool.default_jobs(tasks, cpus=8, available=three) == 3  # memory is the limit
    assert _pool.default_jobs(tasks, cpus=8, available=1) == 1  # never fewer than one
    assert _pool.default_jobs(tasks[:2], cpus=8, available=plenty) == 2  # never more than tasks


def test_available_memory_is_a_positive_count_of_bytes():
    available = _pool.available_memory_bytes()
    assert available is None or available > 0


def test_image_pixels_reads_headers(tmp_path):
    import cv2
    import tifffile

    np.save(tmp_path / "a.npy", np.zeros((30, 41), np.float32))
    tifffile.imwrite(tmp_path / "b.tif", np.zeros((17, 23), np.float32))
    cv2.imwrite(str(tmp_path / "c.png"), np.zeros((11, 13), np.uint16))
    (tmp_path / "d.csv").write_text("1,2\n3,4\n", encoding="utf-8")
    (tmp_path / "e.png").write_bytes(b"\x89PNG\r\n\x1a\n" + b"\0" * 5)  # truncated header
    assert _pool.image_pixels(tmp_path / "a.npy") == 30 * 41
    assert _pool.image_pixels(tmp_path / "b.tif") == 17 * 23
    assert _pool.image_pixels(tmp_path / "c.png") == 11 * 13
    assert _pool.image_pixels(tmp_path / "d.csv") >= 4  # bounded by half the bytes
    assert _pool.image_pixels(tmp_path / "e.png") is None
    assert _pool.image_pixels(tmp_path / "missing.npy") is None


# ----------------------------------------------------------------------------- item 20: same bits


@pytest.mark.parametrize("rows", [2, 63, 64, 65, 128, 129, 200])
def test_blockwise_operators_give_the_whole_frame_bits(rows):
    rng = np.random.default_rng(rows)
    n = 37
    x = rng.normal(size=(rows, n)).astype(np.float32)
    cx = rng.random((rows, n - 1)).astype(np.float32)
    cy = rng.random((rows - 1, n)).astype(np.float32)
    diag = rng.random((rows, n)).astype(np.float32)
    ws = Workspace.for_shape((rows, n), np.dtype(np.float32))
    out = np.empty_like(x)
    apply_weighted_laplacian(x, cx, cy, diag, out, ws)
    np.testing.assert_array_equal(out, whole_weighted_laplacian(x, cx, cy, diag))
    apply_weighted_laplacian(x, cx, cy, np.float32(0.25), out, ws)  # a scalar diagonal
    np.testing.assert_array_equal(out, whole_weighted_laplacian(x, cx, cy, np.float32(0.25)))
    g2 = np.empty_like(x)
    gradient_sq(x, g2, ws)
    whole = np.zeros_like(x)
    whole[:, :-1] += (x[:, 1:] - x[:, :-1]) ** 2
    whole[:-1, :] += (x[1:, :] - x[:-1, :]) ** 2
    np.testing.assert_array_equal(g2, whole)


def test_blockwise_valley_gives_the_whole_frame_answer():
    rng = np.random.default_rng(5)
    v = np.clip(rng.random((600, 50)), 0, 1)
    p = np.pad(v, 1, mode="edge")
    c2 = 2.0 * p[1:-1, 1:-1]
    m, n = v.shape
    whole = np.zeros(v.shape, bool)
    for (a0, a1), (b0, b1) in (((1, 0), (1, 2)), ((0, 1), (2, 1)), ((0, 0), (2, 2)), ((0, 2), (2, 0))):
        whole |= (p[a0 : a0 + m, a1 : a1 + n] + p[b0 : b0 + m, b1 : b1 + n] - c2) >= 0.06
    np.testing.assert_array_equal(_valley(v), whole)


def test_a_run_without_the_jobs_setting_takes_its_worker_count_from_memory(tmp_path, monkeypatch):
    # issue 15 item 20: the default number of workers is chosen so that their peaks fit the memory
    from irseg.batch import run_survey

    seen = []

    def one_worker(tasks, **kwargs):
        seen.append(len(tasks))
        return 1  # as if memory held only one worker: the run stays in this process

    monkeypatch.setattr(_pool, "default_jobs", one_worker)
    make_survey(tmp_path / "s", 2)
    result = run_survey([tmp_path / "s"], tmp_path / "out")
    assert seen == [2] and result.n_ok == 2
