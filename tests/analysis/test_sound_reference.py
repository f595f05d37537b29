"""The sound surface under soft defects and the reference of a ring running into lens shading.

Check values and their sources:
- [C] the sound surface of each frame is known by construction: a plane plus a radial lens shading
  ``1.2·r²`` (``r²`` = (x² + y²)/2 in normalised frame coordinates, so 1.2 K from the centre to a
  corner), the form of the camera model's shading (part of the signal from the housing toward the
  corners); every defect is a contrast field added to it, so the true reference of any pixel is that
  surface there;
- [C] excess heat = h·Σ(T_sound − T)·A_px, the linearised surface heat balance q = h·ΔT summed over the
  pixels the defect changes (ISO 6946:2017 surface coefficients; h is the analysis' own coefficient,
  so only the reference and the region summed over are checked);
- [CP] tolerances: a surface within 0.005 K of the truth under a fill is a fortieth of the weaker
  fill's 0.2 K contrast (the white noise of the frame, 0.05 K per pixel, averages to about 0.0004 K
  over a fill's 30 000 pixels); a reference within 0.05 K and an excess within 3 % are a tenth of the
  validation targets (0.3 K, 15 %, issue 11).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import ndimage
from tests.support.fakes import make_frame, make_meta, make_seg

from irseg.analysis import analyse
from irseg.analysis._significance import detect_regions
from irseg.analysis._sound_surface import fit_sound_surface


def _shaded(m: int, n: int, *, tilt_k: float) -> np.ndarray:
    """20 °C, a vertical gradient of ``tilt_k`` top to bottom and 1.2 K of radial lens shading [C]."""
    yy, xx = np.mgrid[:m, :n].astype(float)
    y = (yy - (m - 1) / 2) / ((m - 1) / 2)
    x = (xx - (n - 1) / 2) / ((n - 1) / 2)
    return 20.0 + 0.5 * tilt_k * y + 1.2 * (x**2 + y**2) / 2


@pytest.mark.parametrize("seed", [100, 101])
def test_soft_fills_in_opposite_quarters_leave_the_sound_surface_where_it_was(seed):
    # a ceiling 2 m across (240 × 320 px): two fills left at part of their depth, −0.3 K and −0.2 K,
    # their edges softened by lateral conduction (Gaussian, σ 0.05 m: a tail reaching 0.15 m out),
    # in opposite quarters of the frame, under 1.2 K of lens shading
    m, n = 240, 320
    pixel_m = 2.0 / n
    sound = _shaded(m, n, tilt_k=0.6)
    fills = []
    for box, delta in (((30, 110, 40, 112), -0.3), ((130, 210, 210, 282), -0.2)):
        f = np.zeros((m, n))
        f[box[0]:box[1], box[2]:box[3]] = delta
        fills.append(ndimage.gaussian_filter(f, 0.05 / pixel_m, mode="constant"))
    t = sound + fills[0] + fills[1] + np.random.default_rng(seed).normal(0.0, 0.05, (m, n))
    fit = fit_sound_surface(t, length_px=0.2 / pixel_m, noise_k=0.05, edge_length_px=0.2 / pixel_m)
    for f in fills:
        core = f < 0.5 * f.min()  # where the fill holds half its contrast
        # the tails would tilt the surface into both fills (0.008–0.009 K before they were held out)
        assert abs(float((fit.surface - sound)[core].mean())) < 0.005  # [C] truth, [CP] tolerance


@pytest.mark.parametrize("seed", [300, 301])
def test_ring_running_into_the_shaded_corners_is_referenced_on_the_sound_surface(seed):
    # a wall 3 m across (240 × 320 px) with a damp zone along its base, 2 K colder, not reaching the
    # sides: the ring around it runs down into the bottom corners, where the lens shading makes the
    # sound wall 0.5–0.6 K warmer than below the middle of the zone; a plane through the ring cannot
    # follow that curve (it put the reference 0.26 K too warm and the excess 15 % too high)
    m, n = 240, 320
    pixel_m = 3.0 / n
    sound = _shaded(m, n, tilt_k=-1.0)
    zone = np.zeros((m, n), bool)
    zone[170:, 60:260] = True
    contrast = ndimage.gaussian_filter(np.where(zone, -2.0, 0.0), 1.5)
    u = sound + contrast
    t = u + np.random.default_rng(seed).normal(0.0, 0.05, (m, n))
    res = analyse(make_frame(t), make_seg((contrast < -1.0).astype(int), u=u), make_meta(camera={"pixel_m": pixel_m}))
    (a,) = res.anomalies
    mine = np.asarray(res.labels) == a.anomaly
    assert a.reference_c == pytest.approx(float(sound[mine].mean()), abs=0.05)  # [C] truth, [CP] tolerance
    total_w = res.h_w_m2k * float(-contrast.sum()) * pixel_m**2  # [C] h·Σ(T_sound − T)·A_px
    assert a.excess_w == pytest.approx(total_w, rel=0.03)  # [CP]


@pytest.mark.parametrize("seed", [1, 2])
def test_diffuse_halo_running_to_the_frame_edges_stays_out_of_the_sound_surface(seed):
    # a wall 2.15 m across (240 × 320 px), cold air falling from a gap: a core 0.4 m wide, 0.9 K colder,
    # its right side 0.3 m from the frame's right edge, and a halo of the air spreading below and beside
    # it (lateral mixing, Gaussian σ 0.15–0.3 m) that runs out of the frame at its bottom and right edges.
    # The detector's second sound surface leaves the significant area out; the halo beside it must still
    # be held out of the fit as its tail, and an edge decay the held-out blocks leave unconfirmed is
    # switched off (without either the surface sat 0.19 K into the core)
    m, n = 240, 320
    pixel_m = 2.15 / n
    sound = _shaded(m, n, tilt_k=0.3)
    yy, xx = np.mgrid[:m, :n].astype(float)
    c1 = int(n - 1 - 0.3 / pixel_m)
    c0 = int(c1 - 0.4 / pixel_m)
    core = np.zeros((m, n))
    core[70:160, c0:c1] = -0.9
    halo = ndimage.gaussian_filter(np.where((yy >= 70) & (xx >= c0) & (xx < c1), -0.5, 0.0), 0.3 / pixel_m,
                                   mode="nearest")
    halo += ndimage.gaussian_filter(np.where((yy > 70) & (xx > c0 - 30), -0.2, 0.0), 0.15 / pixel_m, mode="nearest")
    contrast = ndimage.gaussian_filter(core, 0.04 / pixel_m) + halo
    t = sound + contrast + np.random.default_rng(seed).normal(0.0, 0.05, (m, n))
    _, surface, _ = detect_regions(t, None, noise_k=0.05, pixel_m=pixel_m)
    half = contrast < 0.5 * contrast.min()  # the half-peak extent: where the cold air holds half its contrast
    # [C] truth; [CP] tolerance: a ninth of the 1.33 K peak (measured 0.14 K with both seeds; the halo at the frame
    # edge cannot be told from the sound wall, so part of it may stay in the surface)
    assert abs(float((surface - sound)[half].mean())) < 0.15
