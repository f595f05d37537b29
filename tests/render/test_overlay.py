"""Overlay and label images (irseg.render).

Reference values come from outside irseg: OpenCV's published colour maps
(``cv2.applyColorMap`` on a 0..255 ramp is the reference library), NumPy's percentiles for
the display range, and plain geometry for the scale bar.
"""

from __future__ import annotations

from dataclasses import fields
from types import SimpleNamespace

import cv2
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from irseg.analysis import CAUSES as ANALYSIS_CAUSES
from irseg.analysis import Analysis, Anomaly
from irseg.errors import ConfigError, OutputError
from irseg.vocabulary import CAUSE_COLOURS, CAUSES
from irseg.render import (
    colormap_lut,
    display_range,
    label_image,
    overlay_layout,
    render_overlay,
    scale_bar_length_m,
)
from irseg.types import Air, SurveyMeta, Surface, ThermalFrame


def reference_lut(code: int) -> np.ndarray:
    """RGB table of an OpenCV colour map, from the library itself (BGR -> RGB)."""
    ramp = np.arange(256, dtype=np.uint8).reshape(256, 1)
    return cv2.applyColorMap(ramp, code)[:, 0, ::-1]


def make_anomaly(aid: int, cause: str, labels: np.ndarray) -> Anomaly:
    """A real Anomaly whose geometry matches ``labels == aid`` (other figures are placeholders)."""
    rows, cols = np.nonzero(labels == aid)
    return Anomaly(
        anomaly=aid, kind="cold", cause=cause, reason="test region", area_px=int(rows.size),
        area_m2=None, area_low_m2=None, area_high_m2=None, mean_c=15.0, min_c=14.0, max_c=16.0,
        reference_c=18.0, delta_k=-3.0, excess_w=None, excess_low_w=None, excess_high_w=None,
        excess_kwh_year=None, f_rsi=None, mould_risk=None,
        centroid_row=float(rows.mean()), centroid_col=float(cols.mean()),
        bbox_row0=int(rows.min()), bbox_col0=int(cols.min()),
        bbox_row1=int(rows.max()) + 1, bbox_col1=int(cols.max()) + 1,
        severity=aid, severity_score=0.0,
    )


def thermal_frame(path: str, t: np.ndarray, mask: np.ndarray, meta: SurveyMeta) -> ThermalFrame:
    """A ThermalFrame; ``meta`` goes in only while the type still has that field (issue 10 drops it)."""
    extra = {"meta": meta} if "meta" in {f.name for f in fields(ThermalFrame)} else {}
    return ThermalFrame(path=path, temperature_c=t, mask=mask, **extra)


def make_analysis(labels: np.ndarray, anomalies=(), pixel_m=None) -> Analysis:
    return Analysis(
        anomalies=tuple(anomalies), labels=labels, pixel_m=pixel_m,
        pixel_area_m2=None if pixel_m is None else pixel_m**2, h_w_m2k=None,
        reference_c=np.full(labels.shape, np.nan), warnings=(),
    )


def make_inputs(
    shape=(48, 64),
    *,
    rects=(((8, 8, 24, 28), "missing_insulation"), ((26, 36, 42, 58), "thermal_bridge")),
    pixel_m=0.01,
    air=(20.0, 0.0),
    mask=None,
    edges=None,
    temperature=None,
    path="survey/north/wall_0001.tif",
):
    m, n = shape
    labels = np.zeros(shape, np.int32)
    t = np.full(shape, 18.0) + np.linspace(0.0, 1.0, n)[None, :]
    for k, ((r0, c0, r1, c1), _) in enumerate(rects, start=1):
        labels[r0:r1, c0:c1] = k
        t[r0:r1, c0:c1] -= 2.0 + k
    if temperature is not None:
        t = np.asarray(temperature, dtype=float)
    meta = SurveyMeta(
        surface=Surface(view="interior"),
        air=Air(inside_c=None if air is None else air[0], outside_c=None if air is None else air[1]),
    )
    frame = thermal_frame(path, t.astype(np.float32), np.zeros(shape, bool) if mask is None else mask, meta)
    # render_overlay reads only the jump set of a Segmentation (the full one needs solver parameters)
    seg = SimpleNamespace(edges=np.zeros(shape, bool) if edges is None else edges)
    anomalies = tuple(make_anomaly(k, cause, labels) for k, (_, cause) in enumerate(rects, start=1))
    return frame, seg, make_analysis(labels, anomalies, pixel_m), meta


def display_pixel(lay, r: int, c: int) -> tuple[int, int]:
    """Top-left display pixel of input pixel (r, c)."""
    return lay.image_row0 + r * lay.scale, lay.image_col0 + c * lay.scale


@pytest.mark.parametrize("shape", [(48, 64), (120, 160), (480, 640), (6, 300), (300, 6)])
def test_overlay_is_uint8_rgb_of_the_documented_shape(shape):
    frame, seg, analysis, meta = make_inputs(shape, rects=())
    img = render_overlay(frame, seg, analysis, meta)
    lay = overlay_layout(shape)
    assert img.dtype == np.uint8
    assert img.shape == lay.shape
    # documented formula: s = clip(ceil(480 / max(M, N)), 1, 16)
    s = min(16, max(1, -(-480 // max(shape))))
    assert lay.scale == s
    assert img.shape == (46 + max(shape[0] * s, 200) + 64, 10 + max(shape[1] * s, 380) + 86, 3)


def test_outline_pixels_carry_the_cause_colour_and_interiors_do_not():
    frame, seg, analysis, meta = make_inputs()
    img = render_overlay(frame, seg, analysis, meta)
    lay = overlay_layout(frame.temperature_c.shape)
    s = lay.scale
    for (r0, c0, r1, c1), cause in (((8, 8, 24, 28), "missing_insulation"), ((26, 36, 42, 58), "thermal_bridge")):
        colour = np.array(CAUSE_COLOURS[cause], np.uint8)
        top, left = display_pixel(lay, r0, c0)
        bottom = lay.image_row0 + r1 * s - 1  # last display row of the anomaly
        right = lay.image_col0 + c1 * s - 1
        mid_r = lay.image_row0 + ((r0 + r1) // 2) * s
        mid_c = lay.image_col0 + ((c0 + c1) // 2) * s
        # points on the contour found by cv2.findContours: the anomaly's boundary pixels
        for rr, cc in [(top, left), (top, mid_c), (bottom, mid_c), (mid_r, left), (mid_r, right), (bottom, right)]:
            assert np.array_equal(img[rr, cc], colour), (cause, rr, cc, img[rr, cc])
        # well inside (away from the id badge at the centroid) the thermogram shows through
        inner = img[top + 3 * s, left + 3 * s]
        assert not np.array_equal(inner, colour)
    # every cause the analysis can give has its own colour, none produced by the colour map
    assert set(CAUSES) == set(ANALYSIS_CAUSES)
    colours = {CAUSE_COLOURS[c] for c in CAUSES}
    assert len(colours) == 5
    lut = {tuple(int(v) for v in row) for row in reference_lut(cv2.COLORMAP_INFERNO)}
    assert not colours & lut


def test_thermogram_pixels_follow_the_reference_colour_map_over_the_percentile_range():
    frame, seg, analysis, meta = make_inputs(rects=())
    t = frame.temperature_c
    img = render_overlay(frame, seg, analysis, meta, cmap="magma")
    lay = overlay_layout(t.shape)
    lo, hi = np.percentile(t.astype(np.float64), [1, 99])  # reference: numpy percentiles
    ref = reference_lut(cv2.COLORMAP_MAGMA)
    for r, c in [(5, 1), (20, 30), (40, 62), (47, 0)]:
        expected = int(np.clip(np.rint((t[r, c] - lo) / (hi - lo) * 255), 0, 255))
        got = img[display_pixel(lay, r, c)]
        candidates = [ref[k] for k in range(max(0, expected - 1), min(255, expected + 1) + 1)]
        assert any(np.array_equal(got, cand) for cand in candidates), (r, c, got, expected)


def test_colour_bar_runs_monotonically_through_the_reference_lut():
    frame, seg, analysis, meta = make_inputs()
    img = render_overlay(frame, seg, analysis, meta)
    lay = overlay_layout(frame.temperature_c.shape)
    ref = reference_lut(cv2.COLORMAP_INFERNO).astype(int)
    column = img[lay.bar_row0 : lay.bar_row1, (lay.bar_col0 + lay.bar_col1) // 2].astype(int)
    indices = []
    for px in column:
        hits = np.nonzero((ref == px).all(axis=1))[0]
        assert hits.size, f"colour bar pixel {px} is not a colour of the reference colour map"
        indices.append(int(hits[0]))
    indices = np.array(indices)
    assert indices[0] == 255 and indices[-1] == 0  # warm end on top
    assert np.all(np.diff(indices) <= 0)
    assert len(np.unique(indices)) > 100  # a full ramp, not a few bands


def test_colormap_lut_matches_opencv_and_published_inferno_ends():
    lut = colormap_lut("inferno")
    assert lut.shape == (256, 3) and lut.dtype == np.uint8
    assert np.array_equal(lut, reference_lut(cv2.COLORMAP_INFERNO))
    # inferno's published end colours (matplotlib's listed data, 0.0015/0.0005/0.0139 and
    # 0.9884/0.9984/0.6449 times 255), from memory [M]
    assert np.abs(lut[0].astype(int) - [0, 0, 4]).max() <= 1
    assert np.abs(lut[255].astype(int) - [252, 255, 164]).max() <= 1
    gray = colormap_lut("grey")
    assert np.array_equal(gray, np.repeat(np.arange(256, dtype=np.uint8)[:, None], 3, axis=1))
    with pytest.raises(ConfigError, match="inferno"):
        colormap_lut("infernal")


def test_same_inputs_give_byte_identical_overlays():
    a = render_overlay(*make_inputs())
    b = render_overlay(*make_inputs())
    assert a.tobytes() == b.tobytes()
    c = render_overlay(*make_inputs(pixel_m=0.02))
    assert a.tobytes() != c.tobytes()  # and the picture does depend on its inputs


def test_title_line_comes_from_the_meta_argument():
    frame, seg, analysis, meta = make_inputs()  # interior view, ΔT in–out 20 K
    other = SurveyMeta(surface=Surface(view="exterior"), air=Air(inside_c=None, outside_c=None))
    a = render_overlay(frame, seg, analysis, meta)
    b = render_overlay(frame, seg, analysis, other)
    lay = overlay_layout(frame.temperature_c.shape)
    assert not np.array_equal(a[: lay.image_row0], b[: lay.image_row0])  # the title band differs
    assert np.array_equal(a[lay.image_row0 :], b[lay.image_row0 :])  # and nothing else
    # whatever metadata the frame may carry is not read: only the argument counts
    frame_other = thermal_frame(frame.path, frame.temperature_c, frame.mask, other)
    assert render_overlay(frame_other, seg, analysis, meta).tobytes() == a.tobytes()


def longest_white_run(strip: np.ndarray) -> int:
    white = (strip == 255).all(axis=2)
    best = 0
    for row in white:
        padded = np.concatenate([[0], row.astype(np.int8), [0]])
        d = np.diff(padded)
        starts, ends = np.nonzero(d == 1)[0], np.nonzero(d == -1)[0]
        if starts.size:
            best = max(best, int((ends - starts).max()))
    return best


@pytest.mark.parametrize("shape, pixel_m", [((48, 64), 0.004), ((120, 160), 0.0125), ((480, 640), 0.002)])
def test_scale_bar_is_as_long_as_its_length_in_pixels(shape, pixel_m):
    frame, seg, analysis, meta = make_inputs(shape, rects=(), pixel_m=pixel_m)
    img = render_overlay(frame, seg, analysis, meta)
    lay = overlay_layout(shape)
    length_m = scale_bar_length_m(pixel_m, width_px=shape[1])
    # a 1-2-5 length not above a quarter of the imaged width
    mantissa = length_m / 10 ** np.floor(np.log10(length_m))
    assert min(abs(mantissa - f) for f in (1, 2, 5)) < 1e-9
    assert length_m <= 0.25 * shape[1] * pixel_m + 1e-12
    assert length_m > 0.25 * shape[1] * pixel_m / 2.5 - 1e-12
    expected_px = round(length_m / pixel_m * lay.scale)
    assert longest_white_run(img[lay.legend_row0 :]) == expected_px


def test_no_scale_bar_without_geometry():
    frame, seg, analysis, meta = make_inputs(pixel_m=None)
    img = render_overlay(frame, seg, analysis, meta)
    lay = overlay_layout(frame.temperature_c.shape)
    assert longest_white_run(img[lay.legend_row0 :]) < 15


def test_masked_pixels_are_drawn_as_no_data_and_do_not_move_the_range():
    mask = np.zeros((48, 64), bool)
    mask[2:6, 40:48] = True
    frame, seg, analysis, meta = make_inputs(mask=mask)
    hot = frame.temperature_c.copy()
    hot[mask] = 500.0  # a fill value far outside the scene
    frame_hot = thermal_frame(frame.path, hot, mask, meta)
    assert display_range(hot, mask=mask) == display_range(frame.temperature_c, mask=mask)
    img = render_overlay(frame_hot, seg, analysis, meta)
    lay = overlay_layout(mask.shape)
    lut = {tuple(int(v) for v in row) for row in reference_lut(cv2.COLORMAP_INFERNO)}
    for r, c in [(2, 40), (3, 41), (5, 47)]:
        px = tuple(int(v) for v in img[display_pixel(lay, r, c)])
        assert px[0] == px[1] == px[2] and px not in lut  # neutral grey, not a temperature
    # the unmasked scene keeps the same colours as without the hot fill values
    plain = render_overlay(frame, seg, analysis, meta)
    r0, c0 = display_pixel(lay, 30, 5)
    assert np.array_equal(img[r0, c0], plain[r0, c0])


@pytest.mark.parametrize("shape", [(48, 64), (480, 640)])
def test_jump_set_is_drawn_as_a_thin_line_and_nothing_else_changes(shape):
    m, n = shape
    edges = np.zeros(shape, bool)
    edges[:, n // 2] = True
    frame, seg, analysis, meta = make_inputs(shape, rects=(), edges=edges)
    img = render_overlay(frame, seg, analysis, meta, show_jumps=True)
    plain = render_overlay(*make_inputs(shape, rects=()), show_jumps=True)
    lay = overlay_layout(shape)
    s = lay.scale
    r = m // 2
    top, left = display_pixel(lay, r, n // 2)
    centre = (top + s // 2, left + s // 2)
    assert not np.array_equal(img[centre], plain[centre])
    # one display pixel wide: the neighbours of the line's centre column keep the thermogram
    changed = np.any(img[top] != plain[top], axis=1)
    assert changed.sum() == 1 and changed[left + s // 2]
    # whatever lies off the jump set is untouched
    image_area = np.s_[lay.image_row0 : lay.image_row0 + lay.image_rows, lay.image_col0 : left]
    assert np.array_equal(img[image_area], plain[image_area])
    # without the request the jump set is not drawn at all (issue 14: only on request)
    hidden = render_overlay(frame, seg, analysis, meta)
    assert np.array_equal(hidden[image_area], plain[image_area]) and np.array_equal(hidden[centre], plain[centre])


def test_constant_image_without_anomalies_geometry_or_air_renders():
    frame, seg, analysis, meta = make_inputs(
        (30, 40), rects=(), pixel_m=None, air=None, temperature=np.full((30, 40), 12.5)
    )
    img = render_overlay(frame, seg, analysis, meta, cmap="gray")
    lay = overlay_layout((30, 40))
    area = img[lay.image_row0 : lay.image_row0 + lay.image_rows, lay.image_col0 : lay.image_col0 + lay.image_cols]
    # constant value sits mid-range of its ±0.5 K display range: grey level 128 (of 0..255)
    assert np.unique(area.reshape(-1, 3), axis=0).tolist() == [[128, 128, 128]]
    assert display_range(np.full((3, 3), 12.5)) == (12.0, 13.0)


def test_fully_masked_frame_and_odd_names_render():
    mask = np.ones((20, 20), bool)
    frame, seg, analysis, meta = make_inputs((20, 20), rects=(), mask=mask, path="Dachgeschoß <Süd>/ΔT_°.tif")
    img = render_overlay(frame, seg, analysis, meta)
    assert img.shape == overlay_layout((20, 20)).shape
    assert display_range(frame.temperature_c, mask=mask) == (0.0, 1.0)


def test_display_range_is_the_1st_to_99th_percentile(rng):
    t = rng.normal(10.0, 2.0, size=(50, 70))
    t[0, 0] = np.nan
    lo, hi = display_range(t)
    ref = np.nanpercentile(t, [1, 99])  # numpy as the reference
    assert lo == pytest.approx(ref[0]) and hi == pytest.approx(ref[1])


def test_mismatched_shapes_are_config_errors():
    frame, seg, analysis, meta = make_inputs()
    bad = make_analysis(np.zeros((10, 10), np.int32))
    with pytest.raises(ConfigError, match="labels"):
        render_overlay(frame, seg, bad, meta)


def test_label_image_is_uint16_copy_of_the_anomaly_labels():
    _, _, analysis, _ = make_inputs()
    out = label_image(analysis)
    assert out.dtype == np.uint16 and out.shape == analysis.labels.shape
    assert np.array_equal(out.astype(np.int64), analysis.labels.astype(np.int64))
    assert set(np.unique(out).tolist()) == {0, 1, 2}


def test_label_image_refuses_ids_a_16_bit_png_cannot_hold():
    labels = np.zeros((4, 4), np.int32)
    labels[0, 0] = 65535
    assert label_image(make_analysis(labels))[0, 0] == 65535  # 2**16 - 1 still fits
    labels[0, 0] = 65536
    with pytest.raises(OutputError, match="65535"):
        label_image(make_analysis(labels))
    labels[0, 0] = -1
    with pytest.raises(OutputError, match="negative"):
        label_image(make_analysis(labels))


@settings(max_examples=25, deadline=None)
@given(
    m=st.integers(1, 40),
    n=st.integers(1, 40),
    seed=st.integers(0, 2**32 - 1),
    spread=st.sampled_from([0.0, 1e-3, 5.0, 80.0]),
    masked=st.floats(0.0, 1.0),
)
def test_any_small_frame_renders_to_its_layout_deterministically(m, n, seed, spread, masked):
    rng = np.random.default_rng(seed)
    t = 10.0 + spread * rng.standard_normal((m, n))
    mask = rng.random((m, n)) < masked
    labels = (rng.random((m, n)) < 0.3).astype(np.int32)
    anomalies = (make_anomaly(1, "moisture", labels),) if labels.any() else ()
    meta = SurveyMeta()
    frame = thermal_frame("x.tif", t, mask, meta)
    seg = SimpleNamespace(edges=rng.random((m, n)) < 0.2)
    analysis = make_analysis(labels, anomalies, pixel_m=0.01)
    a = render_overlay(frame, seg, analysis, meta)
    assert a.shape == overlay_layout((m, n)).shape and a.dtype == np.uint8
    assert render_overlay(frame, seg, analysis, meta).tobytes() == a.tobytes()
