"""Ambrosio–Tortorelli segmentation of thermograms.

``segment(temperature, *, mask=None, noise_k=None, min_step_k=0.5, min_feature_px=4.0, ...)``
returns a :class:`Segmentation`: a piecewise-smooth temperature field ``u``, a phase
field ``v`` (about 0 on the jump set), the jump set ``edges`` and region ``labels``.
The method, its discretisation and the choice of weights are in ``docs/method.md``.
The public function is also ``irseg.segment``.
"""

from __future__ import annotations

from ._noise import estimate_noise_k
from ._params import SegmentParams
from ._inputs import MIN_SIZE_PX
from ._segment import Segmentation, segment

__all__ = ["segment", "Segmentation", "SegmentParams", "estimate_noise_k", "MIN_SIZE_PX"]
