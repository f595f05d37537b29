"""Ambrosio–Tortorelli segmentation of thermograms.

``segment(temperature, *, mask=None, noise_k=None, min_step_k=0.5, min_feature_px=4.0, ...)``
returns a :class:`Segmentation`: a piecewise-smooth temperature field ``u``, a phase
field ``v`` (about 0 on the jump set), the jump set ``edges`` and region ``labels``.
The method, its discretisation and the choice of weights are in ``docs/method.md``.

``irseg.segment`` is both this subpackage and, through :mod:`irseg`'s lazy exports,
the function; the subpackage is made callable so ``irseg.segment(t)`` works whichever
of the two an earlier import left bound.
"""

from __future__ import annotations

import sys
import types
from typing import Any

from ._noise import estimate_noise_k
from ._params import SegmentParams
from ._segment import MIN_SIZE_PX, Segmentation, segment

__all__ = ["segment", "Segmentation", "SegmentParams", "estimate_noise_k", "MIN_SIZE_PX"]


class _CallableModule(types.ModuleType):
    """Module type whose call forwards to :func:`segment`."""

    def __call__(self, *args: Any, **kwargs: Any) -> Segmentation:
        return segment(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule
