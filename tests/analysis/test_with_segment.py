"""End to end with the real Ambrosio–Tortorelli segmentation."""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta

from irseg.analysis import analyse
from irseg.segmentation import segment


def test_framed_wall_with_an_empty_bay(rng):
    # 100 mm members at 400 mm centres [CP], 1 K stratification over the height, one empty bay
    # (ASTM C1060, scope: a cold rectangle between members [V])
    m, n = 120, 240
    rows = np.mgrid[0:m, 0:n][0]
    t = 18.5 + 1.0 * rows / m
    for c in range(20, 240, 40):
        t[:, c:c + 10] -= 0.8
    t[20:100, 110:140] -= 3.0
    t = t + rng.normal(0.0, 0.05, t.shape)
    seg = segment(t)
    res = analyse(make_frame(t), seg, make_meta(camera={"pixel_m": 0.01}))
    causes = [a.cause for a in res.anomalies]
    assert causes.count("missing_insulation") == 1
    # the members are one framing anomaly (issue 12: framing summarised, one anomaly per image)
    (framing,) = [a for a in res.anomalies if a.cause == "thermal_bridge" and "parallel" in a.reason]
    assert int(framing.reason.split()[0]) >= 5 and "expected in framed construction" in framing.reason
    bay = next(a for a in res.anomalies if a.cause == "missing_insulation")
    assert bay.delta_k == pytest.approx(-3.0, abs=0.25)
    assert bay.area_px == pytest.approx(80 * 30, rel=0.1)
