"""Radiometric correction: band-limited Planck radiance, emissivity and reflected temperature.

Measurement equation for an opaque grey surface seen through a path of transmittance τ
(ε emissivity, T_refl reflected apparent temperature, T_atm path air temperature)::

    L_b(T_app) = τ ε L_b(T_obj) + τ (1 − ε) L_b(T_refl) + (1 − τ) L_b(T_atm)

``L_b`` is the blackbody radiance integrated over the camera band (``band_um``), computed
from Planck's law with CODATA constants (``scipy.constants``) by Gauss–Legendre quadrature
on a fine temperature table (150–700 K, 0.05 K steps) that is interpolated in
log-radiance; out-of-table temperatures are integrated directly (``irseg._planck``). The broadband
Stefan–Boltzmann form (``method="broadband"``) replaces ``L_b`` with σT⁴/π, for comparison.

See ``docs/radiometry.md`` for the assumptions (apparent temperature export, defaults).
"""

from __future__ import annotations

import cv2
import numpy as np
from scipy import ndimage

from ._planck import (
    _K0,
    METHODS,
    _rad_check_band,
    _rad_check_method,
    _rad_forward_k,
    _rad_inverse_k,
)
from .errors import CalibrationError, ConfigError, InputError
from .types import RawFrame, SurveyMeta, ThermalFrame

__all__ = [
    "band_radiance",
    "band_temperature",
    "apparent_to_object",
    "object_to_apparent",
    "calibrate",
    "mask_dead_pixels",
    "fill_masked",
    "METHODS",
]


def _rad_result(out: np.ndarray):
    """A Python float for 0-d results, the array otherwise."""
    return float(out) if np.ndim(out) == 0 else out


def band_radiance(temperature_k, *, band_um: tuple[float, float] = (7.5, 14.0), method: str = "planck"):
    """Blackbody radiance integrated over a spectral band.

    Parameters
    ----------
    temperature_k : float or ndarray
        Temperature in **kelvin** (any shape).
    band_um : (float, float), default (7.5, 14.0)
        Spectral band in micrometres.
    method : {"planck", "broadband"}
        ``"planck"``: ∫ 2hc²/λ⁵ / (exp(hc/λkT) − 1) dλ over the band; ``"broadband"``: σT⁴/π.

    Returns
    -------
    float or ndarray
        Radiance in W m⁻² sr⁻¹ (NaN for non-positive or non-finite temperatures).

    References
    ----------
    Planck's law; CODATA constants as carried by ``scipy.constants``.
    """
    band = _rad_check_band(band_um)
    return _rad_result(_rad_forward_k(np.asarray(temperature_k, dtype=np.float64), band, _rad_check_method(method)))


def band_temperature(radiance, *, band_um: tuple[float, float] = (7.5, 14.0), method: str = "planck"):
    """Inverse of :func:`band_radiance`: the blackbody temperature (kelvin) of a band radiance.

    Parameters
    ----------
    radiance : float or ndarray
        Band radiance, W m⁻² sr⁻¹.
    band_um, method
        As in :func:`band_radiance`.

    Returns
    -------
    float or ndarray
        Temperature in kelvin; NaN where the radiance is not positive.
    """
    band = _rad_check_band(band_um)
    return _rad_result(_rad_inverse_k(np.asarray(radiance, dtype=np.float64), band, _rad_check_method(method)))


def _rad_check_params(emissivity: float, transmittance: float) -> None:
    if not (0.0 < emissivity <= 1.0):
        raise ConfigError(f"emissivity = {emissivity!r} is outside (0, 1]; use the material's long-wave emissivity")
    if not (0.0 < transmittance <= 1.0):
        raise ConfigError(
            f"transmittance = {transmittance!r} is outside (0, 1]; give the path transmittance "
            "(1 for short building distances)"
        )


def _rad_surroundings(
    *,
    emissivity: float,
    reflected_c: float,
    transmittance: float,
    atmosphere_c: float | None,
    band_um: tuple[float, float],
    method: str,
) -> tuple[tuple[float, float], str, np.ndarray, np.ndarray]:
    """Checked band and method, and the reflected and path radiances (W m⁻² sr⁻¹)."""
    _rad_check_params(emissivity, transmittance)
    band = _rad_check_band(band_um)
    method = _rad_check_method(method)
    t_atm = reflected_c if atmosphere_c is None else atmosphere_c
    lr = _rad_forward_k(np.asarray(reflected_c, dtype=np.float64) + _K0, band, method)
    la = _rad_forward_k(np.asarray(t_atm, dtype=np.float64) + _K0, band, method)
    return band, method, lr, la


def object_to_apparent(
    object_c,
    *,
    emissivity: float,
    reflected_c: float,
    transmittance: float = 1.0,
    atmosphere_c: float | None = None,
    band_um: tuple[float, float] = (7.5, 14.0),
    method: str = "planck",
):
    """Apparent (blackbody-equivalent, ε = 1) temperature a camera reads for a surface.

    Parameters
    ----------
    object_c : float or ndarray
        True surface temperature, °C.
    emissivity : float
        Band emissivity of the surface, (0, 1].
    reflected_c : float
        Reflected apparent temperature, °C.
    transmittance : float, default 1
        Path transmittance, (0, 1].
    atmosphere_c : float, optional
        Path air temperature, °C (needed only when transmittance < 1; default reflected_c).
    band_um, method
        As in :func:`band_radiance`.

    Returns
    -------
    float or ndarray
        Apparent temperature, °C.
    """
    band, method, lr, la = _rad_surroundings(
        emissivity=emissivity, reflected_c=reflected_c, transmittance=transmittance,
        atmosphere_c=atmosphere_c, band_um=band_um, method=method,
    )
    lo = _rad_forward_k(np.asarray(object_c, dtype=np.float64) + _K0, band, method)
    meas = transmittance * (emissivity * lo + (1.0 - emissivity) * lr) + (1.0 - transmittance) * la
    return _rad_result(_rad_inverse_k(meas, band, method) - _K0)


def apparent_to_object(
    apparent_c,
    *,
    emissivity: float,
    reflected_c: float,
    transmittance: float = 1.0,
    atmosphere_c: float | None = None,
    band_um: tuple[float, float] = (7.5, 14.0),
    method: str = "planck",
):
    """Surface temperature from an apparent (ε = 1) reading: inverts the measurement equation.

    Parameters
    ----------
    apparent_c : float or ndarray
        Apparent temperature, °C.
    emissivity, reflected_c, transmittance, atmosphere_c, band_um, method
        As in :func:`object_to_apparent`.

    Returns
    -------
    float or ndarray
        Object temperature, °C; NaN where the corrected radiance is not positive (the
        reading is colder than the reflected surroundings allow).

    References
    ----------
    The three-term measurement equation of thermography (emission, reflection, path).
    """
    band, method, lr, la = _rad_surroundings(
        emissivity=emissivity, reflected_c=reflected_c, transmittance=transmittance,
        atmosphere_c=atmosphere_c, band_um=band_um, method=method,
    )
    meas = _rad_forward_k(np.asarray(apparent_c, dtype=np.float64) + _K0, band, method)
    lo = (meas - (1.0 - transmittance) * la - transmittance * (1.0 - emissivity) * lr) / (transmittance * emissivity)
    return _rad_result(_rad_inverse_k(lo, band, method) - _K0)


# --------------------------------------------------------------------------- pixel masking

#: A dead/hot pixel differs from its 3×3 median by more than max(_DEAD_K_SIGMA·σ, _DEAD_FLOOR_K).
_DEAD_K_SIGMA = 10.0
_DEAD_FLOOR_K = 1.0


def _rad_nearest_fill(values: np.ndarray, invalid: np.ndarray) -> np.ndarray:
    """Copy of ``values`` with invalid pixels replaced by the nearest valid pixel's value."""
    if not invalid.any():
        return values.copy()
    idx = ndimage.distance_transform_edt(invalid, return_distances=False, return_indices=True)
    return values[tuple(idx)]


def _rad_median3(values: np.ndarray) -> np.ndarray:
    """3×3 median with mirrored borders (``scipy.ndimage.median_filter(size=3, mode="mirror")``).

    OpenCV's float32 median kernel is about 9× faster than scipy's generic rank filter
    (480 × 640 frame, 3.8 ms against 33 ms on the project's 2-core machine); the values are
    centred first so float32 keeps micro-kelvin resolution.
    """
    offset = float(np.median(values[:: max(1, values.shape[0] // 32), :: max(1, values.shape[1] // 32)]))
    centred = np.ascontiguousarray(values - offset, dtype=np.float32)
    padded = cv2.copyMakeBorder(centred, 1, 1, 1, 1, cv2.BORDER_REFLECT_101)
    return cv2.medianBlur(padded, 3)[1:-1, 1:-1].astype(np.float64) + offset


def mask_dead_pixels(image, *, invalid=None, floor_k: float = _DEAD_FLOOR_K) -> np.ndarray:
    """Find isolated dead or hot pixels.

    A pixel is flagged when it lies farther from the median of its 3×3 neighbourhood than
    ``max(10 σ, floor_k)`` — σ being a robust noise estimate (1.4826 × the median absolute
    residual from the 3×3 median over valid pixels) — *and* none of its eight neighbours
    deviates in the same direction by at least half as much. Real features of two pixels
    or more across (a 2×2 hot spot, a thin line, a region's corner or edge) therefore keep
    their pixels.

    Parameters
    ----------
    image : (M, N) ndarray
        Temperatures (any consistent unit, K or °C differences).
    invalid : (M, N) bool ndarray, optional
        Pixels already known to be invalid (NaN); they are never flagged and never vote.
    floor_k : float, default 1.0
        Smallest deviation, in kelvin, that can make a dead pixel.

    Returns
    -------
    (M, N) bool ndarray
        True at isolated outliers.
    """
    x = np.asarray(image, dtype=np.float64)
    bad = ~np.isfinite(x) if invalid is None else (np.asarray(invalid, dtype=bool) | ~np.isfinite(x))
    if x.ndim != 2 or x.shape[0] < 3 or x.shape[1] < 3 or bad.all():
        return np.zeros(x.shape, dtype=bool)
    filled = _rad_nearest_fill(x, bad)
    med = _rad_median3(filled)
    resid = filled - med
    r_valid = np.abs(resid[~bad])
    sigma = 1.4826 * float(np.median(r_valid)) if r_valid.size else 0.0
    thr = max(_DEAD_K_SIGMA * sigma, float(floor_k))
    cand = (np.abs(resid) > thr) & ~bad
    if not cand.any():
        return cand
    padded = np.pad(filled, 1, mode="reflect")
    pad_bad = np.pad(bad, 1, mode="reflect")
    rows, cols = np.nonzero(cand)  # few pixels: test the neighbours of candidates only
    sign = np.sign(resid[rows, cols])
    half = 0.5 * np.abs(resid[rows, cols])
    centre = med[rows, cols]
    similar = np.zeros(rows.size, dtype=bool)
    for dr in (-1, 0, 1):
        for dc in (-1, 0, 1):
            if dr == 0 and dc == 0:
                continue
            nb = padded[rows + 1 + dr, cols + 1 + dc]
            nb_bad = pad_bad[rows + 1 + dr, cols + 1 + dc]
            similar |= ((nb - centre) * sign >= half) & ~nb_bad
    out = np.zeros(x.shape, dtype=bool)
    out[rows[~similar], cols[~similar]] = True
    return out


def fill_masked(image, mask) -> np.ndarray:
    """Replace masked pixels by the median of their 3×3 neighbourhood (nearest valid values).

    Parameters
    ----------
    image : (M, N) ndarray
    mask : (M, N) bool ndarray
        True where the pixel is invalid.

    Returns
    -------
    (M, N) float64 ndarray
        Finite everywhere when at least one pixel is valid.
    """
    x = np.asarray(image, dtype=np.float64)
    mask = np.asarray(mask, dtype=bool) | ~np.isfinite(x)
    if not mask.any():
        return x.copy()
    filled = _rad_nearest_fill(x, mask)
    med = _rad_median3(filled)
    out = x.copy()
    out[mask] = med[mask]
    return out


# --------------------------------------------------------------------------- calibration

_PLAUSIBLE_C = (-100.0, 200.0)


def _rad_to_celsius(raw: RawFrame, meta: SurveyMeta, warnings: list[str]) -> np.ndarray:
    """Stored values to °C: scale/offset for integer images, then units."""
    cam = meta.camera
    data = np.asarray(raw.data)
    name = raw.path
    if data.ndim != 2 or data.size == 0:
        raise InputError(f"{name}: image of shape {data.shape} is not a non-empty 2-D matrix")
    if data.dtype.kind in "iub":
        values = data.astype(np.float64) * cam.scale + cam.offset
        scaled = True
    elif data.dtype.kind == "f":
        values = data.astype(np.float64)
        scaled = False
        if cam.scale != 1.0 or cam.offset != 0.0:
            warnings.append(
                f"[camera] scale/offset apply to integer images only; {name} stores floats, taken as {cam.units}"
            )
    else:
        raise InputError(f"{name}: pixel type {data.dtype} is not a number")
    finite = np.isfinite(values)
    if not finite.any():
        raise InputError(f"{name}: no finite pixel (all NaN or infinite); the export is empty or corrupt")
    med = float(np.median(values[finite]))
    as_c = med - _K0 if cam.units == "kelvin" else med
    lo, hi = _PLAUSIBLE_C
    if not lo <= as_c <= hi:
        if cam.units == "celsius" and lo <= med - _K0 <= hi:
            hint = 'the values look like kelvin: set [camera] units = "kelvin"'
        elif cam.units == "kelvin" and lo <= med <= hi:
            hint = 'the values look like celsius: set [camera] units = "celsius"'
        elif scaled:
            hint = "check [camera] scale and offset (value = raw * scale + offset) for this camera's raw values"
        else:
            hint = "check [camera] units and that the file holds temperatures"
        raise CalibrationError(
            f"{name}: median value {med:.6g} {'after scale/offset ' if scaled else ''}means "
            f"{as_c:.1f} °C with units = \"{cam.units}\", outside the plausible {lo:g}…{hi:g} °C; {hint}"
        )
    return values - _K0 if cam.units == "kelvin" else values


def _rad_side_air_c(meta: SurveyMeta) -> float | None:
    """Air temperature on the camera's side (inside for interior views, outside otherwise)."""
    return meta.air.inside_c if meta.surface.view == "interior" else meta.air.outside_c


def calibrate(raw: RawFrame, meta: SurveyMeta, *, method: str = "planck") -> ThermalFrame:
    """Turn stored values into surface temperature (°C) with a validity mask.

    Steps: integer images ``value = raw * scale + offset``; ``units`` kelvin → °C and a
    plausibility check (−100…200 °C); non-finite pixels masked; if the export already
    applied an emissivity (``camera.export_emissivity < 1``) it is undone to apparent
    temperature; isolated dead/hot pixels masked (:func:`mask_dead_pixels`); emissivity,
    reflected temperature and transmittance corrected with band radiance; masked pixels
    filled with a local median.

    Parameters
    ----------
    raw : RawFrame
        Image as read.
    meta : SurveyMeta
        Metadata in force.
    method : {"planck", "broadband"}
        Band-limited Planck radiance over ``camera.band_um`` (default) or σT⁴.

    Returns
    -------
    ThermalFrame
        ``temperature_c`` and ``apparent_c`` float64 (finite everywhere), ``mask``,
        ``n_dead``, ``n_nan`` and ``warnings``.

    Raises
    ------
    InputError
        Not a 2-D numeric image, or no finite pixel.
    CalibrationError
        Values implausible for the units/scale given (with a hint); an export emissivity
        without the reflected temperature it used.
    ConfigError
        Unknown ``method``.
    """
    method = _rad_check_method(method)
    warnings: list[str] = []
    cam, surf = meta.camera, meta.surface
    stored_c = _rad_to_celsius(raw, meta, warnings)
    nan_mask = ~np.isfinite(stored_c)
    n_nan = int(nan_mask.sum())
    below_zero = ~nan_mask & (stored_c <= -_K0)
    band = tuple(cam.band_um)

    apparent = np.where(nan_mask | below_zero, np.nan, stored_c)
    if cam.export_emissivity < 1.0:
        if cam.export_reflected_c is None:
            raise CalibrationError(
                f"{raw.path}: [camera] export_emissivity = {cam.export_emissivity:g} needs export_reflected_c, "
                "the reflected temperature the export applied; add it, or set export_emissivity = 1.0 "
                "for apparent-temperature exports"
            )
        apparent = object_to_apparent(
            apparent, emissivity=cam.export_emissivity, reflected_c=cam.export_reflected_c,
            band_um=band, method=method,
        )
    invalid = ~np.isfinite(apparent)
    dead = mask_dead_pixels(apparent, invalid=invalid, floor_k=max(_DEAD_FLOOR_K, 20.0 * cam.netd_k))
    n_dead = int(dead.sum()) + int(below_zero.sum())
    if below_zero.any():
        warnings.append(f"{int(below_zero.sum())} pixel(s) below absolute zero were masked as dead")

    reflected = surf.reflected_c
    if reflected is None:
        reflected = _rad_side_air_c(meta)
        if reflected is None:
            reflected = 20.0
            warnings.append(
                "no [surface] reflected_c and no air temperature on the camera's side: reflected "
                "temperature taken as 20 °C; measure it (reflector method) for an accurate estimate"
            )
    atmosphere = cam.atmosphere_c if cam.atmosphere_c is not None else _rad_side_air_c(meta)
    if cam.transmittance < 1.0 and atmosphere is None:
        atmosphere = 20.0
        warnings.append("transmittance < 1 without [camera] atmosphere_c or air temperature: path air taken as 20 °C")
    if surf.emissivity < 0.5:
        warnings.append(
            f"emissivity {surf.emissivity:g} is low: the reading is dominated by reflections and "
            "the temperatures are qualitative only"
        )

    mask = invalid | dead
    work = np.where(mask, np.nan, apparent)
    obj = apparent_to_object(
        work, emissivity=surf.emissivity, reflected_c=reflected, transmittance=cam.transmittance,
        atmosphere_c=atmosphere, band_um=band, method=method,
    )
    obj = np.asarray(obj, dtype=np.float64)
    unphysical = ~mask & ~np.isfinite(obj)
    if unphysical.any():
        warnings.append(
            f"{int(unphysical.sum())} pixel(s) read colder than the reflected surroundings allow "
            f"(emissivity {surf.emissivity:g}, reflected {reflected:g} °C) and were masked; check both values"
        )
        mask = mask | unphysical
    if mask.all():
        raise CalibrationError(
            f"{raw.path}: no pixel gives a physical surface temperature with emissivity {surf.emissivity:g} "
            f"and reflected temperature {reflected:g} °C; check [surface] emissivity and reflected_c"
        )
    temperature_c = fill_masked(obj, mask)
    apparent_c = fill_masked(apparent, mask)
    return ThermalFrame(
        path=raw.path,
        temperature_c=temperature_c,
        mask=mask,
        apparent_c=apparent_c,
        meta=meta,
        n_dead=n_dead,
        n_nan=n_nan,
        warnings=tuple(warnings),
    )
