"""Shape features and the cause rules.

Every rule is a plain threshold on a feature computed from the anomaly's pixels;
the thresholds are module constants, documented in ``docs/analysis.md``. The
first matching rule wins and returns ``(cause, reason)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np
from scipy import ndimage

from .._shared import robust_sigma
from ..vocabulary import CAUSES

__all__ = ["Shape", "CAUSES", "shape_features", "find_regular_sets", "find_lines", "classify_cause"]


BAND_ELONGATION = 5.0  # length/width of a "long narrow band"
SET_ELONGATION = 2.5  # a shorter band still counts when it belongs to a regular parallel set
WEAK_BAND_ELONGATION = 3.0  # ... or when its contrast is weak (a timber header, not an empty cavity)
LINE_MIN_ELONGATION = 2.0  # a piece needs this to give a line its direction
LINE_GAP_WIDTHS = 3.0  # pieces of one line are at most this many widths apart (plus 4 px)
SMALL_SPOT_M = 0.10  # a compact spot smaller than this across is not judged as missing insulation
BAND_FILL = 0.5  # area / minimum-area rectangle of a straight band (segmented outlines are ragged)
WIDTH_RATIO = 2.0  # members of a set differ in mean width by at most this factor
BAND_MAX_WIDTH_M = 0.35  # wider bands are not framing members, lintels or slab edges
COMPACT_SOLIDITY = 0.85
COMPACT_FILL = 0.70
STREAKY_SOLIDITY = 0.70
STREAKY_FILL = 0.60
FAN_TAPER = 2.0  # a wedge (fan) has 5× more pixels in its wide third than in its apex third
STREAK_ELONGATION = 3.0  # an elongated pattern is a streak unless it is a uniform band
SHARP_TRANSITION_PX = 6.0  # a step edge measures ~2 px with central differences, optics and linings add 2-3 px
NONUNIFORM = 0.35  # interior spread / |contrast| of a decaying (fan) pattern
PARTIAL_FRACTION = 0.10  # |contrast| / (T_i − T_e) below which a void is partial-depth
PARALLEL_DEG = 10.0
SPACING_CV = 0.25
SET_MAX_WIDTH_FRACTION = 0.35  # members are narrow against their spacing (45-100 mm at 400-600 mm centres)
STUD_SPACING_M = (0.30, 0.70)


@dataclass(frozen=True)
class Shape:
    """Geometric and thermal features of one anomaly (pixels unless named)."""

    area_px: int
    perimeter_px: int
    length_px: float  # long side of the minimum-area rectangle
    width_px: float  # mean width: area / length (at most the rectangle's short side)
    elongation: float
    rect_fill: float
    solidity: float
    orientation_deg: float  # long axis, degrees from the column axis, in [0, 180)
    centroid_row: float
    centroid_col: float
    transition_px: float  # |contrast| / 90th percentile of |∇u| across the outline
    nonuniformity: float  # interior spread of the contrast u − reference (noise removed) / |contrast|
    taper: float  # pixels in the wider end third / the narrower end third along the long axis

    @property
    def sharp(self) -> bool:
        return self.transition_px <= SHARP_TRANSITION_PX

    @property
    def compact(self) -> bool:
        return self.solidity >= COMPACT_SOLIDITY and self.rect_fill >= COMPACT_FILL

    @property
    def uniform(self) -> bool:
        return self.nonuniformity <= NONUNIFORM

    @property
    def streaky(self) -> bool:
        return (
            self.solidity < STREAKY_SOLIDITY
            or self.rect_fill < STREAKY_FILL
            or self.elongation >= STREAK_ELONGATION
            or self.taper >= FAN_TAPER
        )

    @property
    def diffuse(self) -> bool:
        return self.transition_px > SHARP_TRANSITION_PX or self.nonuniformity > NONUNIFORM


def shape_features(
    region: np.ndarray,
    *,
    u_crop: np.ndarray,
    reference_crop: np.ndarray,
    dist_crop: np.ndarray,
    delta_k: float,
    noise_k: float,
    row_offset: int,
    col_offset: int,
) -> Shape:
    """Features of the region ``region`` (bool crop).

    ``u_crop`` is the smooth field and ``reference_crop`` the local sound reference
    over the same crop (°C); ``dist_crop`` the distance to the region (px).
    """
    rr, cc = np.nonzero(region)
    area = int(rr.size)
    boundary = region & ~ndimage.binary_erosion(region)
    perimeter = int(boundary.sum())
    br, bc = np.nonzero(boundary)
    pts = np.column_stack([bc, br]).astype(np.float32)
    (_, _), (w, h), _ = cv2.minAreaRect(pts)
    length, width = max(w, h) + 1.0, min(w, h) + 1.0
    hull = cv2.convexHull(pts)
    hull_area = float(cv2.contourArea(hull)) + 0.5 * float(cv2.arcLength(hull, True)) + 1.0  # Pick's theorem
    cov = np.cov(np.vstack([cc, rr]).astype(float)) if area > 1 else np.zeros((2, 2))
    evals, evecs = np.linalg.eigh(cov)
    major = evecs[:, int(np.argmax(evals))]
    orientation = math.degrees(math.atan2(major[1], major[0])) % 180.0
    along = (cc - cc.mean()) * major[0] + (rr - rr.mean()) * major[1]
    lo_s, hi_s = float(along.min()), float(along.max())
    third = (hi_s - lo_s) / 3.0
    n_lo = int((along < lo_s + third).sum())
    n_hi = int((along > hi_s - third).sum())
    taper = max(n_lo, n_hi) / max(min(n_lo, n_hi), 1) if third > 0 else 1.0
    gy, gx = np.gradient(u_crop.astype(float))
    grad = np.hypot(gx, gy)
    band = boundary | ((dist_crop > 0) & (dist_crop <= 1.5))
    g90 = float(np.percentile(grad[band], 90)) if band.any() else 0.0
    transition = abs(delta_k) / g90 if g90 > 1e-12 else float("inf")
    inner = region & ~boundary if (region & ~boundary).sum() >= 4 else region
    vals = u_crop[inner] - reference_crop[inner]  # contrast, free of the sound gradient
    spread = robust_sigma(vals)
    spread = math.sqrt(max(spread * spread - noise_k * noise_k, 0.0))
    return Shape(
        area_px=area,
        perimeter_px=perimeter,
        length_px=float(length),
        width_px=float(max(1.0, min(width, area / length))),  # mean width: robust to ragged outlines
        elongation=float(length / max(1.0, min(width, area / length))),
        rect_fill=float(min(1.0, area / (length * width))),
        solidity=float(min(1.0, area / max(hull_area, 1.0))),
        orientation_deg=orientation,
        centroid_row=float(rr.mean()) + row_offset,
        centroid_col=float(cc.mean()) + col_offset,
        transition_px=float(transition),
        nonuniformity=float(spread / abs(delta_k)) if delta_k else float("inf"),
        taper=float(taper),
    )


def _is_band(shape: Shape, width_m: float | None, elongation: float) -> bool:
    """Straight (fills its rectangle), narrow (elongated, at most 0.35 m wide when known)."""
    return (
        shape.elongation >= elongation
        and shape.rect_fill >= BAND_FILL
        and shape.taper < FAN_TAPER
        and (width_m is None or width_m <= BAND_MAX_WIDTH_M)
    )


def _angle_diff(a: float, b: float) -> float:
    d = abs(a - b) % 180.0
    return min(d, 180.0 - d)


def find_regular_sets(
    shapes: dict[int, Shape], kinds: dict[int, str], *, pixel_m: float | None
) -> dict[int, tuple[int, float, tuple[int, int]]]:
    """Parallel bands of the same sign at regular spacing (studs, joists, rafters).

    Bands (elongation >= 2.5, straight) parallel within 10° and of similar mean
    width (within a factor 2) are grouped; bands on
    the same line (a member interrupted by another anomaly) merge into one line.
    At least three lines whose spacings vary by at most 25 %, with a width of at
    most 0.35 × the spacing, form a set. Pieces
    lying on a member's line with the member's width join the set too.

    Returns
    -------
    dict
        key -> (lines in the set, mean spacing in px, (set number, line number)).
        Pieces with the same (set, line) are one member interrupted by other anomalies.
    """
    cand = [
        k for k, s in shapes.items()
        if _is_band(s, None if pixel_m is None else s.width_px * pixel_m, SET_ELONGATION)
    ]
    cand.sort(key=lambda k: -shapes[k].area_px)  # long members give the best orientation
    found: dict[int, tuple[int, float, tuple[int, int]]] = {}
    n_sets = 0
    for k in cand:
        if k in found:
            continue
        o = shapes[k].orientation_deg
        w_k = shapes[k].width_px
        group = [
            j for j in cand
            if j not in found and kinds[j] == kinds[k] and _angle_diff(shapes[j].orientation_deg, o) <= PARALLEL_DEG
            and max(shapes[j].width_px, w_k) <= WIDTH_RATIO * min(shapes[j].width_px, w_k)
        ]
        th = math.radians(o)

        def offset(sh: Shape) -> float:
            return -math.sin(th) * sh.centroid_col + math.cos(th) * sh.centroid_row

        width = float(np.median([shapes[j].width_px for j in group]))
        offs = np.sort([offset(shapes[j]) for j in group])
        lines: list[list[float]] = []
        for x in offs:
            if lines and x - lines[-1][-1] <= 0.5 * width:
                lines[-1].append(x)
            else:
                lines.append([x])
        if len(lines) < 3:
            continue
        centres = np.array([float(np.mean(line)) for line in lines])
        gaps = np.diff(centres)
        mean_gap = float(gaps.mean())
        if mean_gap <= 0 or float(np.max(np.abs(gaps - mean_gap))) > SPACING_CV * mean_gap:
            continue
        if width > SET_MAX_WIDTH_FRACTION * mean_gap:  # bays side by side, not members between bays
            continue
        n_sets += 1
        for j in group:
            line = int(np.argmin(np.abs(centres - offset(shapes[j]))))
            found[j] = (len(lines), mean_gap, (n_sets, line))
        for j, sj in shapes.items():  # interrupted pieces too short to be bands themselves
            if j in found or kinds[j] != kinds[k] or sj.rect_fill < BAND_FILL:
                continue
            across = sj.width_px if _angle_diff(sj.orientation_deg, o) <= 2 * PARALLEL_DEG else sj.length_px
            miss = np.abs(centres - offset(sj))
            if float(miss.min()) <= 0.5 * width and max(across, width) <= WIDTH_RATIO * min(across, width):
                found[j] = (len(lines), mean_gap, (n_sets, int(np.argmin(miss))))
    return found


def find_lines(
    shapes: dict[int, Shape], kinds: dict[int, str], deltas: dict[int, float], *, pixel_m: float | None,
    exclude: set[int] | frozenset[int] = frozenset(), bboxes: dict[int, tuple[int, int, int, int]] | None = None,
) -> dict[int, tuple[int, float, tuple[int, int]]]:
    """Pieces of one straight band broken up by the segmentation (a stud cut into fragments).

    A piece of elongation >= 2 gives a direction; pieces of the same sign whose
    centre lies on that line (within half its width), whose extent across the
    line is at most twice its width, and that follow one another with gaps of at
    most 3 widths + 4 px form a line; a longer gap is bridged when other anomalies'
    bounding boxes (``bboxes``: row0, col0, row1, col1) cover at least 80 % of it (a
    stud running behind a header). A line
    of at least two pieces spanning at least 5 widths, whose pieces have similar
    contrasts (spread <= 0.35 × the mean), is a band.

    Returns
    -------
    dict
        key -> (pieces in the line, span / width, (-1, line number)).
    """
    pieces = [
        k for k, s in shapes.items()
        if k not in exclude and s.rect_fill >= 0.4 and (pixel_m is None or s.width_px * pixel_m <= BAND_MAX_WIDTH_M)
    ]
    pieces.sort(key=lambda k: (-shapes[k].length_px, k))
    found: dict[int, tuple[int, float, tuple[int, int]]] = {}
    n_lines = 0
    for k in pieces:
        sk = shapes[k]
        if k in found or sk.elongation < LINE_MIN_ELONGATION:
            continue
        th = math.radians(sk.orientation_deg)
        cos_t, sin_t = math.cos(th), math.sin(th)
        w = sk.width_px
        off_k = -sin_t * sk.centroid_col + cos_t * sk.centroid_row
        spans = []
        for j in pieces:
            sj = shapes[j]
            if j in found or kinds[j] != kinds[k]:
                continue
            # extents of the piece across and along the line (a small fragment's own axis is noise)
            tilt = math.radians(_angle_diff(sj.orientation_deg, sk.orientation_deg))
            across = sj.length_px * math.sin(tilt) + sj.width_px * math.cos(tilt)
            length = sj.length_px * math.cos(tilt) + sj.width_px * math.sin(tilt)
            if across > WIDTH_RATIO * w:
                continue
            if abs(-sin_t * sj.centroid_col + cos_t * sj.centroid_row - off_k) > max(0.5 * w, 1.5):
                continue
            along = cos_t * sj.centroid_col + sin_t * sj.centroid_row
            spans.append((along - 0.5 * length, along + 0.5 * length, j))
        spans.sort()
        # the chain of pieces through k, allowing small gaps
        tol = LINE_GAP_WIDTHS * w + 4.0
        members = {j for _, _, j in spans}

        def covered(a: float, b: float) -> bool:
            if bboxes is None or b <= a:
                return False
            pos = np.arange(a, b, 2.0)
            rows = sin_t * pos + cos_t * off_k
            cols = cos_t * pos - sin_t * off_k
            hit = np.zeros(pos.size, bool)
            for j, (r0, c0, r1, c1) in bboxes.items():
                if j not in members:
                    hit |= (rows >= r0) & (rows < r1) & (cols >= c0) & (cols < c1)
            return bool(hit.mean() >= 0.8)

        chains: list[list[tuple[float, float, int]]] = []
        for item in spans:
            end = max(e for _, e, _ in chains[-1]) if chains else 0.0
            if chains and (item[0] - end <= tol or covered(end, item[0])):
                chains[-1].append(item)
            else:
                chains.append([item])
        chain = next(c for c in chains if any(j == k for _, _, j in c))
        if len(chain) < 2:
            continue
        span = max(e for _, e, _ in chain) - min(b for b, _, _ in chain)
        if span / w < BAND_ELONGATION:
            continue
        d = np.array([deltas[j] for _, _, j in chain])
        if float(d.std()) > NONUNIFORM * abs(float(d.mean())):
            continue
        n_lines += 1
        for _, _, j in chain:
            found[j] = (len(chain), float(span / w), (-1, n_lines))
    return found


def classify_cause(
    shape: Shape,
    *,
    kind: str,
    view: str,
    delta_k: float,
    mean_c: float,
    threshold_k: float,
    pixel_m: float | None,
    regular_set: tuple[int, float, tuple[int, int]] | None,
    delta_air_k: float | None,
    sky_limit_c: float | None,
    line: tuple[int, float, tuple[int, int]] | None = None,
) -> tuple[str, str]:
    """Cause and a short reason for one anomaly (rules in docs/analysis.md, in this order)."""
    width_m = None if pixel_m is None else shape.width_px * pixel_m
    width_txt = f", width {1000 * width_m:.0f} mm" if width_m is not None else ""
    # a framing member, plate, slab edge or lintel is uniform along its length; a regular
    # parallel set is accepted as framing even when its members vary
    weak = delta_air_k is not None and delta_air_k > 0 and abs(delta_k) < PARTIAL_FRACTION * delta_air_k
    band = (
        (_is_band(shape, width_m, BAND_ELONGATION) and shape.uniform)
        or (weak and _is_band(shape, width_m, WEAK_BAND_ELONGATION) and shape.uniform)
        or (regular_set is not None and shape.rect_fill >= BAND_FILL)
        or line is not None
    )
    if regular_set is not None and band:
        n, gap_px = regular_set[0], regular_set[1]
        gap = f"{gap_px * pixel_m:.2f} m" if pixel_m is not None else f"{gap_px:.0f} px"
        band_reason = f"one of {n} parallel {kind} bands at regular {gap} spacing: framing members (studs, joists)"
        if pixel_m is not None and not (STUD_SPACING_M[0] <= gap_px * pixel_m <= STUD_SPACING_M[1]):
            band_reason += " (spacing outside the usual 400-600 mm centres)"
        # regular framing is part of the construction, not a fault (REFERENCE-VALUES §4.2, common practice)
        band_reason += "; expected in framed construction: repair only a member clearly colder than its neighbours"
    elif line is not None:
        band_reason = (
            f"long narrow straight {kind} band in {line[0]} pieces (length/width {line[1]:.1f}{width_txt}): "
            "stud, plate, slab edge or lintel"
        )
    else:
        band_reason = (
            f"long narrow straight {kind} band (length/width {shape.elongation:.1f}{width_txt}): "
            "stud, plate, slab edge or lintel"
        )
        if shape.elongation < BAND_ELONGATION:
            band_reason += "; its weak contrast suits a timber or steel member better than an empty cavity"

    if view == "roof":
        if kind == "warm":
            if band:
                return "thermal_bridge", band_reason + " on a roof; flashings or extra plies can look alike"
            return "moisture", (
                "warm area on a roof at night: retained heat of wet insulation (ASTM C1153 signature); "
                "confirm with cores or a moisture meter"
            )
        if sky_limit_c is not None and mean_c < sky_limit_c - threshold_k:
            return "unclassified", (
                f"colder ({mean_c:.1f} °C) than a fully insulated surface under this sky and air could be "
                f"({sky_limit_c:.1f} °C): conduction cannot explain it; likely a low-emissivity patch reflecting the sky"
            )
        if shape.sharp and shape.rect_fill >= 0.8:
            return "unclassified", (
                "cold patch with sharp straight edges on a roof: typical of a low-emissivity material "
                "(metal, flashing) reflecting the cold sky, not of moisture"
            )
        return "unclassified", (
            "cold area on a roof at night: drier or thicker insulation, ballast or shading; "
            "not a moisture signature"
        )

    expected = "cold" if view == "interior" else "warm"
    if kind != expected:
        if view == "interior":
            return "unclassified", (
                "warm seen from inside: a heat source (pipe, flue, appliance) or solar gain, not a heat-loss defect"
            )
        return "unclassified", (
            "cold seen from outside: sky reflection, shading or evaporative cooling of a damp surface; "
            "not a heat-loss signature"
        )
    if band:
        return "thermal_bridge", band_reason
    side = "inside" if view == "interior" else "outside"
    if shape.streaky and shape.diffuse:
        flow = "infiltration" if view == "interior" else "exfiltration"
        return "air_leakage", (
            f"streaky or fan-shaped {kind} pattern with diffuse edges seen from {side}: air {flow} at a joint "
            "or opening; confirm under depressurisation"
        )
    if pixel_m is not None and shape.length_px * pixel_m < SMALL_SPOT_M:
        return "unclassified", (
            f"small {kind} spot ({1000 * shape.length_px * pixel_m:.0f} mm across) seen from {side}: too small to "
            "tell a point thermal bridge (fixing, tie, nail plate) from a gap in the insulation"
        )
    partial = ""
    if delta_air_k is not None and delta_air_k > 0 and abs(delta_k) < PARTIAL_FRACTION * delta_air_k:
        partial = f"; weak contrast ({abs(delta_k):.1f} K at {delta_air_k:.0f} K inside-outside): partial-depth void or compressed insulation"
    if shape.compact:
        edge = "sharp" if shape.sharp else "soft"
        return "missing_insulation", (
            f"compact {kind} area seen from {side} (fill {shape.rect_fill:.2f}, {edge} edges): "
            f"missing or displaced insulation{partial}"
        )
    if shape.diffuse:
        return "unclassified", (
            f"irregular {kind} area with diffuse edges seen from {side}: air leakage or damp; "
            "check under depressurisation or with a moisture meter"
        )
    return "missing_insulation", (
        f"irregular sharp-edged uniform {kind} area seen from {side}: void in loose or settled fill{partial}"
    )
