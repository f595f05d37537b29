"""The survey's ranking rule: which anomaly to act on first (a leaf: standard library and ``_table``).

The rule, as the report and the guide state it:

1. An anomaly the review rejected, and one whose cause is expected in the construction (a framing
   member in a regular set of studs or joists: its reason says "expected in framed construction"),
   is not ranked; the report lists them apart.
2. Mould risk first (``mould_risk`` true), whatever the cause.
3. Then by estimated annual energy (kWh/year, largest first) where that estimate is meaningful:
   a known, positive figure whose low-high band spans at most a factor of :data:`MAX_BAND_RATIO`.
4. Then, by area (largest first), the anomalies whose energy estimate is not meaningful: moisture
   (the heat figure of a wet area is an order of magnitude at best) and every anomaly whose band
   is wider than the factor, or that has no heat figure.

Inside each tier ties fall back to area in m², then pixels, then the order given. The tier is
recorded as the anomaly's :func:`rank_basis` so the report can say why a row sits where it does.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace

from ..vocabulary import REPEAT_MARK
from ._table import SurveyAnomaly

__all__ = ["MAX_BAND_RATIO", "EXPECTED_MARK", "is_expected", "is_repeat", "is_ranked", "rank_basis", "rank_key", "rank_anomalies"]

#: Widest low-high band (high / low of the heat-flow band, which the kWh band follows) for which the
#: energy estimate orders anomalies.
MAX_BAND_RATIO = 3.0

#: Words of a cause's reason that mark an anomaly expected in the construction (analysis._classify).
EXPECTED_MARK = "expected in framed construction"


def _finite(value: object) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def is_expected(record: SurveyAnomaly) -> bool:
    """True for an anomaly expected in the construction (a framing member of a regular set)."""
    return EXPECTED_MARK in (record.reason or "")


def is_repeat(record: SurveyAnomaly) -> bool:
    """True for an anomaly of a pressurised image whose pair's ambient image counts the same defect."""
    return REPEAT_MARK in (record.reason or "")


def is_ranked(record: SurveyAnomaly) -> bool:
    """True unless the review rejected the anomaly, it is expected in the construction, or it repeats a view."""
    return record.review != "rejected" and not is_expected(record) and not is_repeat(record)


def energy_is_meaningful(record: SurveyAnomaly) -> bool:
    """A known, positive kWh/year of a cause other than moisture, band within :data:`MAX_BAND_RATIO`."""
    kwh, low, high = (_finite(v) for v in (record.excess_kwh_year, record.excess_low_w, record.excess_high_w))
    if record.cause == "moisture" or kwh is None or kwh <= 0:
        return False
    if low is None or high is None:
        return False
    return low > 0 and high / low <= MAX_BAND_RATIO


def rank_basis(record: SurveyAnomaly) -> str:
    """``"mould risk"``, ``"energy"`` or ``"area"``: the tier that ranks the anomaly (``"—"`` if unranked)."""
    if not is_ranked(record):
        return "—"
    if record.mould_risk is True:
        return "mould risk"
    return "energy" if energy_is_meaningful(record) else "area"


def rank_key(record: SurveyAnomaly) -> tuple:
    """Key for ``sorted``: tier, then kWh/year (energy tier) or area, largest first."""
    tier = {"mould risk": 0, "energy": 1, "area": 2}.get(rank_basis(record), 3)
    energy = _finite(record.excess_kwh_year) if energy_is_meaningful(record) else None
    area_m2, area_px = _finite(record.area_m2), _finite(record.area_px)
    return (
        tier,
        0 if energy is not None else 1,
        -(energy or 0.0),
        area_m2 is None,
        -(area_m2 or 0.0),
        -(area_px or 0.0),
    )


def rank_anomalies(anomalies: Sequence[SurveyAnomaly]) -> tuple[SurveyAnomaly, ...]:
    """The anomalies in the order given, ``rank`` set to 1..k by :func:`rank_key` (None when unranked).

    Ties keep the order given.
    """
    ranked = [i for i, a in enumerate(anomalies) if is_ranked(a)]
    order = sorted(ranked, key=lambda i: (rank_key(anomalies[i]), i))
    rank = {i: k for k, i in enumerate(order, start=1)}
    return tuple(replace(a, rank=rank.get(i)) for i, a in enumerate(anomalies))
