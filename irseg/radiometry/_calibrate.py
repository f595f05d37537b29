"""``calibrate``: stored values -> surface temperature (°C) with a validity mask."""

from __future__ import annotations

import numpy as np

from .._defaults import resolve_reflected_c
from ..errors import CalibrationError, ConfigError, InputError
from ..types import RawFrame, SurveyMeta, ThermalFrame
from ._dead_pixels import _DEAD_FLOOR_K, fill_masked, mask_dead_pixels
from ._planck import _K0, _rad_check_method
from ._radiance import apparent_to_object, object_to_apparent

__all__ = ["calibrate"]


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


def _rad_maps(raw: RawFrame, emissivity: float, reflected_c: float, emissivity_map, reflected_map,
              warnings: list[str]):
    """The emissivity and reflected temperature to correct with: the scalars, or the per-pixel maps."""
    shape = np.shape(raw.data)
    out = []
    for name, value, given in (("emissivity_map", emissivity, emissivity_map),
                               ("reflected_map", reflected_c, reflected_map)):
        if given is None:
            out.append(value)
            continue
        arr = np.asarray(given, dtype=np.float64)
        if arr.shape != shape:
            raise ConfigError(f"{raw.path}: {name} has shape {arr.shape}, the image {shape}; give one value per pixel")
        out.append(arr)
    if emissivity_map is not None and float(np.min(out[0])) < 0.5:
        warnings.append(
            f"emissivity down to {float(np.min(out[0])):g} in a material zone is low: the reading there is "
            "dominated by reflections and the temperatures are qualitative only"
        )
    return out[0], out[1]


def _rad_side_air_c(meta: SurveyMeta) -> float | None:
    """Air temperature on the camera's side (inside for interior views, outside otherwise)."""
    return meta.air.inside_c if meta.surface.view == "interior" else meta.air.outside_c


def calibrate(
    raw: RawFrame,
    meta: SurveyMeta,
    *,
    method: str = "planck",
    emissivity_map: np.ndarray | None = None,
    reflected_map: np.ndarray | None = None,
) -> ThermalFrame:
    """Turn stored values into surface temperature (°C) with a validity mask.

    Steps: integer images ``value = raw * scale + offset``; ``units`` kelvin → °C and a
    plausibility check (−100…200 °C); non-finite pixels masked; if the export already
    applied an emissivity (``camera.export_emissivity < 1``) it is undone to apparent
    temperature; isolated dead/hot pixels masked (:func:`mask_dead_pixels`); emissivity,
    reflected temperature and transmittance corrected with band radiance; masked pixels
    filled with a local median.

    The reflected temperature is ``meta.surface.reflected_c``, which
    :func:`irseg.metadata.load_metadata` always resolves (and records when assumed); a
    hand-built SurveyMeta without it gets the same rule,
    :func:`irseg._defaults.resolve_reflected_c`.

    Parameters
    ----------
    raw : RawFrame
        Image as read.
    meta : SurveyMeta
        Metadata in force. Not stored in the result: the frame is data only.
    method : {"planck", "broadband"}
        Band-limited Planck radiance over ``camera.band_um`` (default) or σT⁴.
    emissivity_map, reflected_map : (M, N) ndarray, optional
        Per-pixel emissivity in (0, 1] and reflected temperature (°C) replacing
        ``[surface] emissivity`` / the reflected temperature in force, pixel by pixel
        (material zones, :func:`irseg.controls.material_maps`).

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
        Unknown ``method``; a map whose shape is not the image's, an emissivity map value
        outside (0, 1].
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

    reflected, _ = resolve_reflected_c(meta)  # the value in force: load_metadata has resolved it already
    atmosphere = cam.atmosphere_c if cam.atmosphere_c is not None else _rad_side_air_c(meta)
    if cam.transmittance < 1.0 and atmosphere is None:
        atmosphere = 20.0
        warnings.append("transmittance < 1 without [camera] atmosphere_c or air temperature: path air taken as 20 °C")
    if surf.emissivity < 0.5:
        warnings.append(
            f"emissivity {surf.emissivity:g} is low: the reading is dominated by reflections and "
            "the temperatures are qualitative only"
        )

    emissivity, reflected_in = _rad_maps(raw, surf.emissivity, reflected, emissivity_map, reflected_map, warnings)
    mask = invalid | dead
    work = np.where(mask, np.nan, apparent)
    obj = apparent_to_object(
        work, emissivity=emissivity, reflected_c=reflected_in, transmittance=cam.transmittance,
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
        n_dead=n_dead,
        n_nan=n_nan,
        warnings=tuple(warnings),
    )
