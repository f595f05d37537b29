"""Band radiance and the measurement equation, both directions (apparent <-> object temperature)."""

from __future__ import annotations

import numpy as np

from .._shared import check_emissivity
from ..errors import ConfigError
from ._planck import (
    _K0,
    _rad_check_band,
    _rad_check_method,
    _rad_forward_k,
    _rad_inverse_k,
)

__all__ = ["band_radiance", "band_temperature", "apparent_to_object", "object_to_apparent"]


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


def _rad_check_params(emissivity, transmittance: float) -> None:
    if np.ndim(emissivity) == 0:
        check_emissivity(emissivity, name="emissivity")
    else:  # a per-pixel map (material zones): every value in (0, 1]
        e = np.asarray(emissivity, dtype=np.float64)
        bad = ~(np.isfinite(e) & (e > 0.0) & (e <= 1.0))
        if bad.any():
            raise ConfigError(
                f"emissivity map holds {float(e[bad].flat[0])!r} outside (0, 1]; use the materials' long-wave emissivities"
            )
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
    emissivity : float or ndarray
        Band emissivity of the surface, (0, 1]; an array broadcast against ``object_c``
        gives each pixel its own (material zones).
    reflected_c : float or ndarray
        Reflected apparent temperature, °C (an array: per pixel).
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
