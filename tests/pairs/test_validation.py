"""Validation of the pair analysis on simulated pairs (the criteria of issue 16, per pair).

The scenes come from ``irseg.scenes._pairs``: the same wall at ambient pressure and under a pressure
difference, cold-air jets at a skirting board, a window frame, a socket and a ceiling junction, a drift of
the whole surface of a few tenths of a kelvin, real defects in both shots, and a camera moved by up to
20 px and 3° with up to 2 % zoom. The thresholds are those of the issue [CP: the project's acceptance
criteria, not a published value].
"""

from __future__ import annotations

import pytest

from irseg.scenes._pairs import validate_pair


@pytest.mark.slow
@pytest.mark.parametrize("seed", [0, 1, 2, 3, 4])
def test_a_simulated_pair_meets_the_acceptance_criteria(seed):
    out = validate_pair(seed)
    assert out["failed"] is None, out["failed"]
    assert out["registration_rms_px"] <= 0.5  # registration error over the frame against the true transform
    assert out["n_per_leak"] == [1, 1, 1, 1]  # each leak found as one anomaly
    assert min(out["ious"]) >= 0.75  # against the simulated cooled footprint
    assert out["n_false"] == 0  # no air_leakage on the drift or on the defects present in both
    assert out["rms_px"] is not None and out["rms_px"] < 0.5


@pytest.mark.slow
@pytest.mark.parametrize("seed", [0, 1])
def test_a_noisy_camera_still_gives_one_anomaly_per_leak(seed):
    # NETD 0.15 K, three times the sample camera's [CP: a poor but usable building camera]
    out = validate_pair(seed, netd_k=0.15)
    assert out["failed"] is None and out["n_per_leak"] == [1, 1, 1, 1] and out["n_false"] == 0
    assert min(out["ious"]) >= 0.75 and out["registration_rms_px"] <= 0.5


@pytest.mark.slow
@pytest.mark.parametrize("seed", [0, 1])
def test_a_pair_whose_views_do_not_overlap_fails(seed):
    out = validate_pair(seed, far=True)
    assert out["failed"] is not None and "cannot register" in out["failed"]
