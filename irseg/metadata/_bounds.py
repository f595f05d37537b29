"""What a building survey can have: the accepted range of every metadata number, with its reason.

One table, :data:`BOUNDS`, is the home of every range: the schema checks values against it,
``docs/guide.md`` lists it key by key (a test keeps the two equal), and the radiometric
correction takes the camera-band limits and the plausible surface temperatures from here.
A range is as wide as real surveys need and no wider: a value outside it is a typing error,
a wrong unit or a file mixed up, and would otherwise reach the results as an absurd number
(a distance of 10⁶ m gives 10¹² W). Each reason names its source, or says "common practice"
when no single source sets the figure, or "from memory" when it was recalled, not read.

Leaf module: no imports from irseg, so the metadata schema, the radiometric correction and
the analysis can all share it.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "Bound",
    "BOUNDS",
    "bound_of",
    "SURFACE_C",
    "SURFACE_REASON",
    "BAND_LIMITS_UM",
    "MIN_AIR_DIFFERENCE_K",
    "OUTSIDE_SPREAD_K",
    "INSIDE_SPREAD_K",
]


@dataclass(frozen=True)
class Bound:
    """The accepted interval of one metadata number and why.

    Attributes
    ----------
    lo, hi : float or None
        Ends of the interval; None for an unbounded end.
    lo_open, hi_open : bool
        Whether an end is excluded.
    unit : str
        Unit shown after the interval in messages and in the guide ("" for a pure number).
    reason : str
        Why these ends: a source, or "common practice" / "from memory".
    """

    lo: float | None
    hi: float | None
    lo_open: bool
    hi_open: bool
    unit: str
    reason: str

    def contains(self, x: float) -> bool:
        """True when ``x`` lies in the interval."""
        if self.lo is not None and (x <= self.lo if self.lo_open else x < self.lo):
            return False
        return not (self.hi is not None and (x >= self.hi if self.hi_open else x > self.hi))

    def text(self) -> str:
        """The interval as written in messages and in the guide, e.g. ``(0, 150] m``."""
        left = "(" if self.lo_open else "["
        right = ")" if self.hi_open else "]"
        lo = "-inf" if self.lo is None else f"{self.lo:g}"
        hi = "inf" if self.hi is None else f"{self.hi:g}"
        return f"{left}{lo}, {hi}{right}" + (f" {self.unit}" if self.unit else "")


def _b(lo, hi, *, lo_open=False, hi_open=False, unit="", reason: str) -> Bound:
    return Bound(None if lo is None else float(lo), None if hi is None else float(hi), lo_open, hi_open, unit, reason)


#: The camera bands irseg corrects for, µm: a surface between −100 and +150 °C emits almost nothing
#: below 2 µm (Wien's displacement law, λ_max = 2898 µm·K / T, puts its peak at 7–17 µm), and thermal
#: cameras work at 3–5 or 7.5–14 µm and stop by 20 µm.
BAND_LIMITS_UM = (2.0, 20.0)

#: Temperatures a building survey can see, °C, after units, scale and offset and after the emissivity
#: correction: from a clear night sky seen beside or reflected in a roof (about −50 °C at mid latitudes,
#: colder in dry or polar climates: −100 °C leaves room for that, and still catches celsius values read
#: as kelvin, about −250 °C) to sun-heated dark roofing (about 80 °C) and hot pipes and flue outlets (up
#: to about 150 °C). Common practice; no single source.
SURFACE_C = (-100.0, 150.0)

#: Why :data:`SURFACE_C`, as said in messages.
SURFACE_REASON = "from a clear night sky to hot pipes and flue outlets"

#: Smallest inside-outside air difference that per-kelvin figures (kWh/year, f_Rsi) are divided by, K:
#: two air thermometers of ±0.5 K each (a usual accuracy, common practice) leave a smaller difference
#: unknown even in sign, and dividing by it gives any number.
MIN_AIR_DIFFERENCE_K = 1.0

#: Largest spread of the outside air temperature between images of one folder before a warning, K:
#: one survey session lasts an hour or two at night, when the outside air changes by a degree or two
#: (EN 13187 asks for steady conditions: within about ±10 K over the previous 24 h, from memory).
OUTSIDE_SPREAD_K = 3.0

#: Largest spread of the inside air temperature between images of one folder before a warning, K:
#: the heated rooms of one building differ by a few kelvin (bedrooms 16–18 °C, living rooms 20–22 °C,
#: common practice); more points to a typing error or an unheated room.
INSIDE_SPREAD_K = 5.0

_INSIDE_REASON = (
    "interiors from cold stores (about -30 °C) to hot plant rooms; heated rooms are 15-25 °C (common practice)"
)
_OUTSIDE_REASON = (
    "the coldest and hottest inhabited places reach about -60 °C and 55 °C "
    "(WMO weather extremes, from memory)"
)
_REFLECTED_REASON = (
    "a clear night sky reflects about -50 °C at mid latitudes, colder in dry or polar climates; "
    "sources hotter than 100 °C are screened, not entered (common practice)"
)
_WIND_REASON = (
    "32.7 m/s is hurricane force (Beaufort 12, WMO, from memory); no survey is made in it"
)

#: ``{section: {key: Bound}}`` for every numeric metadata key.
BOUNDS: dict[str, dict[str, Bound]] = {
    "camera": {
        "hfov_deg": _b(1, 120, unit="°", reason=(
            "thermal-camera lenses run from about 6° (telephoto) to about 90° (wide angle); beyond 120° "
            "the footprint of a pixel on a flat surface changes too much across the frame (common practice)")),
        "distance_m": _b(0, 150, lo_open=True, unit="m", reason=(
            "ground shots are taken at 0.5-30 m; drones fly below 120 m (EU Regulation 2019/947 open "
            "category, US 14 CFR 107: 400 ft, from memory), 150 m leaves room for a slant line of sight")),
        "pixel_m": _b(0, 1, lo_open=True, unit="m", reason=(
            "a pixel wider than 1 m on the surface resolves no building detail (common practice)")),
        "tilt_deg": _b(0, 80, unit="°", reason=(
            "the emissivity of non-metals falls beyond about 60° from the normal (common practice); "
            "beyond 80° the area correction 1/cos exceeds 5.8")),
        "scale": _b(-1000, 1000, unit="per count", reason=(
            "nonzero; radiometric exports use 0.001-0.1 K per count (common practice)")),
        "offset": _b(-1000, 1000, unit="", reason=(
            "raw × scale + offset is a temperature in °C or K, so the offset is within a few hundred "
            "(e.g. -273.15 to turn kelvin counts into °C)")),
        "netd_k": _b(0, 2, lo_open=True, unit="K", reason=(
            "uncooled microbolometers have 0.03-0.1 K and cooled sensors 0.02 K or better (common "
            "practice); 2 K leaves room for a worn sensor, larger would make every contrast insignificant")),
        "export_emissivity": _b(0, 1, lo_open=True, reason=(
            "an emissivity is a fraction: 1 - reflectance for an opaque surface (Kirchhoff's law)")),
        "export_reflected_c": _b(-100, 100, unit="°C", reason=_REFLECTED_REASON),
        "transmittance": _b(0.5, 1, unit="", reason=(
            "over the 150 m at most of a building or drone survey long-wave air transmittance stays "
            "above about 0.9 (common practice); below 0.5 the correction would magnify noise"
            " more than two-fold")),
        "atmosphere_c": _b(-60, 60, unit="°C", reason=_OUTSIDE_REASON),
    },
    "surface": {
        "emissivity": _b(0, 1, lo_open=True, reason=(
            "a fraction: 1 - reflectance for an opaque surface (Kirchhoff's law); irseg warns below 0.5, "
            "where the reading is mostly reflection")),
        "reflected_c": _b(-100, 100, unit="°C", reason=_REFLECTED_REASON),
        "emissivity_uncertainty_abs": _b(0, 0.2, reason=(
            "±0.2 already spans most building materials (0.75-0.95, common practice)")),
    },
    "air": {
        "inside_c": _b(-50, 60, unit="°C", reason=_INSIDE_REASON),
        "outside_c": _b(-60, 60, unit="°C", reason=_OUTSIDE_REASON),
        "wind_m_s": _b(0, 40, unit="m/s", reason=_WIND_REASON),
    },
    "analysis": {
        "degree_days": _b(0, 15000, unit="K·d", reason=(
            "0 is a climate without heating; the coldest inhabited places have about 12 000 K·d a year "
            "(base 18 °C, from memory; Finland averages 5665, Eurostat)")),
        "frsi_limit": _b(0.4, 0.95, reason=(
            "national limits are 0.70 (DIN 4108-2) and 0.75 (UK practice); ISO 13788 derives the limit "
            "from the climate and the humidity class, within about 0.4-0.95 (from memory)")),
        "distance_uncertainty_rel": _b(0, 1, reason=(
            "±100 % means the distance is unknown: leave the geometry out instead")),
        "h_uncertainty_rel": _b(0, 1, reason=(
            "±100 % means the coefficient is unknown; ±20-30 % is usual for surface coefficients "
            "(common practice)")),
        "max_wind_m_s": _b(0, 40, unit="m/s", reason=_WIND_REASON),
        "min_delta_t_k": _b(0, 50, unit="K", reason=(
            "EN 13187 and ASTM C1060 ask for 10 K; a heated building in the coldest climates sees about "
            "70 K, so a limit above 50 K would flag every survey")),
        "min_contrast_k": _b(0, 50, unit="K", reason=(
            "anomaly contrasts in building surveys are a few kelvin, seldom over 20 K (common practice); "
            "a limit above 50 K would hide every anomaly")),
    },
    "segment": {
        "noise_k": _b(0, 5, lo_open=True, unit="K", reason=(
            "camera noise is 0.03-0.1 K and a noisy export about 0.5 K (common practice); at 5 K no "
            "building anomaly of a few kelvin stands out")),
        "min_step_k": _b(0, 50, lo_open=True, unit="K", reason=(
            "steps in building thermograms are a few kelvin, seldom over 20 K (common practice); "
            "above 50 K no edge is found")),
        "min_feature_px": _b(1, 100, unit="px", reason=(
            "a feature of 100 px is a sixth of a 640-pixel frame; larger values merge every defect into "
            "its surroundings, and the clean-up of thin regions grows with the square of the value")),
    },
}


def bound_of(section: str, key: str) -> Bound:
    """The :class:`Bound` of ``[section] key`` (KeyError for a key without one)."""
    return BOUNDS[section][key]
