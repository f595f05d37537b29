"""--range-c survey: one colour range for every overlay of a survey, kept across a resumed run (issue 14)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from tests.support.survey import make_survey

from irseg.batch import run_survey
from irseg.errors import ConfigError


def _ranges(out, paths):
    records = [json.loads((out / p.stem / "result.json").read_text(encoding="utf-8")) for p in paths]
    return [r["analysis"]["display_range_c"] for r in records], [r["analysis"]["overlay_range_c"] for r in records]


def test_survey_range_is_the_union_of_the_images_ranges_and_survives_resume(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    own, drawn = _ranges(out, paths)
    assert drawn == own  # default: each image's own range
    assert len({tuple(r) for r in own}) > 1  # the images differ (cold patches of 2, 3 and 4 K)
    before = {p.stem: (out / p.stem / "overlay.png").read_bytes() for p in paths}

    run_survey([survey], out, jobs=1, range_c="survey")
    own2, drawn2 = _ranges(out, paths)
    union = [min(r[0] for r in own2), max(r[1] for r in own2)]
    assert own2 == own and all(d == union for d in drawn2)
    after = {p.stem: (out / p.stem / "overlay.png").read_bytes() for p in paths}
    assert all(after[s] != before[s] for s in after)  # every overlay drawn again with the common range

    again = run_survey([survey], out, jobs=1, range_c="survey", resume=True)
    assert again.n_skipped == 3  # nothing computed, nothing redrawn: the recorded range still holds
    assert {p.stem: (out / p.stem / "overlay.png").read_bytes() for p in paths} == after

    fixed = run_survey([survey], tmp_path / "fixed", jobs=1, range_c=(10.0, 25.0))
    assert all(d == [10.0, 25.0] for d in _ranges(tmp_path / "fixed", paths)[1]) and fixed.n_ok == 3
    with pytest.raises(ConfigError, match="range_c"):
        run_survey([survey], tmp_path / "bad", jobs=1, range_c="25,10")
    assert np.isfinite(union).all()
