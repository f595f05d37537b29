"""The analysis contract: fields, empty cases, thresholds, masks, robustness."""

from __future__ import annotations

import dataclasses
import json
import warnings

import numpy as np
import pytest
from tests.support.fakes import FakeParams, make_frame, make_meta, make_seg
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import irseg
from irseg.analysis import CAUSES, Analysis, Anomaly, analyse
from irseg.errors import ConfigError

# column order of OUT/anomalies.csv after "image" (brief: output contract), then the extra fields
CSV_COLUMNS = (
    "anomaly kind cause reason area_m2 area_low_m2 area_high_m2 mean_c min_c max_c reference_c delta_k excess_w "
    "excess_low_w excess_high_w excess_kwh_year f_rsi mould_risk centroid_row centroid_col bbox_row0 bbox_col0 "
    "bbox_row1 bbox_col1 severity"
).split()


def test_anomaly_fields_cover_the_csv_columns_in_order():
    names = [f.name for f in dataclasses.fields(Anomaly)]
    assert [n for n in names if n in CSV_COLUMNS] == CSV_COLUMNS
    # linear thermal bridges (issue 12): length and psi, appended after the contract's list
    assert set(names) - set(CSV_COLUMNS) == {"area_px", "severity_score", "length_m", "psi_w_mk", "psi_low_w_mk",
                                             "psi_high_w_mk"}
    assert names[-4:] == ["length_m", "psi_w_mk", "psi_low_w_mk", "psi_high_w_mk"]
    assert [f.name for f in dataclasses.fields(Analysis)] == [
        "anomalies", "labels", "pixel_m", "pixel_area_m2", "h_w_m2k", "reference_c", "warnings"
    ]
    assert irseg.analyse is analyse and irseg.Anomaly is Anomaly


def test_anomalies_hold_plain_json_ready_values():
    t = np.full((60, 80), 19.0)
    d = np.zeros(t.shape, int)
    t[20:40, 30:50] -= 2.0
    d[20:40, 30:50] = 1
    (a,) = analyse(make_frame(t), make_seg(d, u=t), make_meta()).anomalies
    row = dataclasses.asdict(a)
    assert json.loads(json.dumps(row)) == row
    assert all(type(v) in (int, float, str, bool, type(None)) for v in row.values())


def test_constant_image_has_no_anomalies():
    t = np.full((60, 80), 19.0)
    res = analyse(make_frame(t), make_seg(np.zeros(t.shape, int), u=t), make_meta())
    assert res.anomalies == () and res.labels.dtype == np.int32 and not res.labels.any()
    assert np.allclose(res.reference_c, 19.0)


def test_pure_noise_has_no_anomalies(rng):
    t = 19.0 + rng.normal(0, 0.05, (60, 80))
    res = analyse(make_frame(t), make_seg(np.zeros(t.shape, int), u=np.full(t.shape, 19.0)), make_meta())
    assert res.anomalies == ()


def test_fully_masked_image_is_empty_not_an_error():
    t = np.full((30, 40), 19.0)
    seg = make_seg(np.zeros(t.shape, int), u=t)
    res = analyse(make_frame(t, mask=np.ones(t.shape, bool)), seg, make_meta())
    assert res.anomalies == () and np.isnan(res.reference_c).all()


@pytest.mark.parametrize("side, kept", [(2, False), (3, True)])
def test_minimum_spot_is_three_by_three_pixels(side, kept):
    # a reading needs at least 3×3 pixels [CP]
    t = np.full((60, 80), 19.0)
    d = np.zeros(t.shape, int)
    t[20:20 + side, 30:30 + side] -= 4.0
    d[20:20 + side, 30:30 + side] = 1
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta())
    assert (len(res.anomalies) == 1) is kept


def test_contrast_threshold_default_and_setting():
    # 0.2 K over 20×20 px at 0.05 K noise: matched to its area the contrast is 0.2/(0.05·0.28/2.5) ≈ 36σ
    # (white noise smoothed by a Gaussian of std s keeps σ/(2√π·s), closed form), far above the 5σ seed,
    # and above the 0.1 K reporting floor [CP]; the min_contrast_k setting raises the floor
    t = np.full((60, 80), 19.0)
    d = np.zeros(t.shape, int)
    t[20:40, 30:50] -= 0.2
    d[20:40, 30:50] = 1
    seg = make_seg(d, u=t)
    assert len(analyse(make_frame(t), seg, make_meta()).anomalies) == 1
    assert analyse(make_frame(t), seg, make_meta(analysis={"min_contrast_k": 0.3})).anomalies == ()
    weak = np.full((60, 80), 19.0)
    weak[20:40, 30:50] -= 0.05  # below the 0.1 K floor
    assert analyse(make_frame(weak), make_seg(d, u=weak), make_meta()).anomalies == ()


def test_noise_estimate_fallback_when_segmentation_has_none(rng):
    t = np.full((80, 100), 19.0)
    d = np.zeros(t.shape, int)
    t[20:50, 30:70] -= 1.0
    d[20:50, 30:70] = 1
    u = t.copy()
    t = t + rng.normal(0, 0.05, t.shape)
    seg = dataclasses.replace(make_seg(d, u=u), params=FakeParams(noise_k=None))
    (a,) = analyse(make_frame(t), seg, make_meta(camera={"pixel_m": 0.01})).anomalies
    assert a.delta_k == pytest.approx(-1.0, abs=0.05)


def test_masked_pixels_are_ignored():
    t = np.full((60, 80), 19.0)
    d = np.zeros(t.shape, int)
    t[20:40, 30:50] = 15.0
    d[20:40, 30:50] = 1
    mask = np.zeros(t.shape, bool)
    mask[20:25, 30:50] = True
    t[mask] = -40.0  # a dead stripe inside the defect
    res = analyse(make_frame(t, mask=mask), make_seg(d, u=t), make_meta(camera={"pixel_m": 0.01}))
    (a,) = res.anomalies
    assert a.area_px == 300 and a.min_c == 15.0
    assert np.isnan(res.reference_c[mask]).all()
    assert not res.labels[mask].any()


def test_ids_follow_raster_order_and_severity_is_a_permutation():
    t = np.full((80, 120), 19.0)
    d = np.zeros(t.shape, int)
    for k, (r, c, dt) in enumerate([(50, 10, -1.0), (5, 80, -3.0), (5, 10, -2.0)], start=1):
        t[r:r + 20, c:c + 20] += dt
        d[r:r + 20, c:c + 20] = k
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(camera={"pixel_m": 0.01}))
    assert [(a.bbox_row0, a.bbox_col0) for a in res.anomalies] == [(5, 10), (5, 80), (50, 10)]
    assert [a.anomaly for a in res.anomalies] == [1, 2, 3]
    assert sorted(a.severity for a in res.anomalies) == [1, 2, 3]
    assert [a.severity for a in res.anomalies] == [2, 1, 3]  # 3 K, 2 K, 1 K defects of equal size


def test_shape_mismatch_is_a_config_error():
    t = np.full((30, 40), 19.0)
    seg = make_seg(np.zeros((30, 41), int), u=np.full((30, 41), 19.0))
    with pytest.raises(ConfigError, match="shape"):
        analyse(make_frame(t), seg, make_meta())


def test_no_python_warnings_are_emitted():
    t = np.full((60, 80), 19.0)
    d = np.zeros(t.shape, int)
    t[20:40, 30:50] -= 2.0
    d[20:40, 30:50] = 1
    meta = make_meta(camera={"hfov_deg": None, "distance_m": None}, air={"inside_c": 20.0, "outside_c": 18.0})
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = analyse(make_frame(t), make_seg(d, u=t), meta)
    assert caught == [] and len(res.warnings) >= 2


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    seed=st.integers(0, 2**31 - 1),
    n_boxes=st.integers(0, 6),
    view=st.sampled_from(["interior", "exterior", "roof"]),
)
def test_random_scenes_keep_the_invariants(seed, n_boxes, view):
    g = np.random.default_rng(seed)
    t = 15.0 + g.normal(0, 0.05, (48, 64)) + np.linspace(0, 1, 64)[None, :]
    d = np.zeros(t.shape, int)
    for k in range(1, n_boxes + 1):
        r, c = g.integers(0, 40), g.integers(0, 56)
        h, w = g.integers(2, 20), g.integers(2, 20)
        t[r:r + h, c:c + w] += g.uniform(-3, 3)
        d[r:r + h, c:c + w] = k
    res = analyse(make_frame(t), make_seg(d, u=t), make_meta(surface={"view": view}))
    ids = [a.anomaly for a in res.anomalies]
    assert ids == list(range(1, len(ids) + 1))
    assert sorted(a.severity for a in res.anomalies) == ids
    for a in res.anomalies:
        assert a.cause in CAUSES and a.kind in ("cold", "warm") and a.reason
        assert a.area_px >= 9 and int((res.labels == a.anomaly).sum()) == a.area_px
        assert (a.kind == "cold") == (a.delta_k < 0)
        assert a.delta_k == pytest.approx(a.mean_c - a.reference_c)
        if a.excess_w is not None:  # only for the heat-loss sign, and then positive
            assert a.excess_w > 0 and a.excess_low_w <= a.excess_w <= a.excess_high_w
            assert a.kind == ("cold" if view == "interior" else "warm")
        assert a.bbox_row0 <= a.centroid_row < a.bbox_row1 and a.bbox_col0 <= a.centroid_col < a.bbox_col1
