"""Camera model: what a radiometric camera records of a simulated surface.

Steps, in the order light takes them:

1. geometry: pixel centres on the surface from the field of view and distance,
   pixel footprint ``p = 2·d·tan(HFOV/2)/N`` (pinhole camera; FOV as defined in
   OIML R 141:2008), rows stretched by 1/cos(tilt) for an oblique view;
2. band radiance leaving the surface, ``ε·L_b(T_s) + (1 − ε)·L_b(T_refl)`` with the
   local radiant temperature of the surroundings (opaque grey surface, Kirchhoff's
   law, τ = 1), integrated over each pixel (supersampling);
3. optics blur: a Gaussian point-spread function in radiance;
4. lens shading: towards the corners part of the signal comes from the housing;
5. conversion to the apparent (ε = 1) temperature, then NETD noise, a fixed
   column pattern and optional dead pixels.

The radiance conversions are ``irseg.radiometry``'s band-limited Planck integrals.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage

from irseg._shared import KELVIN_AT_0C
from irseg.errors import ConfigError
from irseg.radiometry import band_radiance, band_temperature

__all__ = ["CameraModel", "Shot", "shoot", "pixel_footprint_m", "view_window"]


@dataclass(frozen=True)
class CameraModel:
    """A thermal camera and where it stands.

    Attributes
    ----------
    n_rows, n_cols : int
        Detector size (M rows, N columns).
    hfov_deg : float
        Horizontal field of view, degrees.
    distance_m : float
        Camera to surface along the line of sight, m.
    tilt_deg : float
        Angle between line of sight and surface normal (foreshortens rows), degrees.
    centre_m : (float, float) or None
        Surface point (x, y) on the image centre, m (None: the element's centre).
    psf_sigma_px : float
        Gaussian blur of the optics, pixels.
    netd_k : float
        Temporal noise, K (one standard deviation).
    column_sigma_k : float
        Fixed-pattern column offsets, K (one standard deviation).
    shading : float
        Fraction of the signal replaced by housing radiance at the image corners.
    housing_c : float or None
        Housing (camera interior) temperature, °C (None: the mean radiant temperature).
    dead_pixels : int
        Number of isolated stuck pixels (hot or cold by 15-40 K).
    band_um : (float, float)
        Spectral band, µm.
    supersample : int
        Sub-samples per pixel side for pixel integration.
    seed : int
        Seed of the noise, column pattern and dead pixels.
    """

    n_rows: int = 240
    n_cols: int = 320
    hfov_deg: float = 45.0
    distance_m: float = 3.0
    tilt_deg: float = 0.0
    centre_m: tuple[float, float] | None = None
    psf_sigma_px: float = 0.8
    netd_k: float = 0.05
    column_sigma_k: float = 0.02
    shading: float = 0.01
    housing_c: float | None = None
    dead_pixels: int = 0
    band_um: tuple[float, float] = (7.5, 14.0)
    supersample: int = 3
    seed: int = 0


@dataclass(frozen=True)
class Shot:
    """One simulated thermogram and its truth on the camera grid.

    Attributes
    ----------
    apparent_c : (M, N) ndarray
        Apparent temperature an ε = 1 camera stores, °C (noise, pattern, dead pixels).
    object_c, baseline_c : (M, N) ndarray
        Noise-free surface temperature with and without the defects, pixel means, °C.
    defect_masks : (k, M, N) bool ndarray
        Pixels at least half covered by each defect's region.
    dead : (M, N) bool ndarray
    pixel_m : float
        Pixel footprint across a row, m (rows are ``pixel_m/cos(tilt)`` tall).
    reflected_c : float
        Mean radiant temperature of the surroundings (the metadata's reflected temperature).
    shading_k : (M, N) ndarray or None
        What the lens shading adds to the apparent temperature of the no-defect surface, K
        (noise-free; None without shading): the sound surface as this camera records it is
        ``baseline_c`` plus this over the emissivity.
    area_map : (M, N) ndarray or None
        Surface area per m² of the scene's grid under each pixel where the scene varies it (a corner
        in perspective: ``Scene.area_map``), None otherwise.
    """

    apparent_c: np.ndarray
    object_c: np.ndarray
    baseline_c: np.ndarray
    defect_masks: np.ndarray
    dead: np.ndarray
    pixel_m: float
    reflected_c: float
    camera: CameraModel
    shading_k: np.ndarray | None = None
    area_map: np.ndarray | None = None


# The camera is the truth side of the validation: it keeps its own pixel-footprint formula on purpose
# instead of calling irseg.analysis.pixel_size_m, so a slip in the analysis' geometry shows up as an
# area error in benchmarks/validate_scenes.py instead of cancelling out (and the bundled samples
# do not move when the analysis changes).
def pixel_footprint_m(*, hfov_deg: float, distance_m: float, n_cols: int) -> float:
    """``2·d·tan(HFOV/2)/N``: one pixel's width on a surface normal to the view, m."""
    return 2.0 * distance_m * float(np.tan(np.radians(hfov_deg) / 2.0)) / n_cols


def _pixel_pitch_m(camera: CameraModel) -> tuple[float, float]:
    """Pixel pitch on the surface across a row and down a column (stretched by 1/cos tilt), m."""
    p = pixel_footprint_m(hfov_deg=camera.hfov_deg, distance_m=camera.distance_m, n_cols=camera.n_cols)
    return p, p / float(np.cos(np.radians(camera.tilt_deg)))


def view_window(element, camera: CameraModel) -> tuple[float, float, float, float]:
    """Surface rectangle (x0, x1, y0, y1) in m that the camera sees.

    Raises
    ------
    ConfigError
        When the view does not fit on the element.
    """
    p, py = _pixel_pitch_m(camera)
    cx, cy = (element.width_m / 2, element.height_m / 2) if camera.centre_m is None else camera.centre_m
    w, h = camera.n_cols * p, camera.n_rows * py
    if (cx - w / 2 < -1e-9 or cx + w / 2 > element.width_m + 1e-9
            or cy - h / 2 < -1e-9 or cy + h / 2 > element.height_m + 1e-9):
        raise ConfigError(
            f"camera view {w:.2f} x {h:.2f} m around ({cx:.2f}, {cy:.2f}) m leaves the "
            f"{element.width_m:.2f} x {element.height_m:.2f} m element; move closer or narrow hfov_deg"
        )
    return cx - w / 2, cx + w / 2, cy - h / 2, cy + h / 2


def _sample_coords(scene, cam: CameraModel) -> tuple[np.ndarray, np.ndarray, float]:
    p, py = _pixel_pitch_m(cam)
    x0, x1, y0, y1 = view_window(scene.element, cam)
    cx, cy = 0.5 * (x0 + x1), 0.5 * (y0 + y1)
    s = cam.supersample
    sub = (np.arange(s) + 0.5) / s - 0.5
    xs = cx + ((np.arange(cam.n_cols) - (cam.n_cols - 1) / 2)[:, None] + sub[None, :]).ravel() * p
    ys = cy + ((np.arange(cam.n_rows) - (cam.n_rows - 1) / 2)[:, None] + sub[None, :]).ravel() * py
    return ys, xs, p


def _at_samples(field: np.ndarray, ys: np.ndarray, xs: np.ndarray, cell: float, order: int) -> np.ndarray:
    """A cell-centred field sampled at the sub-sample points (ys × xs in m), same units as ``field``."""
    rr = np.broadcast_to((ys / cell - 0.5)[:, None], (ys.size, xs.size))
    cc = np.broadcast_to((xs / cell - 0.5)[None, :], (ys.size, xs.size))
    return ndimage.map_coordinates(field.astype(float), [rr, cc], order=order, mode="nearest")


def _pixel_mean(v: np.ndarray, s: int) -> np.ndarray:
    """Average the s×s sub-samples of every pixel."""
    m, n = v.shape[0] // s, v.shape[1] // s
    return v.reshape(m, s, n, s).mean(axis=(1, 3))


def _resample(field: np.ndarray, ys: np.ndarray, xs: np.ndarray, cell: float, order: int, s: int) -> np.ndarray:
    """Sample a cell-centred field at (ys × xs) and average s×s sub-samples per pixel."""
    return _pixel_mean(_at_samples(field, ys, xs, cell, order), s)


def shoot(scene, camera: CameraModel) -> Shot:
    """Image a :class:`~irseg.scenes.Scene` with a camera.

    Parameters
    ----------
    scene : Scene
    camera : CameraModel

    Returns
    -------
    Shot

    Raises
    ------
    ConfigError
        When the view does not fit on the element.
    """
    ys, xs, p = _sample_coords(scene, camera)
    cell, s = scene.cell_m, camera.supersample
    eps = scene.conditions.emissivity
    if getattr(scene, "emissivity_map", None) is not None:  # glass: its own emissivity per cell
        eps = _at_samples(scene.emissivity_map, ys, xs, cell, 0)
    band = camera.band_um

    # radiance leaving the surface at every sub-sample, then integrated over the pixel
    ts = _at_samples(scene.surface_c, ys, xs, cell, 1)
    tr = _at_samples(scene.radiant_c, ys, xs, cell, 1)
    ts_kelvin, tr_kelvin = ts + KELVIN_AT_0C, tr + KELVIN_AT_0C
    lum = eps * band_radiance(ts_kelvin, band_um=band) + (1 - eps) * band_radiance(tr_kelvin, band_um=band)
    lum = _pixel_mean(lum, s)
    if camera.psf_sigma_px > 0:
        lum = ndimage.gaussian_filter(lum, camera.psf_sigma_px, mode="nearest")
    m, n = lum.shape
    reflected = float(scene.radiant_c.mean())
    shading_k = None
    if camera.shading > 0:
        yy = (np.arange(m) - (m - 1) / 2) / ((m - 1) / 2)
        xx = (np.arange(n) - (n - 1) / 2) / ((n - 1) / 2)
        r2 = (yy[:, None] ** 2 + xx[None, :] ** 2) / 2.0
        housing = reflected if camera.housing_c is None else camera.housing_c
        housing_radiance = band_radiance(housing + KELVIN_AT_0C, band_um=band)
        lum = (1 - camera.shading * r2) * lum + camera.shading * r2 * housing_radiance
        # the same optics on the no-defect surface, with and without the shading
        tb = _at_samples(scene.baseline_c, ys, xs, cell, 1) + KELVIN_AT_0C
        lb = _pixel_mean(eps * band_radiance(tb, band_um=band) + (1 - eps) * band_radiance(tr_kelvin, band_um=band), s)
        if camera.psf_sigma_px > 0:
            lb = ndimage.gaussian_filter(lb, camera.psf_sigma_px, mode="nearest")
        shaded = (1 - camera.shading * r2) * lb + camera.shading * r2 * housing_radiance
        shading_k = band_temperature(shaded, band_um=band) - band_temperature(lb, band_um=band)
    apparent = band_temperature(lum, band_um=band) - KELVIN_AT_0C
    rng = np.random.default_rng(camera.seed)
    apparent = apparent + rng.normal(0.0, camera.column_sigma_k, n)[None, :] + rng.normal(0.0, camera.netd_k, (m, n))
    dead = np.zeros((m, n), bool)
    if camera.dead_pixels:
        idx = rng.choice(m * n, size=camera.dead_pixels, replace=False)
        dead.flat[idx] = True
        jump = rng.uniform(15.0, 40.0, camera.dead_pixels) * rng.choice([-1.0, 1.0], camera.dead_pixels)
        apparent.flat[idx] += jump
    obj = _pixel_mean(ts, s)
    base = _resample(scene.baseline_c, ys, xs, cell, 1, s)
    masks = np.stack([_resample(f, ys, xs, cell, 0, s) >= 0.5 for f in scene.defect_masks])
    area = None if getattr(scene, "area_map", None) is None else _resample(scene.area_map, ys, xs, cell, 1, s)
    return Shot(apparent, obj, base, masks, dead, p, reflected, camera, shading_k, area)
