"""The cause rules: shape features and framing -> ``(cause, reason)``.

Every rule is a plain threshold on a feature computed from the anomaly's pixels
(:mod:`._shape`) or on its place in a framing pattern (:mod:`._framing`); the
thresholds are module constants, documented in ``docs/analysis.md``. The first
matching rule wins and returns ``(cause, reason)``.
"""

from __future__ import annotations

from ._bridges import GeometricProfile
from ._framing import BAND_ELONGATION, BAND_FILL, STUD_SPACING_M, LineInfo, is_band
from ._shape import FAN_TAPER, Shape

__all__ = ["classify_cause", "GEOMETRIC_REASON", "framing_summary_reason", "FRAMING_EXPECTED", "GLAZING_REASON", "GLAZING_FILL", "WEAK_BAND_ELONGATION", "SMALL_SPOT_M", "PARTIAL_FRACTION", "STUD_SPACING_M",
           "NARROW_LINE_M", "NARROW_ELONGATION", "DAMP_BASE_CONTACT", "DAMP_ROUGHNESS_M", "DAMP_ROUGHNESS_PX", "DAMP_TOP_CONTACT", "DAMP_REASON"]

WEAK_BAND_ELONGATION = 3.0  # a shorter band counts when its contrast is weak (a timber header, not an empty cavity)
SMALL_SPOT_M = 0.10  # a compact spot smaller than this across is not judged as missing insulation
PARTIAL_FRACTION = 0.10  # |contrast| / (T_i − T_e) below which a void is partial-depth
NARROW_LINE_M = 0.12  # a cold line at most this wide is a member or a gap, not a void (members are 45-100 mm)
NARROW_ELONGATION = 3.0
DAMP_BASE_CONTACT = 0.5  # a damp base runs along the frame's bottom edge over at least half its width
DAMP_TOP_CONTACT = 0.3  # a patch hanging from the frame's top edge over at least 30 % of its width
DAMP_ROUGHNESS_M = 0.015  # a tide line wavers about a straight line by at least this (robust spread) ...
DAMP_ROUGHNESS_PX = 2.0  # ... and by at least this many pixels (a straight edge measures about 0.3 px)
DAMP_REASON = "rising or penetrating damp: confirm with a moisture meter"
GLAZING_FILL = 0.85  # a pane fills its rectangle
GLAZING_REASON = "likely glazing: confirm or exclude with a zone"
#: Words every geometric bridge's reason holds (corners and junctions are never missing insulation).
GEOMETRIC_REASON = "geometric thermal bridge: external corner or wall/floor/ceiling junction"
#: Words that mark framing as expected construction (the report's ranking leaves it unranked).
FRAMING_EXPECTED = "expected in framed construction: repair only a member clearly colder than its neighbours"


def framing_summary_reason(n_members: int, spacing_px: float, *, kind: str, pixel_m: float | None,
                           width_px: float) -> str:
    """Reason of the one anomaly that stands for a regular set of framing members in an image."""
    gap = f"{spacing_px * pixel_m:.2f} m" if pixel_m is not None else f"{spacing_px:.0f} px"
    width = f", about {1000 * width_px * pixel_m:.0f} mm wide" if pixel_m is not None else ""
    reason = (f"{n_members} parallel {kind} bands at regular {gap} spacing{width}, summarised as one anomaly: "
              "framing members (studs, joists, rafters); area, length and heat summed, psi per metre of member")
    if pixel_m is not None and not (STUD_SPACING_M[0] <= spacing_px * pixel_m <= STUD_SPACING_M[1]):
        reason += " (spacing outside the usual 400-600 mm centres)"
    return reason + "; " + FRAMING_EXPECTED


def classify_cause(
    shape: Shape,
    *,
    kind: str,
    view: str,
    delta_k: float,
    mean_c: float,
    threshold_k: float,
    pixel_m: float | None,
    regular_set: LineInfo | None,
    delta_air_k: float | None,
    sky_limit_c: float | None,
    line: LineInfo | None = None,
    contact: dict[str, float] | None = None,
    heat_flow: str = "horizontal",
    detected: bool = False,
    geometric: GeometricProfile | None = None,
) -> tuple[str, str]:
    """Cause and a short reason for one anomaly (rules in docs/analysis.md, in this order).

    Parameters
    ----------
    shape : Shape
        Features of the anomaly's main region.
    kind : {"cold", "warm"}
        Sign of its contrast.
    view : {"interior", "exterior", "roof"}
        Side the camera looks at.
    delta_k, mean_c : float
        Contrast against the local sound reference (K) and mean temperature (°C).
    threshold_k : float
        The image's significance threshold, K.
    pixel_m : float or None
        One pixel's side on the surface, m (None without geometry).
    regular_set, line : LineInfo or None
        Its place in a regular parallel set of bands or in a straight band of pieces.
    delta_air_k : float or None
        Inside minus outside air temperature when positive, K.
    sky_limit_c : float or None
        Roofs: the temperature of a surface with no conduction from below, °C.
    contact : dict, optional
        Share of the frame's ``"top"`` and ``"bottom"`` edge columns the anomaly reaches
        (over its own width).
    heat_flow : {"horizontal", "upward", "downward"}
        A ceiling (upward) is below a roof or loft.
    detected : bool
        The anomaly was found by its contrast alone (no segmented outline): a narrow soft line
        is then a member or a gap (its half-peak outline is the width of a blurred member).
    geometric : GeometricProfile or None
        Its cross-profile when it is a straight band across the frame fading smoothly and evenly to
        both sides (:func:`._bridges.geometric_profile`): a corner or junction.

    Returns
    -------
    (str, str)
        One of :data:`irseg.vocabulary.CAUSES` and the reason.
    """
    width_m = None if pixel_m is None else shape.width_px * pixel_m
    # a framing member, plate, slab edge or lintel is uniform along its length; a regular
    # parallel set is accepted as framing even when its members vary
    weak = delta_air_k is not None and delta_air_k > 0 and abs(delta_k) < PARTIAL_FRACTION * delta_air_k
    band = (
        (is_band(shape, width_m, BAND_ELONGATION) and shape.uniform)
        or (weak and is_band(shape, width_m, WEAK_BAND_ELONGATION) and shape.uniform)
        or (regular_set is not None and shape.rect_fill >= BAND_FILL)
        or line is not None
    )
    band_reason = _band_reason(shape, kind=kind, pixel_m=pixel_m, regular_set=regular_set if band else None,
                               line=line)
    if view == "roof":
        return _roof_cause(shape, kind=kind, band=band, band_reason=band_reason, mean_c=mean_c,
                           threshold_k=threshold_k, sky_limit_c=sky_limit_c)
    expected = "cold" if view == "interior" else "warm"
    if kind != expected:
        if view == "interior":
            return "unclassified", (
                "warm seen from inside: a heat source (pipe, flue, appliance) or solar gain, not a heat-loss defect"
            )
        if shape.sharp and shape.rect_fill >= GLAZING_FILL and shape.uniform:
            # glass (emissivity about 0.84) reflects the cold sky: a uniform, straight-edged cold rectangle
            return "unclassified", (
                f"{GLAZING_REASON}; uniform straight-edged cold rectangle seen from outside (fill "
                f"{shape.rect_fill:.2f}): glass reflecting the sky, not a heat-loss signature"
            )
        return "unclassified", (
            "cold seen from outside: sky reflection, shading or evaporative cooling of a damp surface; "
            "not a heat-loss signature"
        )
    if geometric is not None:
        side = "inside" if view == "interior" else "outside"
        a, b = sorted(geometric.half_m)
        return "thermal_bridge", (
            f"straight {kind} band across the frame seen from {side}, its contrast ({geometric.peak_k:.1f} K) fading "
            f"smoothly and evenly to both sides (half of it at {a:.2f} and {b:.2f} m) with no edge or plateau: "
            f"{GEOMETRIC_REASON} (or a slab edge or beam behind the line); heat and psi against the plane wall on "
            "both sides"
        )
    if band:
        return "thermal_bridge", band_reason
    damp = _damp(shape, view=view, pixel_m=pixel_m, contact=contact or {}, heat_flow=heat_flow)
    if damp is not None:
        return "moisture", damp
    return _wall_cause(shape, kind=kind, view=view, delta_k=delta_k, pixel_m=pixel_m, delta_air_k=delta_air_k,
                       soft_line=detected)


def _band_reason(
    shape: Shape, *, kind: str, pixel_m: float | None, regular_set: LineInfo | None, line: LineInfo | None
) -> str:
    """Why a band is a framing member, plate, slab edge or lintel (``regular_set`` only when it is a band)."""
    width_m = None if pixel_m is None else shape.width_px * pixel_m
    width_txt = f", width {1000 * width_m:.0f} mm" if width_m is not None else ""
    if regular_set is not None:
        n, gap_px = regular_set[0], regular_set[1]
        gap = f"{gap_px * pixel_m:.2f} m" if pixel_m is not None else f"{gap_px:.0f} px"
        reason = f"one of {n} parallel {kind} bands at regular {gap} spacing: framing members (studs, joists)"
        if pixel_m is not None and not (STUD_SPACING_M[0] <= gap_px * pixel_m <= STUD_SPACING_M[1]):
            reason += " (spacing outside the usual 400-600 mm centres)"
        # regular framing is part of the construction, not a fault (common practice)
        return reason + "; " + FRAMING_EXPECTED
    if line is not None:
        return (
            f"long narrow straight {kind} band in {line[0]} pieces (length/width {line[1]:.1f}{width_txt}): "
            "stud, plate, slab edge, lintel, corner or junction"
        )
    reason = (
        f"long narrow straight {kind} band (length/width {shape.elongation:.1f}{width_txt}): "
        "stud, plate, slab edge, lintel, corner or junction"
    )
    if shape.elongation < BAND_ELONGATION:
        reason += "; its weak contrast suits a timber or steel member better than an empty cavity"
    return reason


def _roof_cause(
    shape: Shape, *, kind: str, band: bool, band_reason: str, mean_c: float, threshold_k: float,
    sky_limit_c: float | None,
) -> tuple[str, str]:
    """Roof rules: warm at night is wet insulation (ASTM C1153), cold is not a moisture signature."""
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


def _damp(shape: Shape, *, view: str, pixel_m: float | None, contact: dict[str, float],
          heat_flow: str) -> str | None:
    """Moisture seen from inside (cold, not a band): the reason, or None.

    - a cold zone along the base of the wall (it reaches the frame's bottom edge over at least half
      of its width) whose upper boundary wavers like a tide line (robust spread about a straight
      line of at least 15 mm and 2 px), not a fan: rising damp; missing insulation fills bays and
      ends in straight edges, settled fill leaves its void at the *top* of a bay;
    - a cold patch on a wall with a soft irregular outline (diffuse, not compact), not a fan or a
      streak from a gap, that hangs from the frame's top edge (it reaches it over at least 30 % of its
      width): penetrating damp below a roof, gutter or pipe run. On a ceiling a damp patch is not
      told from a soft void by its outline, so the rule does not apply there.
    """
    if view != "interior":
        return None
    rough_px = shape.upper_roughness_px
    wavy = rough_px >= DAMP_ROUGHNESS_PX and (pixel_m is None or rough_px * pixel_m >= DAMP_ROUGHNESS_M)
    if contact.get("bottom", 0.0) >= DAMP_BASE_CONTACT and wavy and shape.taper < FAN_TAPER:
        wave = f"{1000 * rough_px * pixel_m:.0f} mm" if pixel_m is not None else f"{rough_px:.0f} px"
        return (f"cold zone along the base of the wall, its upper boundary wavering by {wave} like a tide "
                f"line: {DAMP_REASON}")
    hanging = contact.get("top", 0.0) >= DAMP_TOP_CONTACT and heat_flow != "upward"
    if hanging and shape.diffuse and not shape.compact and shape.taper < FAN_TAPER and not shape.fades_from_end:
        return (f"cold patch with a soft irregular outline hanging from the top of the frame, below a roof, "
                f"gutter or pipe run: {DAMP_REASON}")
    return None


def _wall_cause(
    shape: Shape, *, kind: str, view: str, delta_k: float, pixel_m: float | None, delta_air_k: float | None,
    soft_line: bool = False,
) -> tuple[str, str]:
    """Wall and ceiling rules for a heat-loss sign that is not a band: leakage, narrow line, spot, void."""
    side = "inside" if view == "interior" else "outside"
    if shape.streaky and shape.diffuse:
        flow = "infiltration" if view == "interior" else "exfiltration"
        return "air_leakage", (
            f"streaky or fan-shaped {kind} pattern with diffuse edges seen from {side}: air {flow} at a joint "
            "or opening; confirm under depressurisation"
        )
    if (soft_line and pixel_m is not None and shape.width_px * pixel_m <= NARROW_LINE_M
            and shape.elongation >= NARROW_ELONGATION):
        return "thermal_bridge", (
            f"narrow {kind} line ({1000 * shape.width_px * pixel_m:.0f} mm wide, length/width "
            f"{shape.elongation:.1f}) seen from {side}: a member (stud, joist, plate) or a gap between boards"
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
