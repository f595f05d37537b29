"""Paired thermograms under a pressure difference: where the surface changed because air moved.

The trade's method for air leakage (ISO 9972 fan pressurisation; EN 13187 and ASTM E1186
describe thermography combined with a pressure difference): the same view is taken at
ambient pressure and again after some minutes at a pressure difference (e.g. 50 Pa, inside
lower than outside); leakage paths are where the surface cooled between the two (inside view
in the heating season), or warmed (outside view).

:func:`analyse_pair` chains the pure steps:

- :func:`register` (``_register``): the reference onto the pressurised image (phase
  correlation, then ECC on band-passed structure images, robust to the leaks and the drift);
- :func:`remove_drift` (``_difference``): ΔT = pressurised − registered reference minus a
  robust plane (the sound surface's common drift);
- :func:`detect_leaks` (``_detect``): significant extra cooling against the noise of both
  images and the registration residual, one anomaly per leak, its extent at 30 % of its peak.

A defect present in both images (missing insulation, a stud) cancels in ΔT: it is not leakage.
"""

from __future__ import annotations

import numpy as np

from ..types import ThermalFrame
from ._detect import EXTENT_FRACTION, GROW_Z, MIN_PEAK_K, SEED_Z, detect_leaks
from ._difference import SMOOTH_PX, remove_drift, smooth_nan, smoothed_noise, smoothing_px
from ._register import MIN_CORRELATION, MIN_OVERLAP, register, warp_reference
from ._types import PairAnalysis, PairAnomaly, Registration

__all__ = [
    "analyse_pair", "register", "remove_drift", "detect_leaks", "warp_reference", "PairAnalysis", "PairAnomaly",
    "Registration", "MIN_OVERLAP", "MIN_CORRELATION", "SEED_Z", "GROW_Z", "MIN_PEAK_K", "EXTENT_FRACTION", "SMOOTH_PX",
    "leak_sign",
]


def leak_sign(view: str | None) -> int:
    """+1 when leakage under depressurisation cools the surface seen (inside view), -1 otherwise."""
    return 1 if view in (None, "interior") else -1


def analyse_pair(reference: ThermalFrame, pressed: ThermalFrame, *, pressure_pa: float,
                 minutes: float | None = None, view: str | None = "interior", first_id: int = 1,
                 pixel_area_m2: float | None = None, own_labels: np.ndarray | None = None) -> PairAnalysis:
    """Compare a pressurised thermogram with its reference at ambient pressure.

    Parameters
    ----------
    reference, pressed : ThermalFrame
        The shot at ambient pressure and the shot under the pressure difference (°C, masks).
    pressure_pa : float
        The pressure difference during the pressurised shot, Pa.
    minutes : float, optional
        Time at that difference when the shot was taken.
    view : str
        ``[surface] view`` of the pressurised image: ``interior`` looks for cooling,
        ``exterior`` and ``roof`` for warming.
    first_id : int
        Id of the first leak (after the image's own anomalies).
    pixel_area_m2 : float, optional
        One pixel's area on the surface (areas in m² when given).
    own_labels : (M, N) int ndarray, optional
        The pressurised image's own anomaly ids (``Analysis.labels``): a leak's reason names those it covers.

    Returns
    -------
    PairAnalysis

    Raises
    ------
    InputError
        The views do not overlap or do not match (from :func:`register`).
    """
    from ..segmentation import estimate_noise_k

    names = (_name(reference.path), _name(pressed.path))
    noise_p = estimate_noise_k(pressed.temperature_c, mask=pressed.mask)
    noise_r = estimate_noise_k(reference.temperature_c, mask=reference.mask)
    reg = register(reference.temperature_c, pressed.temperature_c, noise_k=noise_p, names=names)
    shape = pressed.temperature_c.shape
    registered = warp_reference(reference.temperature_c, reg.matrix, shape)
    ref_bad = warp_reference(reference.mask.astype(np.float32), reg.matrix, shape, nearest=True)
    change = pressed.temperature_c.astype(np.float32) - registered
    change[np.asarray(pressed.mask, bool) | ~(ref_bad < 0.5)] = np.nan
    difference, drift = remove_drift(change)
    noise = float(np.hypot(noise_p, noise_r))
    scale_px = smoothing_px(noise)
    smooth = smooth_nan(difference, scale_px)
    grad_r, grad_c = np.gradient(smooth_nan(registered))
    gradient = np.nan_to_num(np.hypot(grad_r, grad_c))
    residual = 0.5 if reg.rms_px is None else max(float(reg.rms_px), 0.2)
    sigma = np.sqrt(smoothed_noise(noise, scale_px) ** 2 + (residual * gradient) ** 2).astype(np.float32)
    sign = leak_sign(view)
    labels, leaks = detect_leaks(difference, smooth, sigma, sign=sign, pressed_c=pressed.temperature_c,
                                 reference_c=registered, first_id=first_id, pressure_pa=pressure_pa,
                                 minutes=minutes, pixel_area_m2=pixel_area_m2, own_labels=own_labels)
    return PairAnalysis(registration=reg, difference_k=difference, drift_k=drift, noise_k=noise, labels=labels,
                        anomalies=leaks, pressure_pa=float(pressure_pa), minutes=minutes, sign=sign)


def _name(path: str) -> str:
    import os

    return os.path.basename(str(path)) or str(path)
