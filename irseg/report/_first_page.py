"""The report's first page: the plain-language summary and the top actions (pure, no jinja2).

Figures here count the *defects*: the ranked anomalies, without the ones the review rejected
and without framing members expected in the construction (both listed apart in the report).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

from ..vocabulary import CAUSE_LABELS, CAUSES
from ._ranking import MAX_BAND_RATIO, rank_basis
from ._table import SurveyAnomaly

__all__ = ["ACTIONS", "TOP_ACTIONS", "summary_figures", "top_actions", "RANKING_RULE"]

#: How many ranked defects the first page turns into actions.
TOP_ACTIONS = 5

#: The first thing to do about each cause (plain words; every action starts with a check on site).
ACTIONS = {
    "missing_insulation": "open up and check the insulation; refill or refit where it is missing or displaced",
    "thermal_bridge": "check the detail (stud, lintel, slab edge); add insulation over it where practical",
    "air_leakage": "find the leak path (a pressure test helps) and seal it",
    "moisture": "find and stop the water source, check with a moisture meter, let the fabric dry out",
    "unclassified": "inspect on site to find the cause before any repair",
}

#: The ranking rule in the report's words (irseg.report._ranking).
RANKING_RULE = (
    "Rank 1 is the first to act on. Anomalies with a mould risk come first. The others follow by their "
    "estimated yearly energy loss (kWh/year), largest first, where that estimate is meaningful. Moisture, "
    f"and any anomaly whose low–high energy band spans more than a factor of {MAX_BAND_RATIO:g} (or that has "
    "no energy figure), is ranked after them by area, largest first: for these the energy figure is an order "
    "of magnitude at best. The column “by” says which rule placed each row. Framing members expected in "
    "the construction, anomalies seen again in the image of a pair taken under a pressure difference, and "
    "anomalies rejected by the review are not ranked; they are listed apart."
)


def _number(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def kwh_band(record: SurveyAnomaly) -> tuple[float | None, float | None]:
    """The kWh/year band: kWh/year scaled by the heat-flow band (the energy follows the heat flow)."""
    kwh, w, low, high = (_number(v) for v in (record.excess_kwh_year, record.excess_w,
                                              record.excess_low_w, record.excess_high_w))
    if kwh is None or w is None or low is None or high is None or w == 0:
        return None, None
    return kwh * low / w, kwh * high / w


def _sum(values: Sequence[float | None]) -> float | None:
    known = [v for v in values if v is not None]
    return math.fsum(known) if known else None


def summary_figures(defects: Sequence[SurveyAnomaly]) -> dict[str, Any]:
    """Counts by cause, total W and kWh/year with their bands, mould-risk locations."""
    by_cause = [(CAUSE_LABELS.get(c, c), n) for c in (*CAUSES, *sorted({str(a.cause) for a in defects} - set(CAUSES)))
                if (n := sum(1 for a in defects if str(a.cause) == c))]
    bands = [kwh_band(a) for a in defects]
    return {
        "count": len(defects),
        "by_cause": by_cause,
        "excess_w": _sum([_number(a.excess_w) for a in defects]),
        "excess_low_w": _sum([_number(a.excess_low_w) for a in defects]),
        "excess_high_w": _sum([_number(a.excess_high_w) for a in defects]),
        "excess_kwh_year": _sum([_number(a.excess_kwh_year) for a in defects]),
        "kwh_low": _sum([b[0] for b in bands]),
        "kwh_high": _sum([b[1] for b in bands]),
        "n_unmeasured": sum(1 for a in defects if _number(a.excess_w) is None),
        "n_mould": sum(1 for a in defects if a.mould_risk is True),
        "n_frsi": sum(1 for a in defects if a.mould_risk is not None),
        "n_area_ranked": sum(1 for a in defects if rank_basis(a) == "area"),
    }


def top_actions(defects: Sequence[SurveyAnomaly], titles: dict[str, str]) -> list[dict[str, Any]]:
    """The first :data:`TOP_ACTIONS` defects by rank, each with where, what and the first action."""
    out = []
    for a in sorted((d for d in defects if d.rank is not None), key=lambda d: d.rank)[:TOP_ACTIONS]:
        action = ACTIONS.get(str(a.cause), ACTIONS["unclassified"])
        if a.mould_risk is True:
            action = "mould risk: improve ventilation and heating of the room now; then " + action
        out.append({"record": a, "where": titles.get(a.image) or a.image, "action": action,
                    "basis": rank_basis(a), "kwh_band": kwh_band(a)})
    return out
