"""Checks of what :func:`irseg.segmentation.segment` is given: the temperature array, its mask, the knobs."""

from __future__ import annotations

import math
import numbers

import numpy as np

from ..errors import ConfigError, InputError

__all__ = ["MIN_SIZE_PX", "check_inputs", "check_number", "check_max_num_iter", "check_feature_size"]

MIN_SIZE_PX = 8  # smallest accepted image side


def check_number(name: str, value: object, *, low: float, low_open: bool, allow_none: bool = False) -> float | None:
    """``value`` as a finite float above ``low`` (or at least ``low`` unless ``low_open``); None if allowed."""
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ConfigError(f"segment: {name} = {value!r} is not a number; give a finite real value")
    x = float(value)
    bad = not math.isfinite(x) or (x <= low if low_open else x < low)
    if bad:
        rel = ">" if low_open else ">="
        raise ConfigError(f"segment: {name} = {value!r} is out of range; it must be finite and {rel} {low:g}")
    return x


def check_inputs(temperature: object, mask: object) -> tuple[np.ndarray, np.ndarray | None]:
    """The temperature as a real 2-D array of at least 8 x 8 and the mask as bool (or None).

    Raises
    ------
    InputError
        Wrong dtype, dimension or size; a mask of the wrong shape or dtype or covering
        everything; non-finite values outside the mask.
    """
    arr = np.asarray(temperature)
    if arr.dtype.kind not in "fiu":
        raise InputError(
            f"segment: temperature has dtype {arr.dtype}; pass a real-valued (float or integer) "
            "temperature array, e.g. np.asarray(t, dtype=np.float32)"
        )
    if arr.ndim != 2:
        raise InputError(
            f"segment: temperature must be a 2-D (M, N) array, got shape {arr.shape}; "
            "pass one single-channel frame at a time"
        )
    if min(arr.shape) < MIN_SIZE_PX:
        raise InputError(
            f"segment: temperature of shape {arr.shape} is too small; "
            f"the minimum is {MIN_SIZE_PX} x {MIN_SIZE_PX} pixels"
        )
    m = None
    if mask is not None:
        m = np.asarray(mask)
        if m.shape != arr.shape:
            raise InputError(f"segment: mask shape {m.shape} differs from temperature shape {arr.shape}")
        if m.dtype != bool:
            if m.dtype.kind in "iu" and np.isin(m, (0, 1)).all():
                m = m.astype(bool)
            else:
                raise InputError(f"segment: mask has dtype {m.dtype}; pass a bool array (True = invalid pixel)")
        if m.all():
            raise InputError("segment: every pixel is masked; there is nothing to segment")
    if arr.dtype.kind == "f":
        finite = np.isfinite(arr)
        bad = ~finite if m is None else (~finite & ~m)
        n_bad = int(np.count_nonzero(bad))
        if n_bad:
            where = "and no mask" if m is None else "outside the mask"
            raise InputError(
                f"segment: temperature has {n_bad} non-finite pixel(s) (NaN/inf) {where}; "
                "pass mask=~np.isfinite(temperature) to exclude them"
            )
    return arr, m


def check_max_num_iter(max_num_iter: object) -> int:
    """``max_num_iter`` as an int >= 1."""
    if isinstance(max_num_iter, bool) or not isinstance(max_num_iter, numbers.Integral) or max_num_iter < 1:
        raise ConfigError(f"segment: max_num_iter = {max_num_iter!r} must be an integer >= 1")
    return int(max_num_iter)


def check_feature_size(min_feature_px: float, shape: tuple[int, ...]) -> None:
    """Refuse a smallest feature larger than the image's shorter side.

    No feature wider than the image can be separated, and the work grows with the size: the
    merge step's square window has ``min_feature_px`` squared cells (30 000 px asked 900 MB)
    and the phase field is ``min_feature_px / 4`` pixels wide.

    Raises
    ------
    ConfigError
        Naming ``[segment] min_feature_px``, the value and the valid range for this image.
    """
    side = int(min(shape))
    if min_feature_px > side:
        raise ConfigError(
            f"segment: [segment] min_feature_px = {min_feature_px:g} px is larger than this image "
            f"({shape[0]} x {shape[1]} px); its valid range is 1 to {side} px (the image's shorter side); "
            "give the smallest feature worth separating, typically 4 to 50 px"
        )
