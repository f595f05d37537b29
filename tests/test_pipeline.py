"""irseg.pipeline: one image through the real stages; stage tagging; warnings collected."""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.survey import SHAPE, make_survey, wall_image

from irseg.errors import InputError, MetadataError
from irseg.vocabulary import STAGES
from irseg.pipeline import RenderedImage, failure_stage, process_image, render_result


def test_process_image_finds_the_drawn_patch(tmp_path):
    (path,) = make_survey(tmp_path, 1, tiff=False)
    result = process_image(path)
    assert result.path == str(path)
    assert result.frame.temperature_c.shape == SHAPE
    # the wall is drawn at 20 °C and reflected_c is 20 °C: an object at the temperature of its
    # surroundings reads its true temperature whatever the emissivity (Kirchhoff's law), so the
    # corrected sound wall stays at 20 °C (noise 0.05 K by construction)
    assert float(np.median(result.frame.temperature_c)) == pytest.approx(20.0, abs=0.01)
    assert set(result.timings) == {"read", "metadata", "calibrate", "segment", "analyse"}
    (anomaly,) = result.analysis.anomalies
    # The patch is rows 20..36, cols 30..50 by construction (tests.support.survey.wall_image);
    # its centre is at (27.5, 39.5) in pixel-centre coordinates.
    assert anomaly.kind == "cold"
    assert anomaly.centroid_row == pytest.approx(27.5, abs=1.0)
    assert anomaly.centroid_col == pytest.approx(39.5, abs=1.0)
    timings_before = dict(result.timings)
    rendered = render_result(result)
    assert isinstance(rendered, RenderedImage)
    # PNG signature: PNG specification (ISO/IEC 15948), section 5.2 [V]
    assert rendered.overlay_png[:8] == rendered.labels_png[:8] == b"\x89PNG\r\n\x1a\n"
    assert rendered.seconds > 0.0 and rendered.warnings == ()
    assert result.timings == timings_before  # the frozen result is not changed: the time is returned


def test_overrides_are_applied_last(tmp_path):
    (path,) = make_survey(tmp_path, 1, tiff=False)
    result = process_image(path, overrides={"air": {"inside_c": 22.0}})
    assert result.meta.air.inside_c == 22.0 and result.meta.air.outside_c == 0.0
    assert result.meta.sources[-1] == "command line"


def test_exceptions_carry_their_stage(tmp_path):
    (tmp_path / "junk.npy").write_bytes(b"\x93NUMPY broken")
    with pytest.raises(InputError) as info:
        process_image(tmp_path / "junk.npy")
    assert failure_stage(info.value) == "read"

    np.save(tmp_path / "ok.npy", wall_image(0))
    (tmp_path / "ok.toml").write_text("[air]\ninside_c = 'warm'\n", encoding="utf-8")
    with pytest.raises(MetadataError) as info:
        process_image(tmp_path / "ok.npy")
    assert failure_stage(info.value) == "metadata"
    assert failure_stage(ValueError("untagged")) is None
    assert STAGES == ("read", "metadata", "calibrate", "segment", "analyse", "render", "write", "worker")


def test_stage_warnings_are_collected_not_emitted(tmp_path):
    # pytest runs with filterwarnings=error: an emitted warning would fail this test.
    np.save(tmp_path / "flat.npy", np.full(SHAPE, 18.0, np.float32))
    result = process_image(tmp_path / "flat.npy")
    assert result.analysis.anomalies == ()
    assert any("uniform" in w for w in result.warnings)
    stage_warnings = (*result.warnings, *result.analysis.warnings)
    assert any("no geometry" in w for w in stage_warnings)
    assert any("inside_c and outside_c not given" in w for w in stage_warnings)


def test_irseg_warnings_recorded_others_passed_through(tmp_path, monkeypatch):
    import warnings

    import irseg.analysis
    from irseg.errors import ConditionsWarning

    (path,) = make_survey(tmp_path, 1, tiff=False)
    real = irseg.analysis.analyse

    def noisy(frame, seg, meta):
        warnings.warn("wind above the limit (test)", ConditionsWarning, stacklevel=2)
        warnings.warn("a library's own warning (test)", UserWarning, stacklevel=2)
        return real(frame, seg, meta)

    monkeypatch.setattr(irseg.analysis, "analyse", noisy)
    with pytest.warns(UserWarning, match="library's own") as caught:
        result = process_image(path)
    assert "wind above the limit (test)" in result.warnings
    assert not any(issubclass(w.category, ConditionsWarning) for w in caught)
