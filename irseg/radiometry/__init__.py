"""Radiometric correction: band-limited Planck radiance, emissivity and reflected temperature.

Measurement equation for an opaque grey surface seen through a path of transmittance τ
(ε emissivity, T_refl reflected apparent temperature, T_atm path air temperature)::

    L_b(T_app) = τ ε L_b(T_obj) + τ (1 − ε) L_b(T_refl) + (1 − τ) L_b(T_atm)

``L_b`` is the blackbody radiance integrated over the camera band (``band_um``), computed
from Planck's law with CODATA constants (``scipy.constants``) by Gauss–Legendre quadrature
on a fine temperature table (150–700 K, 0.05 K steps) that is interpolated in
log-radiance; out-of-table temperatures are integrated directly (``_planck.py``). The broadband
Stefan–Boltzmann form (``method="broadband"``) replaces ``L_b`` with σT⁴/π, for comparison.

See ``docs/radiometry.md`` for the assumptions (apparent temperature export, defaults).
"""

from ._calibrate import calibrate
from ._dead_pixels import fill_masked, mask_dead_pixels
from ._planck import METHODS
from ._radiance import apparent_to_object, band_radiance, band_temperature, object_to_apparent

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
