"""The wall/flat-roof junction of the scene maker (issue 12, geometric bridges): its 2-D section and its scene.

Checks against ISO 6946's series resistances far from the junction, the energy balance, ISO 14683's
relation between ψ by internal and by external dimensions, ISO 10211's grid and cut-off criteria,
and the scene's truth against the section's ψ_i. The solver itself is checked against ISO 10211's
test reference cases in test_construction_corner.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from irseg.errors import ConfigError
from irseg.scenes._junction import JUNCTION_NAME, JUNCTION_VIEW_DEG, junction_scene, junction_section

# the scene maker's brick + external EPS wall and warm flat roof, inside first; λ in W/(m·K)
WALL = (("gypsum_plaster", 0.015), ("brick", 0.215), ("eps", 0.10), ("render", 0.010))
ROOF = (("concrete", 0.15), ("eps", 0.15), ("bitumen", 0.010))
LAMBDA = {"gypsum_plaster": 0.70, "brick": 0.77, "eps": 0.036, "render": 1.4, "concrete": 2.3, "bitumen": 0.20}
# R_si 0.13 (horizontal heat flow, the wall), 0.10 (upward, the soffit), R_se 0.04 m²K/W
# (ISO 6946:2017, table 7) [from memory]
R_SI_WALL, R_SI_ROOF, R_SE = 0.13, 0.10, 0.04


def _section(**kw):
    kw.setdefault("leg_m", 2.0)
    return junction_section(WALL, ROOF, h_wall=1 / R_SI_WALL, h_roof=1 / R_SI_ROOF, h_outside=1 / R_SE, **kw)


@pytest.fixture(scope="module")
def junction():
    return _section()


def _u(layers, r_si):
    # U = 1/(R_si + Σ d/λ + R_se) (ISO 6946:2017, clause 6.7.1) [C: series resistances]
    return 1.0 / (r_si + sum(t / LAMBDA[m] for m, t in layers) + R_SE)


def test_junction_far_field_is_each_plane_element_of_iso_6946(junction):
    u_w, u_r = _u(WALL, R_SI_WALL), _u(ROOF, R_SI_ROOF)
    assert junction.u_wall_w_m2k == pytest.approx(u_w, rel=1e-9)
    assert junction.u_roof_w_m2k == pytest.approx(u_r, rel=1e-9)
    # far from the junction each inside face sits at its own 1-D temperature factor 1 − U·R_si
    wall, ceiling = junction.s_m > 1.5, junction.s_m < -1.5
    assert np.max(np.abs(junction.factor[wall] - (1 - u_w * R_SI_WALL))) < 1e-4
    assert np.max(np.abs(junction.factor[ceiling] - (1 - u_r * R_SI_ROOF))) < 1e-4
    # the better-insulated roof's soffit is the warmer face [C]
    assert junction.factor_roof > junction.factor_wall


def test_junction_energy_balance_and_psi_conventions(junction):
    # steady state: what the room gives both inside faces leaves through the outside faces [C: physics]
    assert junction.l2d_w_mk == pytest.approx(junction.outflow_w_mk, rel=1e-9)
    # ISO 14683 dimension systems [from memory: ISO 14683 clause 4]: the external lengths add the other
    # element's thickness to each leg, so ψ_i − ψ_e = U_w·d_roof + U_r·d_wall; the junction loses more
    # than its internal lengths count (ψ_i > 0) and less than its external lengths count (ψ_e < 0)
    d_wall, d_roof = sum(t for _, t in WALL), sum(t for _, t in ROOF)
    assert junction.psi_i_w_mk - junction.psi_e_w_mk == pytest.approx(
        junction.u_wall_w_m2k * d_roof + junction.u_roof_w_m2k * d_wall, rel=1e-9)
    assert junction.psi_i_w_mk > 0 > junction.psi_e_w_mk


def test_junction_is_coldest_at_the_inner_corner_and_fades_along_both_faces(junction):
    s, f = junction.s_m, junction.factor
    assert abs(s[np.argmin(f)]) <= 0.01
    c = junction.contrast(np.array([0.0, 0.05, 0.2, 0.5, 1.0]))
    assert np.all(np.diff(np.abs(c)) < 0)
    c = junction.contrast(-np.array([0.0, 0.05, 0.2, 0.5, 1.0]))
    assert np.all(np.diff(np.abs(c)) < 0)
    assert junction.contrast(np.array([2.5, -2.5])).tolist() == [0.0, 0.0]  # beyond the legs


def test_junction_psi_converges_with_the_grid_and_the_cut_off():
    # ISO 10211: cut-off planes at least 1 m from the junction, a grid whose halving changes the heat
    # flow little [from memory: ISO 10211 clauses 5.2, 6.2]
    base = _section(leg_m=1.5, cell_m=0.005)
    fine = _section(leg_m=1.5, cell_m=0.0025)
    long = _section(leg_m=2.5, cell_m=0.005)
    assert fine.psi_i_w_mk == pytest.approx(base.psi_i_w_mk, rel=0.02)
    assert long.psi_i_w_mk == pytest.approx(base.psi_i_w_mk, rel=0.01)
    with pytest.raises(ConfigError, match="whole number"):
        junction_section(WALL, (("concrete", 0.1234),), h_wall=7.7, h_roof=10.0, h_outside=25.0)
    with pytest.raises(ConfigError, match="1 m"):
        _section(leg_m=0.5)


def test_junction_scene_truth_is_psi_i_over_the_projected_faces():
    sc = junction_scene(inside_c=20.0, outside_c=0.0, stratification_k_m=0.0)
    cos_v = math.cos(math.radians(JUNCTION_VIEW_DEG))
    assert sc.area_scale == pytest.approx(1 / cos_v)
    assert sc.element.height_m == pytest.approx(4.0 * cos_v)  # rows foreshortened, columns not
    assert sc.element.width_m == pytest.approx(4.0)
    (truth,) = sc.truth
    assert truth.name == JUNCTION_NAME and truth.cause == "thermal_bridge"
    psi = sc.settings["junction"]["psi_i_w_mk"]
    # the truth's excess is Σ h·(T_plane − T_si) over both faces within 1 m of the junction = ψ_i·ΔT per
    # metre of junction, less the faint contrast beyond 1 m [C: definition of ψ_i, ISO 14683]
    per_m = truth.excess_w / sc.element.width_m / 20.0
    assert 0.95 * psi < per_m <= 1.001 * psi
    # the junction line is the coldest row, horizontal, and the truth region runs the full width
    mask = sc.defect_masks[0]
    row = int(np.argmin(sc.surface_c[:, sc.element.nx // 2]))
    assert mask[row].all()
    assert abs(row * sc.cell_m - 1.8 * cos_v) <= 2 * sc.cell_m
    # far from it the faces are their plane elements'
    assert np.allclose(sc.surface_c[:3], sc.baseline_c[:3], atol=0.01)
    assert np.allclose(sc.surface_c[-3:], sc.baseline_c[-3:], atol=0.01)
    with pytest.raises(ConfigError, match="1 m of ceiling"):
        junction_scene(junction_y_m=0.5)
