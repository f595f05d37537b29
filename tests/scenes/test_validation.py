"""End-to-end validation (issues 6 and 11): fresh physics scenes through ``irseg.pipeline.process_image``.

Targets from issues 6 and 11: per defect IoU >= 0.85 (sharp) / 0.75 (graded, diffuse) against its
truth region, area within 10 %, excess heat within 15 % (truth: simulated change in surface heat
flow, defect mask + 0.3 m rim), reference temperature within 0.3 K (truth: no-defect surface
temperature), the simulated cause, exactly one anomaly per defect; per scene a false-alarm area of
at most 10 % of the defects' area and no stud, plate or slab edge reported as missing insulation;
the same scene at three resolutions with the same anomaly count and areas within 10 %. The truth
comes from the simulation, which is checked against ISO 6946 hand calculations in
test_conduction.py.
"""

from __future__ import annotations

import warnings

import pytest

from irseg.scenes._validation import (
    RESOLUTION_SERIES,
    TARGETS,
    VALIDATION_RECIPES,
    passes,
    resolution_consistency,
    scene_passes,
    validate_recipe,
)

pytestmark = pytest.mark.slow

# Targets this version does not reach yet, each explained in docs/validation.md. Kept exact: a fix must
# take its entry out, a regression fails. (The partial fills of val6 left these sets when the sound
# surface began to hold the anomalies' soft tails out of its last pass: docs/analysis.md §2.1.)
KNOWN_MISSES: set[tuple[str, str, str]] = set()
KNOWN_INCONSISTENT: set[str] = set()


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
    missed = set()
    details = []
    for row in checked:
        for target, ok in passes(row).items():
            if not ok:
                missed.add((stem, row["name"], target))
                details.append(
                    f"{row['name']}: {target} (iou {row['iou']:.3f}, area {row['area_rel']}, excess "
                    f"{row['excess_rel']}, reference {row['reference_err_k']}, causes {row['causes']}, "
                    f"n {row['n_found']})"
                )
    expected = {m for m in KNOWN_MISSES if m[0] == stem}
    assert missed == expected, f"{stem} targets {TARGETS}: " + "; ".join(details)


@pytest.mark.parametrize("stem", [r.stem for r in VALIDATION_RECIPES])
def test_no_false_alarms_and_structure_never_reported_as_missing_insulation(results, stem):
    res = results[stem]
    assert scene_passes(res) == {"false alarms": True, "structure": True}, (
        f"{stem}: false-alarm area {res['false_alarm_rel']:.3f} of the defects' (anomalies {res['false_alarms']}); "
        f"anomalies {res['false_missing']} reported as missing_insulation outside every missing-insulation "
        "region (studs, plates, slab edge or lintel)"
    )
    bridges = [row for row in res["defects"] if row["cause"] == "thermal_bridge"]
    for row in bridges:
        assert "missing_insulation" not in row["causes"], f"{stem}: {row['name']} called missing insulation"


@pytest.mark.parametrize("stem", sorted(RESOLUTION_SERIES))
def test_same_scene_at_three_resolutions(tmp_path, stem):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        series = [validate_recipe(r, tmp_path) for r in RESOLUTION_SERIES[stem]]
    assert [r["size"] for r in series] == [[240, 320], [480, 640], [1024, 1280]]
    consistency = resolution_consistency(series)
    assert consistency["ok"] is (stem not in KNOWN_INCONSISTENT), consistency
