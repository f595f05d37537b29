"""Camera geometry: one pixel's side on the surface and the oblique-view area factor.

References
----------
OIML R 141:2008 (FOV, IFOV); the pixel side ``p = 2·d·tan(FOV/2)/N`` and the
oblique area factor ``1/cos θ`` follow from the pinhole model.
"""

from __future__ import annotations

import math

from ..errors import ConfigError

__all__ = ["pixel_size_m", "tilt_factor", "pixel_area_m2", "MIN_SPOT_PX"]

#: A reading needs at least 3×3 pixels (common practice).
MIN_SPOT_PX: int = 9


def pixel_size_m(
    *,
    n_cols: int,
    hfov_deg: float | None = None,
    distance_m: float | None = None,
    pixel_m: float | None = None,
) -> float | None:
    """Side of the surface patch one pixel sees, metres.

    Parameters
    ----------
    n_cols : int
        Image width N in pixels (the horizontal field of view spans N pixels).
    hfov_deg : float, optional
        Horizontal field of view, degrees, in (0, 180).
    distance_m : float, optional
        Camera-to-surface distance along the line of sight, metres.
    pixel_m : float, optional
        The pixel side given directly; takes precedence over hfov_deg + distance_m.

    Returns
    -------
    float or None
        ``pixel_m`` if given, else ``2·d·tan(FOV/2)/N``; None when neither is known.

    Raises
    ------
    ConfigError
        Non-positive or out-of-range values.
    """
    if pixel_m is not None:
        if not (float(pixel_m) > 0.0) or not math.isfinite(float(pixel_m)):
            raise ConfigError(f"[camera] pixel_m = {pixel_m!r} must be a positive length in metres")
        return float(pixel_m)
    if hfov_deg is None or distance_m is None:
        return None
    if not (0.0 < float(hfov_deg) < 180.0):
        raise ConfigError(f"[camera] hfov_deg = {hfov_deg!r} must be in (0, 180) degrees")
    if not (float(distance_m) > 0.0) or not math.isfinite(float(distance_m)):
        raise ConfigError(f"[camera] distance_m = {distance_m!r} must be a positive distance in metres")
    if int(n_cols) < 1:
        raise ConfigError(f"image has {n_cols} columns; need at least one")
    return 2.0 * float(distance_m) * math.tan(math.radians(float(hfov_deg)) / 2.0) / int(n_cols)


def tilt_factor(tilt_deg: float) -> float:
    """Oblique-view area factor ``1/cos θ`` (1.1547 at 30°, 2 at 60°).

    Raises
    ------
    ConfigError
        Tilt outside [0, 80] degrees (foreshortening beyond 80° is not measurable).
    """
    t = float(tilt_deg)
    if not (0.0 <= t <= 80.0):
        raise ConfigError(f"[camera] tilt_deg = {tilt_deg!r} is outside [0, 80] degrees")
    return 1.0 / math.cos(math.radians(t))


def pixel_area_m2(*, pixel_m: float | None, tilt_deg: float = 0.0) -> float | None:
    """Surface area seen by one pixel, ``p²/cos θ``, m² (None without the pixel side ``pixel_m``)."""
    if pixel_m is None:
        return None
    return pixel_m * pixel_m * tilt_factor(tilt_deg)
