"""Scene-maker construction (issue 12): windows, radiators, pipes; the truth ψ."""

from __future__ import annotations

import numpy as np
import pytest

from irseg.errors import ConfigError
from irseg.scenes._construction import GLASS_EMISSIVITY, _equivalent, construction_items, pipe, radiator, truth_psi, window
from irseg.scenes._elements import timber_frame_wall


def test_equivalent_material_gives_the_u_value_with_the_standard_surface_resistances():
    # U = 1 / (R_si + d/λ + R_se), R_si 0.13 and R_se 0.04 m²K/W (ISO 6946:2017, table 7 and clause 6.7.1)
    for u in (1.1, 1.4, 2.8):
        m = _equivalent("x", u, 0.165)
        assert 1.0 / (0.13 + 0.165 / m.conductivity_w_mk + 0.04) == pytest.approx(u, rel=1e-12)
    with pytest.raises(ConfigError, match="surface resistances"):
        _equivalent("x", 6.5, 0.165)  # above 1/(0.13 + 0.04) = 5.9 W/m²K: no conductor can give it


def test_window_parts_and_glass_emissivity():
    el = timber_frame_wall()
    w = window(el, x0_m=0.5, x1_m=1.4, y0_m=0.3, y1_m=1.3)
    assert [b.material.name for b in w.blocks] == ["window_frame", "glass_edge", "glazing"]
    # uncoated soda-lime glass, long-wave emissivity about 0.84 (common practice)
    assert GLASS_EMISSIVITY == 0.84
    assert np.nanmax(w.emissivity) == np.nanmin(w.emissivity) == 0.84
    assert w.cause == "unclassified"


def test_radiator_runs_from_55_at_its_top_to_45_at_its_bottom_with_cooler_seams():
    el = timber_frame_wall()
    r = radiator(el, x0_m=0.6, x1_m=1.4, y0_m=1.0, y1_m=1.5)
    face = r.face_c[np.isfinite(r.face_c)]
    assert face.max() <= 55.0 and face.min() >= 45.0 - 4.0  # seams 4 K below the channels
    rows = np.flatnonzero(np.isfinite(r.face_c).any(axis=1))
    top, bottom = r.face_c[rows[0]], r.face_c[rows[-1]]
    assert np.nanmax(top) > np.nanmax(bottom) + 8.0
    # the plume warms the air above the radiator, not below it
    y = (np.arange(el.ny) + 0.5) * el.cell_m
    assert r.air_change_k[y < 1.0].max() > 4.0 and r.air_change_k[y > 1.55].max() == 0.0


def test_construction_items_parse_and_reject_unknown_kinds():
    el = timber_frame_wall()
    items = construction_items(el, ("radiator:0.6:1.4:1.0:1.5", "pipe:1.8:0.2:1.7:60", "window:0.3:1.2:0.2:1.0:1.1"))
    assert [d.name for d in items] == ["radiator_1", "pipe_2", "window_3"]
    assert np.nanmax(items[1].face_c) == pytest.approx(60.0, abs=0.01)
    assert pipe(el, x_m=1.0, y0_m=0.2, y1_m=1.0).cause == "unclassified"
    with pytest.raises(ConfigError, match="unknown construction item"):
        construction_items(el, ("fireplace:1:2:3:4",))


def test_truth_psi_is_heat_per_metre_and_kelvin():
    # ψ = Q / (L·ΔT) (ISO 14683:2017 clause 3, definition) [from memory]: 0.865 W over 5 m at 20 K is 0.00865
    assert truth_psi(0.865, 5.0, 20.0) == pytest.approx(0.00865)
    assert truth_psi(1.0, 0.0, 20.0) is None
