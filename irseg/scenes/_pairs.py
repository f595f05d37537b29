"""Simulated pairs of thermograms under a pressure difference, with their truth.

One inside wall of the sample house's lounge (timber frame) is described analytically, laid out in
metres over the sample pair's view (:data:`SAMPLE_DISTANCE_M`, :data:`SAMPLE_HFOV_DEG`) at any
frame size: the ceiling junction with the top plate at the top, a skirting board and the floor at
the bottom, studs at 600 mm centres, a double-glazed window (frame, glass edge over the spacer,
glass centre: surface temperatures from their U-values), a socket, a bay missing its batt over
0.7 m and a faint plaster texture. The reference shot samples it as it is; the pressurised shot
samples it

- through a camera moved between the shots: a similarity transform (shift up to 20 px,
  rotation up to 3°, zoom up to 2 %);
- with a drift of the whole surface (a few tenths of a kelvin, a slight slope);
- with cold-air jets entering at joints (skirting board, window frame, socket, ceiling
  junction): each enters at a point, spreads and falls along the wall (skirting jets spread
  sideways along the floor line) and fades with distance.

Both shots get the camera's white noise (NETD). Every defect of the wall is in both shots.
The truth of each leak is its **cooled footprint**: the pixels of the pressurised shot where
the jet's own cooling, as the lens sees it, holds at least 30 % of its peak (the rule the
analysis documents for a leak's extent, :data:`irseg.pairs.EXTENT_FRACTION`). The true transform
is the affine map from a pressurised pixel to the reference (what :class:`irseg.pairs.Registration`
estimates).

``far=True`` makes a pair whose pressurised shot looks at another part of the house (no
overlap): its analysis must fail alone.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from scipy.ndimage import gaussian_filter
from scipy.special import erf

__all__ = ["PairScene", "Jet", "make_pair", "export_pair", "export_sample_pair", "validate_pair", "SAMPLE_PAIR",
           "PAIR_TRUTH", "LEAK_FRACTION"]

#: The camera lens's blur, pixels (Gaussian σ), applied to both shots.
_PSF_PX = 0.7
#: A leak's footprint: where its own cooling holds this fraction of its peak.
LEAK_FRACTION = 0.3


@dataclass(frozen=True)
class Jet:
    """A cold-air jet on the wall, in reference-shot pixels."""

    name: str
    joint: str
    row: float
    col: float
    angle_deg: float  # direction of travel: 90 = straight down the wall, 0 = along +col
    peak_k: float
    length_px: float
    width_px: float
    spread: float

    def cooling(self, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
        """The jet's cooling, K (positive), at reference-shot coordinates."""
        a = math.radians(self.angle_deg)
        d_c, d_r = math.cos(a), math.sin(a)
        s = (cols - self.col) * d_c + (rows - self.row) * d_r
        t = -(cols - self.col) * d_r + (rows - self.row) * d_c
        ahead = np.maximum(s, 0.0)
        width = self.width_px + self.spread * ahead
        along = np.where(s >= 0, np.exp(-ahead / self.length_px), np.exp(-(s / (0.6 * self.width_px)) ** 2))
        return self.peak_k * along * np.sqrt(self.width_px / width) * np.exp(-0.5 * (t / width) ** 2)


@dataclass(frozen=True)
class PairScene:
    """A simulated pair and its truth.

    Attributes
    ----------
    reference_c, pressed_c : (M, N) float ndarray
        Surface temperatures of the two shots, °C (noise included).
    matrix : (2, 3) ndarray
        True affine map from a pressurised pixel ``(col, row)`` to the reference's.
    jets : tuple of Jet
    footprints : (k, M, N) bool ndarray
        Each leak's cooled footprint in the pressurised shot (empty for ``far`` pairs).
    defects : (M, N) bool ndarray
        Pixels of the pressurised shot on a defect present in both shots (window, socket,
        missing insulation, studs, junctions).
    drift_k : float
        The drift added at the centre, K.
    shift_px, rotation_deg, zoom : float
        The camera's move (shift of the centre (row, col), rotation, zoom).
    """

    reference_c: np.ndarray = field(repr=False)
    pressed_c: np.ndarray = field(repr=False)
    matrix: np.ndarray = field(repr=False)
    jets: tuple[Jet, ...]
    footprints: np.ndarray = field(repr=False)
    defects: np.ndarray = field(repr=False)
    drift_k: float
    shift_px: tuple[float, float]
    rotation_deg: float
    zoom: float


def _box(rows: np.ndarray, cols: np.ndarray, r0: float, r1: float, c0: float, c1: float, w: float) -> np.ndarray:
    """A soft-edged rectangle (optics blur ``w`` px), 1 inside."""
    fr = 0.5 * (erf((rows - r0) / w) - erf((rows - r1) / w))
    fc = 0.5 * (erf((cols - c0) / w) - erf((cols - c1) / w))
    return fr * fc


#: The sample pair's camera (its sidecars): a 45° lens 4.7 m from the wall, so that the view holds the
#: wall from the ceiling junction to the floor of a room about 2.45 m high (the 320 × 240 frame spans
#: 3.89 × 2.92 m, 12 mm a pixel). The simulated wall is laid out in metres over this view.
SAMPLE_HFOV_DEG, SAMPLE_DISTANCE_M = 45.0, 4.7
SAMPLE_SHAPE = (240, 320)
_VIEW_WIDTH_M = 2.0 * SAMPLE_DISTANCE_M * math.tan(math.radians(SAMPLE_HFOV_DEG / 2.0))

# Surface temperatures seen from inside at 20 °C inside, 1 °C outside (the sidecars' air), one-dimensional:
# T_si = T_i - R_si U (T_i - T_e) with R_si = 0.13 m²K/W (ISO 6946:2017 table 7, horizontal heat flow).
_T_IN, _T_OUT, _R_SI = 20.0, 1.0, 0.13
#: U-values of the window, W/m²K: the construction scene maker's defaults (irseg.scenes._construction.window):
#: centre of double glazing with a low-e coating, the frame, and the glass edge over the spacer (the
#: spacer's linear loss, about 0.06-0.08 W/mK for double glazing in ISO 10077-1 annex tables, from memory,
#: spread over a 60 mm strip); frame 70 mm, glass edge 60 mm wide (the same defaults).
WINDOW_U = {"glass": 1.2, "frame": 1.4, "edge": 2.4}
_FRAME_M, _EDGE_M = 0.07, 0.06
#: Emissivity of the glass (irseg.scenes._construction.GLASS_EMISSIVITY) and of the wall (the sidecars').
_GLASS_EPS, _WALL_EPS = 0.84, 0.9
#: Sound wall, °C: the sample house's timber frame wall (U about 0.28 W/m²K; its lounge wall lf01 shows 19.3 °C).
_WALL_C = 19.3
#: Studs: 45 mm softwood at 600 mm centres (irseg.scenes._elements.timber_frame_wall's defaults, as in lf01),
#: 0.6 K colder on their line and about 70 mm wide at half depth (what the construction scene's 3-D
#: conduction gives on lf01: the plasterboard spreads the stud's line).
STUD_SPACING_M, STUD_WIDTH_M, STUD_K = 0.6, 0.045, 0.6
_STUD_SOFT_M = 0.03  # erf width of a stud's flanks, m
_FIRST_STUD_M = 0.105  # centre of the first stud from the view's left edge, m
#: The ceiling junction's inside corner: colder by this much (K), fading over this distance (m) down the wall.
_JUNCTION = (0.8, 0.05)
#: A bay without its batt (lf01's simulated empty bay: about 3.3 K below the sound wall).
_EMPTY_BAY_K = 3.3


def surface_c(u_w_m2k: float) -> float:
    """Inside surface temperature of an element of U-value ``u_w_m2k``, one-dimensional, °C."""
    return _T_IN - _R_SI * u_w_m2k * (_T_IN - _T_OUT)


def _wall(rows: np.ndarray, cols: np.ndarray, n_rows: int, n_cols: int,
          texture: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The wall's surface temperature at reference coordinates, °C, and where its defects are.

    Laid out in metres on the sample view (:data:`SAMPLE_DISTANCE_M`, :data:`SAMPLE_HFOV_DEG`):
    the ceiling above the ceiling junction (row 0.10 of the frame), the wall down to a 120 mm
    skirting board (its top at row 0.90), the floor below it; studs at :data:`STUD_SPACING_M`; a
    double-glazed window (frame, colder glass edge, warmer glass centre, :data:`WINDOW_U`); a socket;
    a batt missing from one bay (between two studs).
    """
    h, w = float(n_rows), float(n_cols)
    px = _VIEW_WIDTH_M / w  # m per pixel
    y, x = rows * px, cols * px  # m from the frame's top left corner
    soft = 0.012  # optics and plaster: sharp edges spread over about a centimetre
    ceiling_m, skirting_m = 0.10 * h * px, 0.90 * h * px
    floor_m = skirting_m + 0.12
    below = np.maximum(y - ceiling_m, 0.0)
    t = _WALL_C + 0.25 - 0.5 * (y - ceiling_m) / (skirting_m - ceiling_m)  # room air stratification, ±0.25 K
    # the ceiling junction: the inside corner (less heat reaches it by convection and radiation) is colder,
    # and the top plate below it (two 45 mm plates laid flat: a 90 mm band) is timber like a stud
    t = t - _JUNCTION[0] * np.exp(-below / _JUNCTION[1]) * (y >= ceiling_m)
    t = t - STUD_K * _box(y, x, ceiling_m - 0.01, ceiling_m + 0.09, -1.0, x.max() + 1.0, _STUD_SOFT_M)
    ceiling = 0.5 * (1 - erf((y - ceiling_m) / soft))
    t = t + (19.6 - 0.6 * np.exp(-np.maximum(ceiling_m - y, 0.0) / 0.05) - t) * ceiling  # the ceiling
    # the floor junction: the wall just above it a little colder, the skirting board (wood, 120 mm) about
    # 1 K below the wall, the floor beyond it
    skirting = 0.5 * (1 + erf((y - skirting_m) / soft))
    floor = 0.5 * (1 + erf((y - floor_m) / soft))
    t = t - 0.3 * np.exp(-np.maximum(skirting_m - y, 0.0) / 0.08) * (1 - skirting)
    t = t + (18.1 - t) * skirting + (18.7 - 18.1) * floor
    studs = sum(_box(y, x, ceiling_m, skirting_m, c - STUD_WIDTH_M / 2, c + STUD_WIDTH_M / 2, _STUD_SOFT_M)
                for c in np.arange(_FIRST_STUD_M, x.max() + STUD_SPACING_M, STUD_SPACING_M))
    t = t - STUD_K / erf(STUD_WIDTH_M / 2 / _STUD_SOFT_M) * studs
    # the window, 0.55-0.85 of the width, 0.22-0.62 of the height (1.17 m square, sill 0.94 m above the floor):
    # the frame, the glass edge strip over the spacer (the coldest), fading into the glass centre
    x0, x1, y0, y1 = 0.55 * w * px, 0.85 * w * px, 0.22 * h * px, 0.62 * h * px
    window = _box(y, x, y0, y1, x0, x1, soft)
    f, e = _FRAME_M, _FRAME_M + _EDGE_M
    pane = _box(y, x, y0 + f, y1 - f, x0 + f, x1 - f, soft)
    centre = _box(y, x, y0 + e, y1 - e, x0 + e, x1 - e, 0.025)  # the edge zone fades into the centre
    frame_c, edge_c, glass_c = (surface_c(WINDOW_U[k]) for k in ("frame", "edge", "glass"))
    glass = edge_c + (glass_c - edge_c) * centre
    # read with the wall's emissivity the glass reflects more of the room (20 °C): it reads warmer by about
    # (1 - 0.84/0.9) of its difference to the room (the radiance law linearised over a few kelvin)
    glass = glass + (1.0 - _GLASS_EPS / _WALL_EPS) * (_T_IN - glass)
    t = t + (frame_c - t) * window + (glass - frame_c) * pane
    socket = _box(rows, cols, 0.70 * h, 0.70 * h + 16 * w / 640, 0.14 * w, 0.14 * w + 16 * w / 640, soft / px)
    t = t - 0.9 * socket
    # a batt missing from the bay between the second and third studs, over 0.7 m of its height
    bay0 = _FIRST_STUD_M + STUD_SPACING_M + STUD_WIDTH_M / 2
    missing = _box(y, x, 0.30 * h * px, 0.55 * h * px, bay0, bay0 + STUD_SPACING_M - STUD_WIDTH_M, 0.03)
    t = t - _EMPTY_BAY_K * missing
    t = t + texture
    near = 4 * w / 640
    defects = (window > 0.2) | (socket > 0.2) | (missing > 0.2) | (studs > 0.2) \
        | (np.abs(rows - 0.10 * h) < near) | (np.abs(rows - 0.90 * h) < near) | (y > floor_m - 4 * px)
    return t, defects


def _texture(rng: np.random.Generator, rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """A faint plaster texture (random plane waves, ±0.15 K) fixed to the wall."""
    out = np.zeros(rows.shape)
    for _ in range(24):
        k = rng.uniform(0.03, 0.25)
        a = rng.uniform(0, math.pi)
        phase = rng.uniform(0, 2 * math.pi)
        out += math.sqrt(2.0 / 24) * 0.08 * np.cos(k * (np.cos(a) * cols + np.sin(a) * rows) + phase)
    return out


def _jets(rng: np.random.Generator, n_rows: int, n_cols: int) -> tuple[Jet, ...]:
    h, w = float(n_rows), float(n_cols)
    k = w / 640.0  # jets scale with the frame
    u = lambda lo, hi: float(rng.uniform(lo, hi))  # noqa: E731
    return (
        Jet("skirting", "skirting board", 0.90 * h - 2, u(0.30, 0.36) * w, 180.0 * (rng.random() < 0.5),
            u(1.6, 2.4), k * u(70, 90), k * u(6, 8), 0.15),
        Jet("window", "window frame", 0.62 * h + 3, u(0.76, 0.82) * w, u(80, 100), u(1.8, 2.8), k * u(60, 80),
            k * u(6, 8), 0.15),
        Jet("socket", "socket", 0.70 * h + 17 * k, (0.14 * 640 + 8) * k, 90.0, u(1.2, 1.8), k * u(28, 36),
            k * u(5, 7), 0.12),
        Jet("ceiling", "ceiling junction", 0.10 * h + 3, u(0.40, 0.48) * w, u(80, 100), u(1.5, 2.2),
            k * u(80, 110), k * u(7, 9), 0.15),
    )


def make_pair(seed: int = 0, *, n_rows: int = 480, n_cols: int = 640, far: bool = False, netd_k: float = 0.05,
              max_shift_px: float = 20.0, max_rotation_deg: float = 3.0, max_zoom: float = 0.02) -> PairScene:
    """Simulate one pair (see the module notes); everything follows from ``seed``."""
    rng = np.random.default_rng(seed)
    rows, cols = np.mgrid[0:n_rows, 0:n_cols].astype(np.float64)
    tex_rng = np.random.default_rng(seed + 7919)
    jets = _jets(rng, n_rows, n_cols)
    shift = (float(rng.uniform(-1, 1) * max_shift_px), float(rng.uniform(-1, 1) * max_shift_px))
    rotation = float(rng.uniform(-1, 1) * max_rotation_deg)
    zoom = 1.0 + float(rng.uniform(0, 1) * max_zoom)
    if far:
        shift = (0.0, 1.6 * n_cols)  # the second shot looks at another stretch of the house
    # pressurised pixel p -> reference point q: q = c + R(-θ)(p - c - s) / zoom
    # (forward: p = c + s + zoom R(θ)(q - c))
    th = math.radians(rotation)
    rot_inv = np.array([[math.cos(th), math.sin(th)], [-math.sin(th), math.cos(th)]]) / zoom
    centre = np.array([(n_cols - 1) / 2.0, (n_rows - 1) / 2.0])
    s_xy = np.array([shift[1], shift[0]])
    matrix = np.hstack([rot_inv, (centre - rot_inv @ (centre + s_xy))[:, None]])
    q_cols = matrix[0, 0] * cols + matrix[0, 1] * rows + matrix[0, 2]
    q_rows = matrix[1, 0] * cols + matrix[1, 1] * rows + matrix[1, 2]
    if far:  # another wall of the same build-up, shot from closer (two thirds of the distance), other texture
        q_rows, q_cols = q_rows * 0.65 + 0.3 * n_rows, (n_cols - 1 - np.mod(q_cols, n_cols)) * 0.65 + 0.1 * n_cols
    texture_ref = _texture(tex_rng, rows, cols)
    reference, _ = _wall(rows, cols, n_rows, n_cols, texture_ref)
    # the same plaster texture on the same wall; another wall has its own
    texture_p = _texture(np.random.default_rng(seed + 7919 + (104729 if far else 0)), q_rows, q_cols)
    pressed, defects = _wall(q_rows, q_cols, n_rows, n_cols, texture_p)
    drift = float(rng.uniform(-0.4, -0.15))  # the room cooled a little while the fan ran
    slope = rng.uniform(-0.1, 0.1, 2)
    pressed = gaussian_filter(pressed, _PSF_PX) + drift + slope[0] * (rows / n_rows - 0.5) \
        + slope[1] * (cols / n_cols - 0.5)
    footprints = np.zeros((len(jets), n_rows, n_cols), bool)
    if not far:
        for k, jet in enumerate(jets):
            cool = gaussian_filter(jet.cooling(q_rows, q_cols), _PSF_PX)  # as the lens sees it
            pressed = pressed - cool
            footprints[k] = cool >= LEAK_FRACTION * float(cool.max())
    reference = gaussian_filter(reference, _PSF_PX) + rng.normal(0.0, netd_k, reference.shape)
    pressed = pressed + rng.normal(0.0, netd_k, pressed.shape)
    return PairScene(reference_c=reference, pressed_c=pressed, matrix=matrix, jets=jets if not far else (),
                     footprints=footprints if not far else footprints[:0], defects=defects, drift_k=drift,
                     shift_px=shift, rotation_deg=rotation, zoom=zoom)


#: The sample survey's pair: (stem of the reference, stem of the pressurised shot, seed, pressure Pa, minutes).
SAMPLE_PAIR = ("lf10_lounge_east_wall_0pa", "lf11_lounge_east_wall_50pa", 2026, 50.0, 15.0)

#: The sample pair's truth files in the sample folder (new files beside the survey's own truth).
PAIR_TRUTH = ("pair_truth.json", "pair_truth_masks.npz")


def export_pair(directory: str | os.PathLike[str], *, pair: tuple = SAMPLE_PAIR) -> dict:
    """Write a pair (two float TIFFs, their sidecars) into ``directory``; returns its truth record.

    The exports hold object temperatures with the export emissivity set to the surface's, so
    irseg reads them back unchanged. The pressurised shot's sidecar names its reference in
    ``[pressure]``.
    """
    from irseg.scenes._export import write_image, write_toml

    ref_stem, pressed_stem, seed, pressure_pa, minutes = pair
    scene = make_pair(seed, n_rows=SAMPLE_SHAPE[0], n_cols=SAMPLE_SHAPE[1], max_shift_px=SAMPLE_SHAPE[1] / 32)
    d = Path(directory)
    camera = {"hfov_deg": SAMPLE_HFOV_DEG, "distance_m": SAMPLE_DISTANCE_M, "units": "celsius", "netd_k": 0.05,
              "export_emissivity": 0.9, "export_reflected_c": 20.0}
    base = {"camera": camera, "surface": {"emissivity": 0.9, "reflected_c": 20.0, "view": "interior"},
            "air": {"inside_c": 20.0, "outside_c": 1.0}}
    write_image(d, ref_stem, scene.reference_c, fmt="tiff-float")
    write_toml(d / f"{ref_stem}.toml", {**base, "image": {"title": "Lounge, east wall at ambient pressure"}},
               header="Lounge, east wall from inside, before the fan ran.\nSynthetic image made by irseg.scenes.")
    path = write_image(d, pressed_stem, scene.pressed_c, fmt="tiff-float")
    write_toml(d / f"{pressed_stem}.toml",
               {**base, "image": {"title": f"Lounge, east wall after {minutes:g} min at {pressure_pa:g} Pa"},
                "pressure": {"reference": ref_stem, "difference_pa": pressure_pa, "minutes": minutes}},
               header="Lounge, east wall from inside, the house depressurised by a fan.\n"
                      "Synthetic image made by irseg.scenes.")
    return {
        "image": path.name, "reference": ref_stem, "pressure_pa": pressure_pa, "minutes": minutes,
        "matrix": [[round(float(v), 6) for v in row] for row in scene.matrix],
        "shift_px": [round(v, 3) for v in scene.shift_px], "rotation_deg": round(scene.rotation_deg, 4),
        "zoom": round(scene.zoom, 5), "drift_k": round(scene.drift_k, 4),
        "leaks": [{"name": j.name, "joint": j.joint, "peak_k": round(j.peak_k, 3),
                   "area_px": int(scene.footprints[k].sum())} for k, j in enumerate(scene.jets)],
        "_footprints": scene.footprints,
    }


def export_sample_pair(directory: str | os.PathLike[str]) -> dict:
    """The sample survey's pair: two images, their sidecars and the truth files :data:`PAIR_TRUTH`."""
    from irseg.io import write_exact_json, write_npz

    d = Path(directory)
    record = export_pair(d)
    footprints = record.pop("_footprints")
    payload = {"pairs": [record], "notes": (
        "Synthetic truth of the pair under a pressure difference (irseg.scenes._pairs): matrix maps a pixel "
        "(col, row) of the pressurised image to the reference; each leak's footprint (pair_truth_masks.npz, "
        "leaks x rows x columns) is where its own cooling holds 30 % of its peak.")}
    write_exact_json(d / PAIR_TRUTH[0], payload, indent=1)
    write_npz(d / PAIR_TRUTH[1], {record["image"].rsplit(".", 1)[0]: np.asarray(footprints, bool)})
    return record


def validate_pair(seed: int, *, far: bool = False, n_rows: int = 480, n_cols: int = 640,
                  netd_k: float = 0.05) -> dict:
    """Analyse one simulated pair and compare it with its truth (the issue's criteria, per pair).

    Returns
    -------
    dict
        ``seed``, ``far``, ``failed`` (the pair's error message, or None), ``registration_rms_px``
        (root mean square distance, over the pressurised frame's overlap, between where the
        estimated and the true transform put each pixel in the reference), ``rms_px`` (the
        residual irseg reports), ``ious`` (each leak's best IoU with one anomaly), ``n_per_leak``
        (anomalies touching each leak's footprint), ``n_false`` (air-leakage anomalies touching no
        footprint: on the drift or on a defect present in both), ``n_anomalies``, ``seconds``.
    """
    import time

    from irseg.errors import IrsegError
    from irseg.pairs import analyse_pair
    from irseg.types import ThermalFrame

    scene = make_pair(seed, n_rows=n_rows, n_cols=n_cols, far=far, netd_k=netd_k)

    def frame(t: np.ndarray, name: str) -> ThermalFrame:
        t32 = np.asarray(t, np.float32)
        return ThermalFrame(path=name, temperature_c=t32, mask=np.zeros(t32.shape, bool))

    out: dict = {"seed": seed, "far": far, "failed": None}
    start = time.perf_counter()
    try:
        result = analyse_pair(frame(scene.reference_c, "ambient.tiff"), frame(scene.pressed_c, "pressurised.tiff"),
                              pressure_pa=50.0)
    except IrsegError as exc:
        out.update(failed=str(exc), seconds=time.perf_counter() - start)
        return out
    out["seconds"] = time.perf_counter() - start
    reg = result.registration
    rows, cols = np.mgrid[0:n_rows, 0:n_cols]
    pts = np.stack([cols.ravel(), rows.ravel(), np.ones(rows.size)])
    err = np.sum((reg.matrix @ pts - scene.matrix @ pts) ** 2, axis=0)
    inside = np.isfinite(result.difference_k).ravel()
    out["registration_rms_px"] = float(math.sqrt(float(err[inside].mean())))
    out["rms_px"] = reg.rms_px
    ious, counts = [], []
    for fp in scene.footprints:
        touching = [a.anomaly for a in result.anomalies if (fp & (result.labels == a.anomaly)).any()]
        counts.append(len(touching))
        best = 0.0
        for ident in touching:
            region = result.labels == ident
            best = max(best, float((region & fp).sum()) / float((region | fp).sum()))
        ious.append(best)
    out.update(ious=ious, n_per_leak=counts, n_anomalies=len(result.anomalies))
    out["n_false"] = sum(1 for a in result.anomalies
                         if not any((fp & (result.labels == a.anomaly)).any() for fp in scene.footprints))
    return out
