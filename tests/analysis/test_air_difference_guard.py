"""Per-kelvin figures are not divided by an inside-outside difference below 1 K (issue 15 item 9).

kWh/year = excess W / (θ_i − θ_e) × degree-days × 24 / 1000 (degree-day method) and
f_Rsi = (θ_si − θ_e)/(θ_i − θ_e) (ISO 13788) both divide by the air difference. Two air
thermometers of ±0.5 K each (a usual accuracy, common practice) leave a difference below 1 K
unknown even in sign: the figures are not computed and a warning says why.
"""

from __future__ import annotations

import numpy as np
import pytest
from tests.support.fakes import make_frame, make_meta, make_seg

from irseg.analysis import analyse
from irseg.analysis._measure import annual_energy_kwh, temperature_factor


def test_tiny_difference_gives_no_per_kelvin_figures():
    # issue 15: 1e-7 K gave 2.2e10 kWh/year and f_Rsi 5.8e7
    assert annual_energy_kwh(10.0, inside_c=20.0 + 1e-7, outside_c=20.0, degree_days=3000.0) is None
    assert temperature_factor(15.0, inside_c=20.0 + 1e-7, outside_c=20.0) is None
    assert annual_energy_kwh(10.0, inside_c=20.5, outside_c=20.0, degree_days=3000.0) is None
    # at 1 K they are computed: 10 W / 1 K × 3000 K·d × 24 h / 1000 = 720 kWh (degree-day method, by hand)
    assert annual_energy_kwh(10.0, inside_c=21.0, outside_c=20.0, degree_days=3000.0) == pytest.approx(720.0)
    # ISO 13788: (20.5 − 20) / (21 − 20) = 0.5 (by hand)
    assert temperature_factor(20.5, inside_c=21.0, outside_c=20.0) == pytest.approx(0.5)


def test_analysis_warns_and_leaves_the_figures_empty():
    t = np.full((80, 100), 18.0)
    d = np.zeros(t.shape, int)
    t[20:50, 20:60] -= 2.5
    d[20:50, 20:60] = 1
    meta = make_meta(camera={"pixel_m": 0.01}, air={"inside_c": 20.0 + 1e-7, "outside_c": 20.0})
    res = analyse(make_frame(t), make_seg(d, u=t), meta)
    assert res.anomalies, "the cold patch is an anomaly"
    for a in res.anomalies:
        assert a.excess_w is not None  # the heat flow at survey conditions is not per kelvin
        assert a.excess_kwh_year is None and a.f_rsi is None and a.mould_risk is None
    (msg,) = [w for w in res.warnings if "below 1 K" in w]
    assert "kWh/year), f_Rsi and mould risk are not computed" in msg and "[air] inside_c and outside_c" in msg
