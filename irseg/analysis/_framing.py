"""Framing members: regular parallel sets of bands and straight bands cut into pieces.

A stud, joist or rafter shows as a long narrow straight band; a segmentation may cut
one member into pieces where other anomalies cross it. Both searches return, per
anomaly key, a :data:`LineInfo` ``(pieces or lines, spacing or span, (set, line))``
so that the pieces of one member can be measured as one anomaly. Thresholds are
module constants, documented in ``docs/analysis.md``.
"""

from __future__ import annotations

import math

import numpy as np

from ._shape import FAN_TAPER, NONUNIFORM, Shape

__all__ = [
    "LineInfo",
    "is_band",
    "angle_diff",
    "find_regular_sets",
    "find_lines",
    "BAND_ELONGATION",
    "BAND_FILL",
    "BAND_MAX_WIDTH_M",
    "STUD_SPACING_M",
    "COLDER_MEMBER_FACTOR",
]

#: ``(members, spacing or span, (set number, line number))`` of one band: set number -1 for a
#: line found by :func:`find_lines`; pieces with the same ``(set, line)`` are one member.
LineInfo = tuple[int, float, tuple[int, int]]

BAND_ELONGATION = 5.0  # length/width of a "long narrow band"
SET_ELONGATION = 2.5  # a shorter band still counts when it belongs to a regular parallel set
LINE_MIN_ELONGATION = 2.0  # a piece needs this to give a line its direction
LINE_GAP_WIDTHS = 3.0  # pieces of one line are at most this many widths apart (plus 4 px)
BAND_FILL = 0.5  # area / minimum-area rectangle of a straight band (segmented outlines are ragged)
WIDTH_RATIO = 2.0  # members of a set differ in mean width by at most this factor
BAND_MAX_WIDTH_M = 0.35  # wider bands are not framing members, lintels or slab edges
PARALLEL_DEG = 10.0
SPACING_CV = 0.25
SET_MAX_WIDTH_FRACTION = 0.35  # members are narrow against their spacing (45-100 mm at 400-600 mm centres)
STUD_SPACING_M = (0.30, 0.70)  # usual centres of studs, joists and rafters (400-600 mm, common practice)
MAX_GAP_MEMBERS = 3  # a set may miss members: a gap of up to three spacings
PIECE_MISS_WIDTHS = 1.0  # a short piece joins a member's line when its centre is at most this many widths off it
PIECE_FILL = 0.4  # ... and fills its rectangle this much (a soft detection along a member is ragged)
COLDER_MEMBER_FACTOR = 1.6  # a member whose contrast exceeds the set's median by this factor stands alone


def is_band(shape: Shape, width_m: float | None, elongation: float) -> bool:
    """Straight (fills its rectangle), narrow (elongated, at most 0.35 m wide when known)."""
    return (
        shape.elongation >= elongation
        and shape.rect_fill >= BAND_FILL
        and shape.taper < FAN_TAPER
        and (width_m is None or width_m <= BAND_MAX_WIDTH_M)
    )


def angle_diff(a: float, b: float) -> float:
    d = abs(a - b) % 180.0
    return min(d, 180.0 - d)


def find_regular_sets(
    shapes: dict[int, Shape], kinds: dict[int, str], *, pixel_m: float | None,
    deltas: dict[int, float] | None = None,
) -> dict[int, LineInfo]:
    """Parallel bands of the same sign at regular spacing (studs, joists, rafters).

    Bands (elongation >= 2.5, straight) parallel within 10° and of similar mean
    width (within a factor 2) are grouped; bands on
    the same line (a member interrupted by another anomaly) merge into one line.
    At least three lines whose gaps are one, two or three times a common spacing within 25 %
    (members hidden behind a defect or a window leave a wider gap), with a width of at
    most 0.35 × the spacing, form a set; two lines form one when the pixel size is
    known and their spacing is a usual framing centre (0.30-0.70 m). Pieces
    lying on a member's line (within one width of it, filling 40 % of their rectangle) with the
    member's width join the set too.
    With ``deltas`` (contrast per key, K), a member of a set of at least three whose
    contrast exceeds 1.6 × the members' median is left out of the set: a member clearly
    colder than its neighbours is its own anomaly.

    Returns
    -------
    dict
        key -> (lines in the set, mean spacing in px, (set number, line number)).
        Pieces with the same (set, line) are one member interrupted by other anomalies.
    """
    cand = [
        k for k, s in shapes.items()
        if is_band(s, None if pixel_m is None else s.width_px * pixel_m, SET_ELONGATION)
    ]
    cand.sort(key=lambda k: -shapes[k].area_px)  # long members give the best orientation
    found: dict[int, LineInfo] = {}
    n_sets = 0
    for k in cand:
        if k in found:
            continue
        o = shapes[k].orientation_deg
        w_k = shapes[k].width_px
        group = [
            j for j in cand
            if j not in found and kinds[j] == kinds[k] and angle_diff(shapes[j].orientation_deg, o) <= PARALLEL_DEG
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
        centres = np.array([float(np.mean(line)) for line in lines])
        mean_gap = _regular_spacing(np.diff(centres))
        if mean_gap is None or len(lines) < 2 or (len(lines) == 2 and not _framing_centre(mean_gap, pixel_m)):
            continue
        if width > SET_MAX_WIDTH_FRACTION * mean_gap:  # bays side by side, not members between bays
            continue
        if not _side_by_side(group, centres, shapes, th, offset):
            continue
        n_sets += 1
        for j in group:
            line = int(np.argmin(np.abs(centres - offset(shapes[j]))))
            found[j] = (len(lines), mean_gap, (n_sets, line))
        for j, sj in shapes.items():  # interrupted pieces too short to be bands themselves
            if j in found or kinds[j] != kinds[k] or sj.rect_fill < PIECE_FILL:
                continue
            across = sj.width_px if angle_diff(sj.orientation_deg, o) <= 2 * PARALLEL_DEG else sj.length_px
            miss = np.abs(centres - offset(sj))
            if (float(miss.min()) <= PIECE_MISS_WIDTHS * width
                    and max(across, width) <= WIDTH_RATIO * min(across, width)):
                found[j] = (len(lines), mean_gap, (n_sets, int(np.argmin(miss))))
        if deltas is not None and len(lines) >= 3:
            _drop_colder(found, n_sets, shapes, deltas)
    return found


def _side_by_side(group: list[int], centres: np.ndarray, shapes: dict[int, Shape], th: float, offset) -> bool:
    """Members of a set stand side by side: each line's reach along the common direction overlaps
    another line's (fragments strung out along one ragged edge, a damp zone's tide line, are no set)."""
    reach = np.full((centres.size, 2), [np.inf, -np.inf])
    for j in group:
        sh = shapes[j]
        line = int(np.argmin(np.abs(centres - offset(sh))))
        along = math.cos(th) * sh.centroid_col + math.sin(th) * sh.centroid_row
        reach[line] = min(reach[line, 0], along - 0.5 * sh.length_px), max(reach[line, 1], along + 0.5 * sh.length_px)
    for i in range(centres.size):
        others = np.delete(reach, i, axis=0)
        if not np.any((others[:, 0] < reach[i, 1]) & (others[:, 1] > reach[i, 0])):
            return False
    return True


def _regular_spacing(gaps: np.ndarray) -> float | None:
    """The members' spacing when every gap is 1, 2 or 3 times it (a member hidden by a defect or a
    window leaves a double gap) within :data:`SPACING_CV` (half of it when a gap is a multiple);
    None otherwise. At least one gap is single."""
    if gaps.size == 0 or float(gaps.min()) <= 0:
        return None
    base = float(gaps.min())
    k = np.rint(gaps / base)
    if float(k.max()) > MAX_GAP_MEMBERS:
        return None
    spacing = float(gaps.sum() / k.sum())
    # with a missing member the gaps must fit the multiples twice as closely (0.4 and 0.6 m alternating
    # would otherwise pass as 0.33 m centres with members missing)
    tolerance = SPACING_CV if float(k.max()) == 1 else 0.5 * SPACING_CV
    if float(np.max(np.abs(gaps - k * spacing))) > tolerance * spacing:
        return None
    return spacing


def _framing_centre(gap_px: float, pixel_m: float | None) -> bool:
    """A spacing of two members that is a usual framing centre (known pixel size only)."""
    return pixel_m is not None and gap_px > 0 and STUD_SPACING_M[0] <= gap_px * pixel_m <= STUD_SPACING_M[1]


def _drop_colder(found: dict[int, LineInfo], set_no: int, shapes: dict[int, Shape], deltas: dict[int, float]) -> None:
    """Members of set ``set_no`` clearly stronger in contrast than the set's median leave the set."""
    keys = [k for k, info in found.items() if info[2][0] == set_no]
    per_line: dict[int, list[int]] = {}
    for k in keys:
        per_line.setdefault(found[k][2][1], []).append(k)
    strength = {
        line: sum(abs(deltas[k]) * shapes[k].area_px for k in ks) / max(sum(shapes[k].area_px for k in ks), 1)
        for line, ks in per_line.items()
    }
    median = float(np.median(list(strength.values())))
    for line, ks in per_line.items():
        if strength[line] > COLDER_MEMBER_FACTOR * median:
            for k in ks:
                del found[k]


def find_lines(
    shapes: dict[int, Shape], kinds: dict[int, str], deltas: dict[int, float], *, pixel_m: float | None,
    exclude: set[int] | frozenset[int] = frozenset(), bboxes: dict[int, tuple[int, int, int, int]] | None = None,
) -> dict[int, LineInfo]:
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
    found: dict[int, LineInfo] = {}
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
            tilt = math.radians(angle_diff(sj.orientation_deg, sk.orientation_deg))
            across = sj.length_px * math.sin(tilt) + sj.width_px * math.cos(tilt)
            length = sj.length_px * math.cos(tilt) + sj.width_px * math.sin(tilt)
            if across > WIDTH_RATIO * w:
                continue
            # a piece with a direction of its own (elongated, longer than twice the member's width) runs
            # along the member's line: two fragments of a tide line meeting at an angle are no member
            if (sj.elongation >= LINE_MIN_ELONGATION and sj.length_px > WIDTH_RATIO * w
                    and math.degrees(tilt) > 2 * PARALLEL_DEG):
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
