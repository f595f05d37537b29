"""Construction in the picture that is not a defect: heat emitters in front of a wall.

- :func:`radiator`: a panel radiator in front of the inside face, 55 °C at its top falling to
  45 °C at its bottom (the water cools on its way down), with cooler vertical seams between its
  channels, and the warm plume it drives up the wall (an analytic overlay of the *air* next to the
  face, like :func:`irseg.scenes._defects.cold_air_fan`; the wall's response is the scene's 3-D
  conduction).
- :func:`pipe`: a vertical heating pipe in front of the face with a thin plume.
- :func:`window`: a double-glazed window through the whole build-up: a frame, the glass with its
  own U-value and emissivity 0.84, and the colder glass edge along the spacer. Each part is a box
  of an equivalent material whose conductance through the element's thickness gives its U-value
  with the standard surface resistances (R_si 0.13, R_se 0.04 m²K/W, ISO 6946:2017 table 7). Seen
  from outside the glass reflects more of the cold sky than the wall (its emissivity map reaches the
  camera through ``Defect.emissivity``).

Each returns a :class:`~irseg.scenes._defects.Defect` of cause ``unclassified`` whose ``face_c``
holds the object's surface temperature (the camera sees it instead of the wall) and whose region
is the object with the part of its plume that warms the air by at least 0.5 K. The analysis must
report it as a heat source, never as a defect, and must not take its pixels as sound reference.
Linear thermal bridges (slab edges, lintels, timber headers) and framing members (studs at 400 and
600 mm) are the elements and defects of :mod:`irseg.scenes._elements` and
:mod:`irseg.scenes._defects`; their truth ψ is the simulated excess heat with and without the
bridge per metre and kelvin (:func:`truth_psi`).
"""

from __future__ import annotations

import numpy as np

from irseg.errors import ConfigError
from irseg.scenes._defects import Defect, _grid, _smoothstep
from irseg.scenes._elements import Block, Element
from irseg.scenes._materials import Material

__all__ = ["radiator", "pipe", "window", "construction_items", "truth_psi", "EMITTER_CAUSE", "GLASS_EMISSIVITY"]

#: Emissivity of soda-lime glass in the long-wave band (common practice, about 0.84 for uncoated glass).
GLASS_EMISSIVITY = 0.84
_R_SI, _R_SE = 0.13, 0.04  # m²K/W, ISO 6946:2017 table 7 (horizontal heat flow)

#: Cause the analysis must give an emitter (the vocabulary's "not judged").
EMITTER_CAUSE = "unclassified"
_PLUME_REGION_K = 0.5  # the plume belongs to the emitter's region where it warms the air this much


def _check_box(element: Element, x0: float, x1: float, y0: float, y1: float, what: str) -> None:
    if not (0.0 <= x0 < x1 <= element.width_m and 0.0 <= y0 < y1 <= element.height_m):
        raise ConfigError(f"{what} box x {x0}-{x1} m, y {y0}-{y1} m must lie on the "
                          f"{element.width_m} × {element.height_m} m element")


def _plume(element: Element, *, x0: float, x1: float, top_m: float, warm_k: float, decay_m: float,
           spread: float) -> np.ndarray:
    """Air warming above an emitter whose top edge is at ``top_m`` (y grows downward), K."""
    y, x = _grid(element)
    d = np.clip(top_m - y, 0.0, None)  # height above the emitter's top
    centre, half0 = 0.5 * (x0 + x1), 0.5 * (x1 - x0)
    half = half0 + spread * d
    lateral = _smoothstep((half - np.abs(x - centre)) / (0.3 * half + 1e-9))
    above = _smoothstep((top_m + 0.02 - y) / 0.04)
    return warm_k * np.exp(-d / decay_m) * lateral * above


def radiator(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, top_c: float = 55.0,
    bottom_c: float = 45.0, seam_m: float = 0.05, seam_k: float = 4.0, plume_k: float = 8.0,
    decay_m: float = 0.35, name: str = "radiator",
) -> Defect:
    """A panel radiator in front of the face over ``[x0, x1] × [y0, y1]`` (y0 its top edge), m."""
    _check_box(element, x0_m, x1_m, y0_m, y1_m, "radiator")
    y, x = _grid(element)
    box = (x >= x0_m) & (x < x1_m) & (y >= y0_m) & (y < y1_m)
    frac = np.clip((y - y0_m) / (y1_m - y0_m), 0.0, 1.0)
    face = top_c + (bottom_c - top_c) * frac
    seam = np.abs(((x - x0_m) / seam_m) % 1.0 - 0.5) > 0.5 - 0.5 * element.cell_m / seam_m
    face = np.where(seam, face - seam_k, face) + 0.0 * y
    face = np.where(box, face, np.nan)
    air = _plume(element, x0=x0_m, x1=x1_m, top_m=y0_m, warm_k=plume_k, decay_m=decay_m, spread=0.25)
    region = box | (air >= _PLUME_REGION_K)
    return Defect(name, EMITTER_CAUSE, (), f"panel radiator {top_c:.0f}-{bottom_c:.0f} °C with a warm plume above",
                  truth_kind="diffuse", region=region, air_change_k=air, face_c=face)


def pipe(
    element: Element, *, x_m: float, y0_m: float, y1_m: float, water_c: float = 50.0, diameter_m: float = 0.03,
    plume_k: float = 1.0, name: str = "pipe",
) -> Defect:
    """A vertical heating pipe in front of the face from ``y0_m`` to ``y1_m`` (its top at ``y0_m``)."""
    x0, x1 = x_m - 0.5 * diameter_m, x_m + 0.5 * diameter_m
    _check_box(element, x0, x1, y0_m, y1_m, "pipe")
    y, x = _grid(element)
    half = 0.5 * max(diameter_m, element.cell_m)
    box = (np.abs(x - x_m) <= half) & (y >= y0_m) & (y < y1_m)
    face = np.where(box, water_c - 2.0 * np.clip((y - y0_m) / (y1_m - y0_m), 0, 1), np.nan)
    # the pipe warms the air along its whole run; the plume rises beside it
    air = _plume(element, x0=x0 - 0.03, x1=x1 + 0.03, top_m=y1_m, warm_k=plume_k, decay_m=10.0, spread=0.05)
    air = np.where(y >= y0_m - 0.05, air, 0.0)
    region = box | (air >= _PLUME_REGION_K)
    return Defect(name, EMITTER_CAUSE, (), f"heating pipe at {water_c:.0f} °C", truth_kind="diffuse",
                  region=region, air_change_k=air, face_c=face)


def _equivalent(name: str, u_w_m2k: float, thickness_m: float) -> Material:
    """A material whose conduction through ``thickness_m`` gives ``u_w_m2k`` with R_si and R_se."""
    r = 1.0 / u_w_m2k - _R_SI - _R_SE
    if r <= 0:
        raise ConfigError(f"{name}: U = {u_w_m2k} W/m²K is above what the surface resistances allow "
                          f"({1 / (_R_SI + _R_SE):.1f} W/m²K)")
    return Material(name, thickness_m / r, 1.0e6)


def window(
    element: Element, *, x0_m: float, x1_m: float, y0_m: float, y1_m: float, u_glass: float = 1.2,
    u_frame: float = 1.4, u_edge: float = 2.4, frame_m: float = 0.07, edge_m: float = 0.06,
    name: str = "window",
) -> Defect:
    """A window over ``[x0, x1] × [y0, y1]`` m: frame ``frame_m`` wide, glass edge ``edge_m`` wide.

    U-values: centre of glass ``u_glass`` (double glazing with a low-e coating about 1.1-1.4 W/m²K,
    common practice), frame ``u_frame``, the glass edge over the spacer ``u_edge`` (the spacer's
    linear loss spread over the edge strip).
    """
    _check_box(element, x0_m, x1_m, y0_m, y1_m, "window")
    if 2 * (frame_m + edge_m) >= min(x1_m - x0_m, y1_m - y0_m):
        raise ConfigError(f"window {x1_m - x0_m:.2f} × {y1_m - y0_m:.2f} m is too small for its frame and glass edge")
    th = element.thickness_m()
    f, e = frame_m, frame_m + edge_m
    blocks = (
        Block(_equivalent("window_frame", u_frame, th), x0_m, x1_m, y0_m, y1_m, 0.0, th),
        Block(_equivalent("glass_edge", u_edge, th), x0_m + f, x1_m - f, y0_m + f, y1_m - f, 0.0, th),
        Block(_equivalent("glazing", u_glass, th), x0_m + e, x1_m - e, y0_m + e, y1_m - e, 0.0, th),
    )
    y, x = _grid(element)
    glass = (x >= x0_m + f) & (x < x1_m - f) & (y >= y0_m + f) & (y < y1_m - f)
    emissivity = np.where(glass, GLASS_EMISSIVITY, np.nan)
    return Defect(name, EMITTER_CAUSE, blocks,
                  f"double-glazed window, U {u_glass:.1f} (glass) / {u_frame:.1f} (frame) W/m²K, glass emissivity "
                  f"{GLASS_EMISSIVITY}", emissivity=emissivity)


def construction_items(element: Element, specs: tuple[str, ...]) -> tuple[Defect, ...]:
    """Emitters from the presets' ``construction`` option.

    ``"radiator:x0:x1:y0:y1[:top_c:bottom_c]"``, ``"pipe:x:y0:y1[:water_c]"`` and
    ``"window:x0:x1:y0:y1[:u_glass]"`` (m, °C, W/m²K).
    """
    out = []
    for spec in specs:
        kind, *args = spec.split(":")
        try:
            vals = [float(a) for a in args]
        except ValueError:
            raise ConfigError(f"construction item {spec!r}: the numbers after the kind must be plain "
                              "decimals") from None
        if kind == "radiator" and len(vals) in (4, 6):
            temps = {"top_c": vals[4], "bottom_c": vals[5]} if len(vals) == 6 else {}
            out.append(radiator(element, x0_m=vals[0], x1_m=vals[1], y0_m=vals[2], y1_m=vals[3],
                                name=f"radiator_{len(out) + 1}", **temps))
        elif kind == "pipe" and len(vals) in (3, 4):
            extra = {"water_c": vals[3]} if len(vals) == 4 else {}
            out.append(pipe(element, x_m=vals[0], y0_m=vals[1], y1_m=vals[2], name=f"pipe_{len(out) + 1}", **extra))
        elif kind == "window" and len(vals) in (4, 5):
            extra = {"u_glass": vals[4]} if len(vals) == 5 else {}
            out.append(window(element, x0_m=vals[0], x1_m=vals[1], y0_m=vals[2], y1_m=vals[3],
                              name=f"window_{len(out) + 1}", **extra))
        else:
            raise ConfigError(f"unknown construction item {spec!r}; use radiator:x0:x1:y0:y1[:top_c:bottom_c], "
                              "pipe:x:y0:y1[:water_c] or window:x0:x1:y0:y1[:u_glass]")
    return tuple(out)


def truth_psi(excess_w: float, length_m: float, delta_air_k: float) -> float | None:
    """Truth ψ of a linear bridge in a view: its simulated excess heat (with minus without the
    bridge, charged to it) per metre of the length seen and per kelvin, W/(m·K) (ISO 14683 meaning)."""
    if length_m <= 0 or delta_air_k <= 0:
        return None
    return float(excess_w / (length_m * delta_air_k))
