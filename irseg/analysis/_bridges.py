"""Linear thermal bridges: length seen in the image and linear thermal transmittance ψ.

ISO 14683 and ISO 10211 define ψ (W/(m·K)) as the extra heat flow of a linear junction per
metre of its length and per kelvin of inside-outside difference, over what the adjoining
plane elements carry by their U-values. From a thermogram the extra heat flow is the excess
loss of the bridge's thermal footprint against the local sound surface, the same figure an
area anomaly gets (``h·Σ|T − T_ref|·A_px`` over its thermal region, :mod:`._measure`), so

    ψ = Q_extra / (L · (T_i − T_e)),

with ``L`` the length of the band seen in the image. A straight band (a slab edge, a lintel, a
header, a junction along the rows or columns) spreads its extra heat beyond its half-peak rim,
where the local sound surface follows it, so its extra heat is its whole cross-profile against
the plane wall on both sides, read position by position along it (:func:`straight_band_loss`).
Its 5-95 % band comes from the same
Monte Carlo draws as the heat band (:func:`._confidence.psi_band`). A framing summary adds
the members' lengths and heats, so its ψ is the length-weighted mean of its members'.

A *geometric* bridge (an external corner, a wall/floor or wall/ceiling junction) is recognised
by its cross-profile (:func:`geometric_profile`): a straight band across the whole frame whose
contrast peaks on its line and fades smoothly and evenly to both sides, still holding a share of
its peak at twice its half-peak distance (conduction round a corner spreads over a few wall
thicknesses), with no plateau and no edge (a member or a void has both). Its extra heat is that
profile integrated out to the plane elements on both sides, because the local sound surface
follows such a long tail; that is ψ against the plane elements, ISO 10211's definition [from
memory]. The two sides are read against their own planes (:func:`_side_loss`): a wall and a
ceiling meet at different temperatures, and down a wall the air's stratification makes a
gradient across a horizontal junction that a ceiling does not have. The two faces of a horizontal
junction seen obliquely from inside may also have different surface coefficients (a ceiling's for
upward heat flow, a wall's for horizontal): :func:`side_coefficients` gives them where the view's
declared heat flow makes it unambiguous, and :func:`geometric_profile` weights each side's loss by
its own. A camera looking into a corner sees both
faces foreshortened *across* the corner line, so the line itself keeps its length: the oblique
stretch of :func:`band_length_m` is not applied along it.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy import ndimage

from ._confidence import BandInputs, psi_band
from ._geometry import tilt_factor
from ._shape import Shape
from ._surface import h_convective_interior

__all__ = ["LINEAR_CAUSE", "band_length_m", "linear_figures", "GeometricProfile", "geometric_profile",
           "side_coefficients", "side_note", "GEOMETRIC_SPAN", "GEOMETRIC_REACH_M",
           "straight_band_loss", "STRAIGHT_REACH_M", "GEOMETRIC_SYMMETRY", "GEOMETRIC_SHOULDER", "GEOMETRIC_TAIL"]

#: The cause whose anomalies are measured per metre (linear thermal bridges and framing).
LINEAR_CAUSE = "thermal_bridge"


GEOMETRIC_SPAN = 0.9  # the band spans at least this share of the frame along its axis
GEOMETRIC_AXIS_DEG = 10.0  # ... and runs along the image's rows or columns within this
GEOMETRIC_REACH_M = 0.6  # the profile is read this far to each side (at least half of it inside the frame)
GEOMETRIC_SYMMETRY = 0.5  # the two sides' half-peak distances within this ratio
GEOMETRIC_SHOULDER = 0.9  # at half the half-peak distance at most this share of the peak (a member's plateau: ~1)
GEOMETRIC_TAIL = 0.15  # at twice the half-peak distance at least this share of the peak (a blurred edge: ~0)
_BUMP = 0.10  # outward from the peak the contrast never rises by more than this share of the peak
_FAR_PX = 3  # the far ends: mean of this many columns


@dataclass(frozen=True)
class GeometricProfile:
    """A geometric bridge's cross-profile: half-peak distances (m) and loss sum (K·px) to the plane wall.

    ``side_h_w_m2k``: the surface coefficients (above, below its line) its sides' losses were weighted
    by (:func:`side_coefficients`), None when read with the image's one coefficient.
    """

    half_m: tuple[float, float]
    peak_k: float
    loss_sum_kpx: float
    side_h_w_m2k: tuple[float, float] | None = None


def _side(p: np.ndarray, peak: float, noise: float) -> float | None:
    """Half-peak distance (px) along one side of a profile starting at its peak, None when it never falls
    to half, rises again (its 5-px running median by more than a tenth of the peak and three times the
    profile's noise: a camera's column pattern puts single columns off), keeps a plateau or has no tail."""
    below = np.flatnonzero(p <= 0.5 * peak)
    smooth = ndimage.median_filter(p, size=5, mode="nearest")
    if below.size == 0 or np.any(np.diff(smooth) > max(_BUMP * peak, 3.0 * noise)):
        return None
    h = int(below[0])
    if h < 2 or 2 * h >= p.size:
        return None
    if p[h // 2] > GEOMETRIC_SHOULDER * peak or p[2 * h] < GEOMETRIC_TAIL * peak:
        return None
    return float(h)


def _along_rows(temperature_c: np.ndarray, shape: Shape) -> tuple[np.ndarray, float] | None:
    """The frame oriented so that the band runs down its rows (a view, no copy), and the band's line.

    None when the band is oblique (more than :data:`GEOMETRIC_AXIS_DEG` off the image's axes).
    """
    o = shape.orientation_deg % 180.0
    if abs(o - 90.0) <= GEOMETRIC_AXIS_DEG:
        return np.asarray(temperature_c), shape.centroid_col
    if min(o, 180.0 - o) <= GEOMETRIC_AXIS_DEG:
        return np.asarray(temperature_c).T, shape.centroid_row
    return None


def geometric_profile(temperature_c: np.ndarray, shape: Shape, *, loss_sign: float, pixel_m: float | None,
                      side_h_w_m2k: tuple[float, float] | None = None,
                      h_w_m2k: float | None = None) -> GeometricProfile | None:
    """The cross-profile of a band if it is a geometric bridge (module docstring), else None.

    ``loss_sign`` is +1 when heat loss makes the surface colder (seen from inside), −1 from outside.
    The profile is the median over the band's middle 90 % of the temperatures at each distance from
    its line, its loss-signed contrast taken against the straight line between its far ends.
    With ``side_h_w_m2k`` (the surface coefficients above and below a horizontal line,
    :func:`side_coefficients`) and the image's ``h_w_m2k``, each side's loss is weighted by its own
    coefficient over the image's, so that ``h_w_m2k × loss_sum_kpx`` is the sum of each side's
    ``h × loss``; a vertical line is read with the image's coefficient.
    """
    oriented = None if pixel_m is None else _along_rows(temperature_c, shape)
    if oriented is None:
        return None
    arr, centre = oriented
    n_along, n_across = arr.shape
    if shape.length_px < GEOMETRIC_SPAN * n_along:
        return None
    c0 = int(round(centre))
    reach = int(round(GEOMETRIC_REACH_M / pixel_m))
    reach = min(reach, c0, n_across - 1 - c0)
    if reach * pixel_m < 0.5 * GEOMETRIC_REACH_M:
        return None
    cut = int(0.05 * n_along)
    block = np.asarray(arr[cut:n_along - cut, c0 - reach:c0 + reach + 1], float)
    if not np.all(np.isfinite(block)):
        block = np.where(np.isfinite(block), block, np.nanmedian(block))
    prof = np.median(block, axis=0)
    # column-to-column noise of the profile (a camera's fixed column pattern survives the median)
    noise = 1.4826 * float(np.median(np.abs(np.diff(prof) - np.median(np.diff(prof))))) / math.sqrt(2.0)
    far_l, far_r = prof[:_FAR_PX].mean(), prof[-_FAR_PX:].mean()
    base = np.linspace(far_l, far_r, prof.size)
    p = loss_sign * (base - prof)
    k = int(np.argmax(p))
    peak = float(p[k])
    if peak <= 0 or abs(k - reach) > max(3.0, 0.5 * shape.width_px):
        return None
    right, left = _side(p[k:], peak, noise), _side(p[k::-1], peak, noise)
    if right is None or left is None or min(left, right) < GEOMETRIC_SYMMETRY * max(left, right):
        return None
    side = _side_loss(-loss_sign * prof, k)
    loss, used = float(side.sum()), None
    if side_h_w_m2k is not None and h_w_m2k is not None and h_w_m2k > 0 and _horizontal(shape):
        used = (float(side_h_w_m2k[0]), float(side_h_w_m2k[1]))
        w_above, w_below = used[0] / h_w_m2k, used[1] / h_w_m2k  # rows before the line: above it
        loss = w_above * float(side[:k].sum()) + w_below * float(side[k + 1:].sum()) + 0.5 * (w_above + w_below) * side[k]
    return GeometricProfile((left * pixel_m, right * pixel_m), peak, float(loss) * min(shape.length_px, n_along), used)


def side_note(profile: GeometricProfile | None) -> str:
    """The reason's words for a geometric bridge read with a coefficient per face ("" when it was not)."""
    if profile is None or profile.side_h_w_m2k is None:
        return ""
    a, b = profile.side_h_w_m2k
    return (f"its two faces read with their own surface coefficients, {a:.1f} W/m²K above the line and {b:.1f} "
            f"below (R_si {1 / a:.2f} and {1 / b:.2f} m²K/W: by the view's declared heat flow a ceiling above a "
            "wall or a wall above a floor)")


def _horizontal(shape: Shape) -> bool:
    """The band runs along the image's rows within :data:`GEOMETRIC_AXIS_DEG`."""
    o = shape.orientation_deg % 180.0
    return min(o, 180.0 - o) <= GEOMETRIC_AXIS_DEG


def side_coefficients(*, view: str, heat_flow: str | None, tilt_deg: float,
                      h_radiative_w_m2k: float) -> tuple[float, float] | None:
    """Interior surface coefficients ``(above, below)`` of the two faces of a horizontal geometric bridge, W/m²K.

    Seen obliquely from inside (``tilt_deg`` > 0), a horizontal junction line across the frame is
    where a wall meets a ceiling or a floor, and an upright camera (the image's rows horizontal on
    the surface, as the oblique stretch of :func:`band_length_m` assumes) sees a ceiling above the
    wall it meets and a floor below it. ``tilt_deg`` has no sign (the angle to the surface's
    normal), so it cannot tell looking up from looking down: the sidecar's declared heat flow of the
    view does. Declared ``"upward"`` (the view is of a ceiling): the face above the line is that
    ceiling (upward heat flow) and the face below a wall (horizontal). Declared ``"downward"`` (a
    floor): the face below is the floor (downward), the face above a wall. Otherwise (a wall
    declared, or nothing: horizontal) which face is the wall is unknown, and None (one coefficient
    for the image). Each side's coefficient is ``h_c + h_r`` with the convective part of the
    direction (:func:`._surface.h_convective_interior`) and the image's radiative part.
    """
    if view != "interior" or not tilt_deg > 0.0 or heat_flow not in ("upward", "downward"):
        return None
    flows = ("upward", "horizontal") if heat_flow == "upward" else ("horizontal", "downward")
    return tuple(h_convective_interior(f) + float(h_radiative_w_m2k) for f in flows)  # type: ignore[return-value]


def _side_loss(q: np.ndarray, k: int) -> np.ndarray:
    """Loss-signed contrast (K, ≥ 0) of a geometric bridge's profile ``q`` (larger = more loss, its line
    at index ``k``) against the plane element on each side.

    The two sides are different planes (a wall and a ceiling meet at different temperatures), each
    read on its own: a line fitted over the outer half of the side. A loss that *grows* outward
    cannot be the bridge's tail (conduction round a junction fades away from it), so such a slope is
    the plane's own gradient (stratification down a wall, the sky view of a facade) and the fitted
    line, carried in to the bridge's line, is that side's plane; otherwise the slope may be the tail,
    and the side's plane is the level at its far end (what is left of the tail beyond the read is
    not counted).
    """
    base = np.empty(q.size)
    at_line = []
    for idx in (np.arange(k, -1, -1), np.arange(k, q.size)):
        x = (idx - k).astype(float) * (1.0 if idx[-1] >= k else -1.0)
        outer = x >= 0.5 * x[-1]
        if idx.size >= 2 * _FAR_PX and outer.sum() >= _FAR_PX:
            slope, level = np.polyfit(x[outer], q[idx][outer], 1)
        else:
            slope, level = 0.0, 0.0
        base[idx] = level + slope * x if slope > 0 else q[idx][-_FAR_PX:].mean()
        at_line.append(base[k])
    base[k] = 0.5 * (at_line[0] + at_line[1])  # the line itself lies on both planes
    return np.clip(q - base, 0.0, None)


def band_length_m(members: Sequence[Sequence[Shape]], *, pixel_m: float, tilt_deg: float = 0.0,
                  across_tilt: bool = False) -> float:
    """Length of a band, or of the members of a set summed, on the surface, m.

    ``members`` holds the pieces of each member. A piece spans the long side of its
    minimum-area rectangle along the member's axis (the longest piece's orientation) about its
    centroid; a member's length is the union of its pieces' spans (overlapping pieces count
    once), in pixels, times the pixel side; along the image's rows (vertical) the oblique view
    stretches it by ``1/cos θ``, except along a geometric bridge's own line (``across_tilt``: the
    faces are foreshortened across it).
    """
    stretch = 1.0 if across_tilt else tilt_factor(tilt_deg)
    total = 0.0
    for pieces in members:
        if not pieces:
            continue
        axis = max(pieces, key=lambda s: s.length_px)
        th = math.radians(axis.orientation_deg)  # from the column axis: 0 = horizontal band
        cos_t, sin_t = math.cos(th), math.sin(th)
        spans = sorted((cos_t * s.centroid_col + sin_t * s.centroid_row - 0.5 * s.length_px,
                        cos_t * s.centroid_col + sin_t * s.centroid_row + 0.5 * s.length_px) for s in pieces)
        covered, end = 0.0, -math.inf
        for a, b in spans:
            if b > end:
                covered += b - max(a, end)
                end = b
        total += covered * pixel_m * math.hypot(cos_t, sin_t * stretch)
    return float(total)


def linear_figures(
    members: Sequence[Sequence[Shape]], *, cause: str, pixel_m: float | None, tilt_deg: float, excess_w: float | None,
    delta_air_k: float | None, bands: BandInputs, seed: int, anomaly_id: int, across_tilt: bool = False,
) -> tuple[float | None, float | None, float | None, float | None]:
    """``(length_m, psi_w_mk, psi_low_w_mk, psi_high_w_mk)`` of a linear thermal bridge.

    ``members`` holds the pieces of each member (:func:`band_length_m`). All None unless ``cause`` is :data:`LINEAR_CAUSE` and the pixel size is known; ψ and its band
    None without a heat figure or a positive inside-outside difference ``delta_air_k``.
    """
    if cause != LINEAR_CAUSE or pixel_m is None or not any(members):
        return None, None, None, None
    length = band_length_m(members, pixel_m=pixel_m, tilt_deg=tilt_deg, across_tilt=across_tilt)
    if excess_w is None or delta_air_k is None or delta_air_k <= 0 or length <= 0:
        return length, None, None, None
    psi = float(excess_w / (length * delta_air_k))
    lo, hi = psi_band(bands, seed=seed, anomaly_id=anomaly_id, psi_w_mk=psi, length_m=length,
                      delta_air_k=delta_air_k)
    return length, psi, lo, hi


STRAIGHT_REACH_M = 0.6  # a straight band's cross-profile is read at most this far to each side
STRAIGHT_CUT = 0.10  # ... unless the frame cuts the nearer side while it falls by more than this share of the peak over the band's half-width
_SMOOTH_PX = 5  # running median of the cross-profile when looking for where it meets the sound level


def _side_end(p: np.ndarray, start: int, noise: float, peak: float) -> int:
    """Index (from the peak, along ``p``) where one side of a loss profile meets the sound level.

    Beyond ``start``, the low point of the smoothed profile before it rises again by more than a
    tenth of the peak and three times the noise (the next feature begins); else the far end.
    """
    smooth = ndimage.median_filter(p, size=_SMOOTH_PX, mode="nearest")
    tol = max(_BUMP * peak, 3.0 * noise)
    low, end = math.inf, p.size - 1
    for i in range(start, p.size):
        if smooth[i] < low:
            low, end = smooth[i], i
        elif smooth[i] > low + tol:
            return end
    return p.size - 1


def straight_band_loss(temperature_c: np.ndarray, shape: Shape, span: tuple[int, int], *, loss_sign: float,
                       pixel_m: float | None) -> float | None:
    """Loss sum (K·px) of a straight band over its whole cross-profile, against the plane wall on both sides.

    The band runs along the image's rows or columns (within 10°) over ``span`` (first and last
    index along it). Its cross-profile (the median over the band's length, peak within half its
    width of its line) is read out to where it meets the sound level (:func:`_side_end`), as far on
    both sides as on the nearer one: a bridge in a uniform wall conducts about alike to both sides,
    and a one-sided trend (a heater's warmth, the next feature, the frame) stays out of the
    baseline. At most :data:`STRAIGHT_REACH_M` to each side. At every position along the band the
    excess is taken against the straight line between the temperatures there at both ends (the
    mean of :data:`_FAR_PX` pixels each), so a member crossing the band (a stud through a header)
    is its own plane there and adds nothing, and a wall's linear gradient cancels. None when the
    band is oblique, too short, the profile too narrow, or the frame cuts a side before the profile
    met the sound level there (no plane wall in view on that side).
    """
    oriented = None if pixel_m is None else _along_rows(temperature_c, shape)
    if oriented is None:
        return None
    arr, centre = oriented
    n_across = arr.shape[1]
    c0 = int(round(centre))
    reach = int(round(STRAIGHT_REACH_M / pixel_m))
    lo_c, hi_c = max(c0 - reach, 0), min(c0 + reach, n_across - 1)
    block = np.asarray(arr[span[0]:span[1] + 1, lo_c:hi_c + 1], float)
    if block.shape[0] < 3 or not np.all(np.isfinite(block)):
        return None
    prof = loss_sign * -np.median(block, axis=0)
    noise = 1.4826 * float(np.median(np.abs(np.diff(prof) - np.median(np.diff(prof))))) / math.sqrt(2.0)
    k = c0 - lo_c
    half = max(1, int(round(0.5 * shape.width_px)))
    window = prof[max(k - half, 0):k + half + 1]
    peak_at = max(k - half, 0) + int(np.argmax(window))
    amp = float(prof[peak_at] - prof.min())
    d_right, d_left = _side_end(prof[peak_at:], half, noise, amp), _side_end(prof[peak_at::-1], half, noise, amp)
    d = min(d_right, d_left)
    cut_right, cut_left = d_right == prof.size - 1 - peak_at and hi_c < c0 + reach, d_left == peak_at and lo_c > c0 - reach
    if (cut_right and d == d_right) or (cut_left and d == d_left):
        side = prof[peak_at:] if d == d_right else prof[peak_at::-1]
        if side.size <= half + 1:
            return None  # the band lies on the frame's edge: no plane wall in view on that side
        smooth = ndimage.median_filter(side, size=_SMOOTH_PX, mode="nearest")
        if smooth[-1 - half] - smooth[-1] > STRAIGHT_CUT * (smooth[0] - smooth[-1]):
            return None  # the frame cuts the nearer side while it still falls: no plane wall in view there
    right, left = peak_at + d, peak_at - d
    if right - left < 2 * _FAR_PX + 2:
        return None
    sub = block[:, left:right + 1]
    a = sub[:, :_FAR_PX].mean(axis=1, keepdims=True)
    b = sub[:, -_FAR_PX:].mean(axis=1, keepdims=True)
    x_a, x_b = 0.5 * (_FAR_PX - 1), sub.shape[1] - 1 - 0.5 * (_FAR_PX - 1)  # the far ends' centres
    t = (np.arange(sub.shape[1])[None, :] - x_a) / (x_b - x_a)
    base = a + (b - a) * t
    return float(loss_sign * (base - sub)[:, _FAR_PX:-_FAR_PX].sum())
