"""End-to-end validation (issue 6): fresh physics scenes through ``irseg.pipeline.process_image``.

Targets from issue 6: per scene IoU >= 0.85 against the defect footprints, area within 10 %,
excess heat within 15 % (truth: simulated change in surface heat flow, footprint + 0.3 m rim),
reference temperature within 0.3 K (truth: no-defect surface temperature under the defect),
and no stud, plate or slab edge reported as missing insulation. The truth comes from the
simulation, which is checked against ISO 6946 hand calculations in test_conduction.py.
"""

from __future__ import annotations

import warnings

import pytest

from irseg.scenes._validation import TARGETS, VALIDATION_RECIPES, passes, validate_recipe

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    out = {}
    d = tmp_path_factory.mktemp("validation")
    for r in VALIDATION_RECIPES:
        with warnings.catch_warnings():
            # condition warnings (e.g. a small inside-outside difference) are part of the result, not an error
            warnings.simplefilter("ignore")
            out[r.stem] = validate_recipe(r, d)
    return out


@pytest.mark.parametrize("stem", [r.stem for r in VALIDATION_RECIPES])
def test_scene_meets_targets(results, stem):
    res = results[stem]
    checked = [row for row in res["defects"] if row["checked"]]
    assert checked, "every validation scene has at least one defect the analysis must find"
    failures = []
    if res["scene_iou"] < TARGETS["iou_min"]:
        failures.append(f"scene IoU {res['scene_iou']:.3f}")
    for row in checked:
        for target, ok in passes(row).items():
            if not ok:
                failures.append(
                    f"{row['name']}: {target} (iou {row['iou']:.3f}, area {row['area_rel']}, excess "
                    f"{row['excess_rel']}, reference {row['reference_err_k']}, causes {row['causes']})"
                )
    assert not failures, f"{stem} misses targets {TARGETS}: " + "; ".join(failures)


@pytest.mark.parametrize("stem", [r.stem for r in VALIDATION_RECIPES])
def test_structure_never_reported_as_missing_insulation(results, stem):
    res = results[stem]
    assert res["false_missing"] == [], (
        f"{stem}: anomalies {res['false_missing']} are reported as missing_insulation outside every "
        "missing-insulation footprint (studs, plates, slab edge or lintel)"
    )
    bridges = [row for row in res["defects"] if row["cause"] == "thermal_bridge"]
    for row in bridges:
        assert "missing_insulation" not in row["causes"], f"{stem}: {row['name']} called missing insulation"
