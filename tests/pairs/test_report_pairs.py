"""The report's section per pair, from a summary (no survey run): pictures, leaks, a failed pair, escaping."""

from __future__ import annotations

import pytest

from irseg.errors import ConfigError
from irseg.report import render_report
from tests.report.test_report import make_summary, overlay_png


def _with_pairs(hostile: str = "<b>x</b>"):
    summary, overlays = make_summary()
    names = [i["image"] for i in summary["images"]]
    pressed, reference = names[1], names[0]
    summary["anomalies"].append({"image": pressed, "anomaly": 9, "cause": "air_leakage", "kind": "cold",
                                 "reason": "the surface cooled under a 50 Pa pressure difference", "area_px": 40,
                                 "pressure_pa": 50.0, "cooling_k": 0.9, "cooling_max_k": 1.8})
    summary["pairs"] = [
        {"image": pressed, "reference": reference, "status": "ok", "pressure_pa": 50.0, "minutes": 15.0,
         "drift_k": -0.25, "difference": "x/difference.png",
         "registration": {"shift_px": [-4.4, -5.5], "rotation_deg": 0.18, "scale": 1.008, "rms_px": 0.1,
                          "overlap": 0.97}},
        {"image": names[2], "reference": "nope", "status": "failed", "message": hostile},
    ]
    differences = {pressed: overlay_png(7, "difference")[0]}
    return summary, overlays, differences


def test_a_pair_section_shows_both_images_the_difference_and_the_leaks():
    summary, overlays, differences = _with_pairs()
    html = render_report(summary, overlays, differences=differences)
    section = html[html.index('<section id="pairs">'):]
    section = section[:section.index("</section>")]
    first, second = section.split('<article class="pair"')[1:]
    assert first.count("data:image/png;base64,") == 3
    assert "50 Pa after 15 min" in first and "overlap 97 %" in first and "registration residual 0.10 px" in first
    assert "0.90 / 1.80" in first  # the leak's mean and peak cooling
    assert "could not be compared: &lt;b&gt;x&lt;/b&gt;" in second  # the message is text, never markup
    assert 'href="#pairs"' in html


def test_without_pairs_there_is_no_section_and_a_bad_row_is_refused():
    summary, overlays = make_summary()
    assert '<section id="pairs">' not in render_report(summary, overlays)
    summary["pairs"] = ["not an object"]
    with pytest.raises(ConfigError, match=r"summary\['pairs'\]\[0\] must be an object"):
        render_report(summary, overlays)
