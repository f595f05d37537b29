"""From a thermographer's knobs to the weights of the Ambrosio–Tortorelli functional.

The derivation is in ``docs/method.md`` ("Choosing the weights"). In short, with
lengths in pixels and temperatures in °C or K, so that every difference (each ``_k``
quantity) is in kelvin:

* ``ell = max(1, min_feature_px / 2)`` is the smoothing length of ``u``
  (``beta = 1 / ell**2``): the u-equation ``u - Δu / beta = g`` smooths over ``ell``.
* In the Mumford–Shah limit a straight step of height ``h`` pays
  ``h**2 * sqrt(beta) / 2`` per unit length if ``u`` follows it smoothly and
  ``alpha`` if it jumps, so steps above ``h* = sqrt(2 alpha / sqrt(beta))``
  become edges. irseg puts ``h*`` a margin below the requested ``min_step_k``
  (finite epsilon, blur and discretisation raise the effective threshold) and
  never below ``NOISE_FACTOR * noise_k``, under which noise makes edges.
* ``epsilon = max(1, min_feature_px / 4)`` px: the jump band (``v < 1/2``, about
  ``2.8 epsilon`` wide) stays narrower than the smallest feature, and never below
  the 1 px the grid resolves;
  ``eta`` keeps the u-system definite but costs ``eta * H**2`` across a jump of
  height ``H``; it is set to 1 % of ``alpha`` over the image's robust range.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = [
    "SegmentParams",
    "derive_params",
    "STEP_MARGIN",
    "NOISE_FACTOR",
    "EDGE_THRESHOLD",
    "WEAK_EDGE_THRESHOLD",
]

STEP_MARGIN = 0.6  # h* = STEP_MARGIN * min_step_k (calibrated, see docs/method.md)
NOISE_FACTOR = 2.0  # h* >= NOISE_FACTOR * noise_k (calibrated on white noise, see docs/method.md)
CORRELATED_GAIN = 0.5  # up to +50 % on NOISE_FACTOR for noise correlated between pixels
EDGE_THRESHOLD = 0.5  # jump set: v < EDGE_THRESHOLD ...
WEAK_EDGE_THRESHOLD = 0.8  # ... plus v < WEAK_EDGE_THRESHOLD connected to it (hysteresis)
EPSILON_PER_FEATURE = 0.25  # epsilon = max(1 px, min_feature_px / 4)


@dataclass(frozen=True)
class SegmentParams:
    """Parameters actually used by :func:`irseg.segmentation.segment`.

    Attributes
    ----------
    noise_k : float
        Noise standard deviation, K (estimated when not given).
    noise_estimated : bool
        True when ``noise_k`` was estimated from the image.
    noise_correlation : float
        Ratio of the 3-pixel to the 1-pixel noise estimate (1 for white noise; 1.0 when
        ``noise_k`` was given). Correlated noise forms blobs that look like small steps,
        so the noise floor of the step threshold rises with it, by up to 50 %.
    min_step_k : float
        Requested smallest step that should make an edge, K.
    min_feature_px : float
        Smallest feature worth separating, pixels.
    jump_threshold_k : float
        Mumford–Shah step threshold ``h*`` the weights encode, K
        (``max(STEP_MARGIN * min_step_k, NOISE_FACTOR * noise_k)``).
    smoothing_px : float
        Smoothing length ``ell = 1 / sqrt(beta)``, pixels.
    alpha, beta, epsilon, eta : float
        Weights of the functional on the full-resolution grid (pixel units):
        edge weight (K² per pixel of jump length), data weight
        (per pixel²), phase-field width (pixels) and the residual stiffness on the jump set.
    edge_threshold, weak_edge_threshold : float
        The jump set is ``v < edge_threshold`` plus the ``v < weak_edge_threshold``
        pixels connected to it (hysteresis).
    levels : int
        Grids used (1 = full resolution only; each further level halves the size).
    max_num_iter : int
        Cap on alternations at full resolution.
    tol : float
        Relative energy decrease per alternation below which the solver stops.
    """

    noise_k: float
    noise_estimated: bool
    noise_correlation: float
    min_step_k: float
    min_feature_px: float
    jump_threshold_k: float
    smoothing_px: float
    alpha: float
    beta: float
    epsilon: float
    eta: float
    edge_threshold: float
    weak_edge_threshold: float
    levels: int
    max_num_iter: int
    tol: float


def derive_params(
    *,
    noise_k: float,
    noise_estimated: bool,
    min_step_k: float,
    min_feature_px: float,
    value_range_k: float,
    noise_correlation: float = 1.0,
    levels: int,
    max_num_iter: int,
    tol: float,
) -> SegmentParams:
    """Map the thermographer's knobs to (alpha, beta, epsilon, eta); see the module docstring.

    Parameters
    ----------
    noise_k, min_step_k : float
        Noise level and smallest step, K.
    noise_estimated : bool
        Whether ``noise_k`` came from :func:`estimate_noise_k`.
    min_feature_px : float
        Smallest feature, pixels.
    value_range_k : float
        Robust range of the temperatures, K (used for ``eta``).
    noise_correlation : float
        See :class:`SegmentParams`.
    levels, max_num_iter, tol
        Solver settings, recorded as given.

    Returns
    -------
    SegmentParams
    """
    ell = max(1.0, min_feature_px / 2.0)
    beta = 1.0 / (ell * ell)
    corr_gain = 1.0 + CORRELATED_GAIN * min(1.0, max(0.0, (noise_correlation - 1.0) / 2.0))
    h_star = max(STEP_MARGIN * min_step_k, NOISE_FACTOR * corr_gain * noise_k)
    alpha = 0.5 * h_star * h_star * math.sqrt(beta)
    span = max(float(value_range_k), h_star)
    eta = float(min(1e-3, 0.01 * alpha / (span * span)))
    return SegmentParams(
        noise_k=float(noise_k),
        noise_estimated=bool(noise_estimated),
        noise_correlation=float(noise_correlation),
        min_step_k=float(min_step_k),
        min_feature_px=float(min_feature_px),
        jump_threshold_k=float(h_star),
        smoothing_px=float(ell),
        alpha=float(alpha),
        beta=float(beta),
        epsilon=max(1.0, EPSILON_PER_FEATURE * min_feature_px),
        eta=eta,
        edge_threshold=EDGE_THRESHOLD,
        weak_edge_threshold=WEAK_EDGE_THRESHOLD,
        levels=int(levels),
        max_num_iter=int(max_num_iter),
        tol=float(tol),
    )


def robust_range(values: np.ndarray) -> float:
    """Spread between the 0.1 and 99.9 percentiles (robust to a few hot/dead pixels)."""
    if values.size == 0:
        return 0.0
    step = max(1, values.size // 50_000)  # a regular subsample is plenty for two percentiles
    lo, hi = np.percentile(values[::step], [0.1, 99.9])
    return float(hi - lo)
