"""``calibrate``: stored values -> surface temperature (°C) with a validity mask."""

from __future__ import annotations

import numpy as np

from .._defaults import resolve_reflected_c
from ..errors import CalibrationError, ConfigError, InputError
from ..metadata import BAND_LIMITS_UM, SURFACE_C, SURFACE_REASON
from ..types import RawFrame, SurveyMeta, ThermalFrame
from ._dead_pixels import _DEAD_FLOOR_K, _rad_blocks, fill_masked, mask_dead_pixels
from ._planck import _K0, _rad_check_method
from ._radiance import apparent_to_object, object_to_apparent

__all__ = ["calibrate"]


#: Largest share of the finite pixels that may lie outside the plausible surface temperatures
#: (:data:`~irseg.metadata._bounds.SURFACE_C`) and be masked: a few hot or cold objects in the frame
#: (a lamp, a flue outlet, a window reflecting the sky, a dead pixel) are normal; more means the values
#: are not surface temperatures in the declared units (common practice).
IMPLAUSIBLE_SHARE = 0.01

#: Warn when the median surface temperature lies farther than this from the range spanned by the air
#: temperatures and the reflected temperature, K: envelope surfaces lie between the inside and the
#: outside air in steady heating-season conditions (conduction), and the sky pulls exterior surfaces a
#: few kelvin below the outside air (common practice); 20 K also leaves room for heated objects.
AIR_MARGIN_K = 20.0


def _rad_share(n: int, total: int) -> str:
    """``n`` of ``total`` as a percentage (over 1 % wherever it is used)."""
    return f"{100.0 * n / total:.3g} %"


def _rad_encoding(meta: SurveyMeta, scaled: bool) -> str:
    """The settings that turn stored values into °C, as named in messages."""
    cam = meta.camera
    text = f'[camera] units = "{cam.units}"'
    if scaled:
        text += f", scale = {cam.scale:g}, offset = {cam.offset:g}"
    return text


def _rad_values(stored: np.ndarray, meta: SurveyMeta) -> np.ndarray:
    """Stored values (a block, or a few pixels) as float64 °C: scale/offset for integers, then units."""
    cam = meta.camera
    with np.errstate(over="ignore", invalid="ignore"):
        values = stored.astype(np.float64)
        if stored.dtype.kind in "iub":
            values = values * cam.scale + cam.offset
        if cam.units == "kelvin":
            values -= _K0
    return values


def _rad_to_celsius(raw: RawFrame, meta: SurveyMeta,
                    warnings: list[str]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Stored values to °C (scale/offset for integer images, then units) and the masked pixels.

    Returns the float32 frame in °C (NaN on non-finite and implausible pixels), the non-finite
    pixels and the implausible ones: finite pixels outside :data:`SURFACE_C`, masked (as dead)
    when they are at most :data:`IMPLAUSIBLE_SHARE` of the finite pixels; more is a
    CalibrationError naming the units, scale and offset to check. Converted one block of rows at
    a time in float64 and checked before rounding to float32 (micro-kelvin steps).
    """
    cam = meta.camera
    data = np.asarray(raw.data)
    name = raw.path
    if data.ndim != 2 or data.size == 0:
        raise InputError(f"{name}: image of shape {data.shape} is not a non-empty 2-D matrix")
    if data.dtype.kind not in "iubf":
        raise InputError(f"{name}: pixel type {data.dtype} is not a number")
    scaled = data.dtype.kind in "iub"
    if not scaled and (cam.scale != 1.0 or cam.offset != 0.0):
        warnings.append(f"[camera] scale/offset apply to integer images only; {name} stores floats, taken as {cam.units}")
    lo, hi = SURFACE_C
    celsius = np.empty(data.shape, np.float32)
    nonfinite = np.empty(data.shape, bool)
    implausible = np.empty(data.shape, bool)
    for rows in _rad_blocks(data.shape[0]):
        values = _rad_values(data[rows], meta)
        finite = np.isfinite(values)
        with np.errstate(invalid="ignore"):
            implausible[rows] = finite & ~((values >= lo) & (values <= hi))
        nonfinite[rows] = ~finite
        values[~finite | implausible[rows]] = np.nan
        celsius[rows] = values
    n_finite = data.size - int(nonfinite.sum())
    if n_finite == 0:
        raise InputError(f"{name}: no finite pixel (all NaN or infinite); the export is empty or corrupt")
    n_bad = int(implausible.sum())
    if n_bad == 0:
        return celsius, nonfinite, implausible
    if n_bad > IMPLAUSIBLE_SHARE * n_finite:  # refused: the finite values in float64, as stored
        shown = _rad_values(data, meta)[~nonfinite]
        med = float(np.median(shown))
        p1, p99 = (float(v) for v in np.percentile(shown, [1.0, 99.0]))
        if cam.units == "celsius" and lo <= med - _K0 <= hi:
            hint = 'the values look like kelvin: set [camera] units = "kelvin"'
        elif cam.units == "kelvin" and lo <= med + _K0 <= hi:
            hint = 'the values look like celsius: set [camera] units = "celsius"'
        elif scaled:
            hint = "check [camera] scale and offset (value = raw * scale + offset) for this camera's raw values"
        else:
            hint = "check [camera] units and that the file holds temperatures (not radiance or raw counts)"
        raise CalibrationError(
            f"{name}: {_rad_share(n_bad, n_finite)} of the valid pixels read outside the plausible "
            f"{lo:g}…{hi:g} °C ({SURFACE_REASON}): median {med:.6g} °C, 1st-99th percentile "
            f"{p1:.6g}…{p99:.6g} °C with {_rad_encoding(meta, scaled)}; these cannot be surface "
            f"temperatures; {hint}"
        )
    bad = _rad_values(data[implausible], meta)
    med = float(np.median(celsius[~(nonfinite | implausible)]))  # of the plausible pixels (99 % or more)
    worst = float(bad[np.argmax(np.abs(bad - med))])
    warnings.append(
        f"{n_bad} pixel(s) read outside the plausible {lo:g}…{hi:g} °C (as far as {worst:.6g} °C) with "
        f"{_rad_encoding(meta, scaled)} and were masked as implausible; a hot or cold object in the frame "
        "(lamp, flue outlet) does this, otherwise check the units and the export"
    )
    return celsius, nonfinite, implausible


def _rad_check_band(raw: RawFrame, meta: SurveyMeta) -> tuple[float, float]:
    """``[camera] band_um`` as a pair inside the thermal infrared, or a CalibrationError naming it."""
    band = meta.camera.band_um
    lo_um, hi_um = BAND_LIMITS_UM
    try:
        lo, hi = (float(b) for b in band)
    except (TypeError, ValueError):
        lo = hi = float("nan")
    if not lo_um <= lo < hi <= hi_um:  # False for NaN too
        raise CalibrationError(
            f"{raw.path}: [camera] band_um = {band!r:.60} is not a camera band within the thermal infrared "
            f"({lo_um:g}-{hi_um:g} µm), so no temperature can be computed; give the camera's spectral band in "
            "micrometres, e.g. band_um = [7.5, 14.0]"
        )
    return lo, hi


def _rad_check_result(
    raw: RawFrame, meta: SurveyMeta, obj: np.ndarray, mask: np.ndarray, reflected: float, warnings: list[str]
) -> np.ndarray:
    """Corrected temperatures outside :data:`SURFACE_C`: masked when few, a CalibrationError when many."""
    surf, cam = meta.surface, meta.camera
    lo, hi = SURFACE_C
    valid = ~mask & np.isfinite(obj)
    with np.errstate(invalid="ignore"):
        bad = valid & ~((obj >= lo) & (obj <= hi))
    n_bad, n_valid = int(bad.sum()), int(valid.sum())
    if n_bad == 0:
        return bad
    settings = f"[surface] emissivity = {surf.emissivity:g}, reflected_c = {reflected:g} °C"
    if cam.export_emissivity < 1.0:
        settings += f", [camera] export_emissivity = {cam.export_emissivity:g}"
    if n_bad > IMPLAUSIBLE_SHARE * n_valid:
        med = float(np.median(obj[valid]))
        raise CalibrationError(
            f"{raw.path}: after the emissivity correction {_rad_share(n_bad, n_valid)} of the valid pixels lie "
            f"outside the plausible {lo:g}…{hi:g} °C (median {med:.6g} °C) with {settings}; check these values: "
            "a low emissivity or a reflected temperature far from the readings magnifies every difference"
        )
    warnings.append(
        f"{n_bad} pixel(s) lie outside the plausible {lo:g}…{hi:g} °C after the emissivity correction "
        f"({settings}) and were masked as implausible"
    )
    return bad


def _rad_air_warning(meta: SurveyMeta, obj: np.ndarray, mask: np.ndarray, reflected: float) -> str | None:
    """A warning when the median surface temperature lies far outside the air and reflected temperatures."""
    air = meta.air
    known = [t for t in (air.inside_c, air.outside_c) if t is not None]
    if not known or mask.all():
        return None
    lo, hi = min(*known, reflected), max(*known, reflected)
    med = float(np.median(obj[~mask], overwrite_input=True))  # a copy: partitioned in place
    if lo - AIR_MARGIN_K <= med <= hi + AIR_MARGIN_K:
        return None
    given = ", ".join(f"{k} {t:g} °C" for k, t in (("inside", air.inside_c), ("outside", air.outside_c))
                      if t is not None)
    return (
        f"the median surface temperature {med:.1f} °C lies more than {AIR_MARGIN_K:g} K outside the air and "
        f"reflected temperatures ({given}, reflected {reflected:g} °C): check [camera] units, scale and offset "
        "and the [air] temperatures; a sunlit or heated surface also does this"
    )


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

    Steps: ``[camera] band_um`` checked (within 2–20 µm); integer images
    ``value = raw * scale + offset``; ``units`` kelvin → °C; non-finite pixels masked;
    a plausibility check against the surface temperatures a building survey can see
    (−100…150 °C, :data:`irseg.metadata._bounds.SURFACE_C`): when more than 1 % of the
    finite pixels lie outside, the image is refused naming the units, scale and offset to
    check, otherwise those pixels are masked (counted as dead) with a warning; if the
    export already applied an emissivity (``camera.export_emissivity < 1``) it is undone
    to apparent temperature; isolated dead/hot pixels masked (:func:`mask_dead_pixels`);
    emissivity, reflected temperature and transmittance corrected with band radiance; the
    same plausibility check on the corrected temperatures (naming the emissivity and
    reflected temperature); a warning when the median surface temperature lies more than
    20 K outside the air and reflected temperatures; masked pixels filled with a local
    median.

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
        ``temperature_c`` float32 (finite everywhere; micro-kelvin steps), ``mask``,
        ``n_dead``, ``n_nan`` and ``warnings``. The per-pixel radiances are computed in
        float64, one block of rows at a time, so the working memory stays a few bytes per
        pixel above the image.

    Raises
    ------
    InputError
        Not a 2-D numeric image, or no finite pixel.
    CalibrationError
        More than 1 % of the pixels implausible for the units/scale given (with a hint), or
        after the correction with the emissivity and reflected temperature given; a band
        outside the thermal infrared (naming ``[camera] band_um``); an export emissivity
        without the reflected temperature it used.
    ConfigError
        Unknown ``method``; a map whose shape is not the image's, an emissivity map value
        outside (0, 1].
    """
    method = _rad_check_method(method)
    warnings: list[str] = []
    cam, surf = meta.camera, meta.surface
    band = _rad_check_band(raw, meta)
    apparent, nan_mask, implausible = _rad_to_celsius(raw, meta, warnings)
    n_nan = int(nan_mask.sum())
    del nan_mask
    if cam.export_emissivity < 1.0:
        if cam.export_reflected_c is None:
            raise CalibrationError(
                f"{raw.path}: [camera] export_emissivity = {cam.export_emissivity:g} needs export_reflected_c, "
                "the reflected temperature the export applied; add it, or set export_emissivity = 1.0 "
                "for apparent-temperature exports"
            )
        for rows in _rad_blocks(apparent.shape[0]):
            apparent[rows] = object_to_apparent(
                apparent[rows].astype(np.float64), emissivity=cam.export_emissivity,
                reflected_c=cam.export_reflected_c, band_um=band, method=method,
            )
    invalid = ~np.isfinite(apparent)
    dead = mask_dead_pixels(apparent, invalid=invalid, floor_k=max(_DEAD_FLOOR_K, 20.0 * cam.netd_k))
    n_dead = int(dead.sum()) + int(implausible.sum())
    del implausible

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
    mask = np.logical_or(invalid, dead, out=invalid)
    del dead
    obj = np.empty(apparent.shape, np.float32)
    for rows in _rad_blocks(apparent.shape[0]):  # float64 radiances of one block at a time
        work = apparent[rows].astype(np.float64)
        work[mask[rows]] = np.nan
        obj[rows] = apparent_to_object(
            work, emissivity=_rad_rows(emissivity, rows), reflected_c=_rad_rows(reflected_in, rows),
            transmittance=cam.transmittance, atmosphere_c=atmosphere, band_um=band, method=method,
        )
    del apparent, work
    unphysical = ~mask & ~np.isfinite(obj)
    if unphysical.any():
        warnings.append(
            f"{int(unphysical.sum())} pixel(s) read colder than the reflected surroundings allow "
            f"(emissivity {surf.emissivity:g}, reflected {reflected:g} °C) and were masked; check both values"
        )
        mask = mask | unphysical
    del unphysical
    if mask.all():
        raise CalibrationError(
            f"{raw.path}: no pixel gives a physical surface temperature with emissivity {surf.emissivity:g} "
            f"and reflected temperature {reflected:g} °C; check [surface] emissivity and reflected_c"
        )
    mask = mask | _rad_check_result(raw, meta, obj, mask, reflected, warnings)
    air_warning = _rad_air_warning(meta, obj, mask, reflected)
    if air_warning is not None:
        warnings.append(air_warning)
    return ThermalFrame(
        path=raw.path,
        temperature_c=fill_masked(obj, mask),
        mask=mask,
        n_dead=n_dead,
        n_nan=n_nan,
        warnings=tuple(warnings),
    )


def _rad_rows(value, rows: slice):
    """A scalar setting as it is, a per-pixel map's rows ``rows``."""
    return value if np.ndim(value) == 0 else value[rows]
