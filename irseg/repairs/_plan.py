"""The repair plan: repair items, their quantities, costs with bands, savings and payback.

Pure functions of the survey's frozen anomaly records (:class:`irseg.report.SurveyAnomaly`,
after the review) and the user's prices (:class:`irseg.types.Costs`). Nothing here reads a
file or loads a stage.

Formulas (the interface of issue 17):

- quantity: ``area_m2 × (1 + WORKING_MARGIN_REL)`` m² for missing insulation and moisture (the
  margin covers cutting out and making good around the measured area); a thermal bridge by its
  length ``length_m`` (m) when the record has one, else by area (m², with a note); one item per
  air leak;
- cost ``= quantity × unit cost``; ``cost_low = quantity_low × unit × (1 − u)``,
  ``cost_high = quantity_high × unit × (1 + u)`` with ``u`` the ``[costs] uncertainty`` and the
  quantity's band from the area's band (``area_low_m2``, ``area_high_m2``);
- saving ``= excess_kwh_year`` (the repair is taken to remove the measured excess), its band
  ``excess_kwh_year × excess_low_w / excess_w`` and ``× excess_high_w / excess_w`` (kWh ∝ W at
  fixed degree-days); none for moisture, whose first effect is damage, not energy;
- ``saving_per_year = saving × energy_price_per_kwh``; ``payback = cost / (saving × price)``,
  ``payback_low = cost_low / (saving_high × price)``, ``payback_high = cost_high / (saving_low × price)``;
  empty where the saving is unknown, not positive or not meaningful.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, fields
from typing import Any

from ..types import Costs
from ..vocabulary import REPEAT_MARK

__all__ = [
    "REPAIR_COLUMNS",
    "REPAIR_UNITS",
    "WORKING_MARGIN_REL",
    "FRAMING_MARK",
    "RepairItem",
    "RepairTotals",
    "RepairPlan",
    "is_repair_item",
    "survey_rank",
    "repair_plan",
    "repair_rows",
    "plan_to_json",
]

#: Columns of OUT/repairs.csv, in order (an interface).
REPAIR_COLUMNS = (
    "rank", "uid", "image", "title", "element", "cause", "quantity", "unit", "cost", "cost_low", "cost_high",
    "saving_kwh_year", "saving_kwh_year_low", "saving_kwh_year_high", "saving_per_year",
    "payback_years", "payback_low_years", "payback_high_years", "note",
)

#: Units of a quantity.
REPAIR_UNITS = ("m2", "m", "item")

#: Working margin added to a measured area for cutting out and making good around it (+20 %).
#: Common practice: opening up a wall, ceiling or roof to replace insulation is cut back to sound
#: material beyond the edge seen in the thermogram, and the measured edge is the half-contrast line.
WORKING_MARGIN_REL = 0.20

#: Words of the reason of a regular framing member (irseg.analysis): expected construction, no repair item.
FRAMING_MARK = "expected in framed construction"

#: The ``[costs]`` price of each cause and its unit.
_PRICE = {
    "missing_insulation": ("missing_insulation_per_m2", "m2"),
    "moisture": ("moisture_per_m2", "m2"),
    "thermal_bridge": ("thermal_bridge_per_m", "m"),
    "air_leakage": ("air_leakage_per_item", "item"),
}


@dataclass(frozen=True)
class RepairItem:
    """One repair item: a row of repairs.csv (field names are its columns) plus its quantity band.

    Attributes
    ----------
    rank : int
        1 = repair first (the order of the survey's defect ranking).
    uid, image, title, element, cause
        As in anomalies.csv.
    quantity : float or None
        In ``unit``; None when the area is not known (no geometry).
    unit : {"m2", "m", "item"}
    quantity_low, quantity_high : float or None
        The quantity's band (from the area's band; the quantity itself for lengths and items).
    cost, cost_low, cost_high : float or None
        In the survey's currency; None without a price for the cause or without a quantity.
    saving_kwh_year, saving_kwh_year_low, saving_kwh_year_high : float or None
        Heating energy the repair saves, kWh/year, and its band.
    saving_per_year : float or None
        ``saving_kwh_year × energy_price_per_kwh``.
    payback_years, payback_low_years, payback_high_years : float or None
    note : str
        What the quantity is and what is missing, in a few words.
    """

    rank: int
    uid: str | None
    image: str
    title: str | None
    element: str | None
    cause: str
    quantity: float | None
    unit: str
    cost: float | None = None
    cost_low: float | None = None
    cost_high: float | None = None
    saving_kwh_year: float | None = None
    saving_kwh_year_low: float | None = None
    saving_kwh_year_high: float | None = None
    saving_per_year: float | None = None
    payback_years: float | None = None
    payback_low_years: float | None = None
    payback_high_years: float | None = None
    note: str = ""
    quantity_low: float | None = None
    quantity_high: float | None = None


@dataclass(frozen=True)
class RepairTotals:
    """Sums over a set of repair items (an element, or the survey).

    Bands add end to end (the low ends together, the high ends together): the errors are taken
    to move together, which gives a wide, cautious band. Each sum skips the items whose value is
    unknown; ``n_unpriced`` and ``n_no_saving`` count them.
    """

    element: str | None
    count: int
    quantity_m2: float | None
    quantity_m: float | None
    quantity_item: float | None
    cost: float | None
    cost_low: float | None
    cost_high: float | None
    saving_kwh_year: float | None
    saving_kwh_year_low: float | None
    saving_kwh_year_high: float | None
    saving_per_year: float | None
    n_unpriced: int
    n_no_saving: int


@dataclass(frozen=True)
class RepairPlan:
    """The survey's repair plan: items ranked, totals per element and for the survey.

    Attributes
    ----------
    items : tuple of RepairItem
        Ranked, 1 first.
    by_element : tuple of RepairTotals
        One per ``[image] element`` in order of first appearance in the ranking; items without an
        element are summed under ``element = None``.
    totals : RepairTotals
    currency : str or None
    priced : bool
        True when ``[costs]`` gave any price.
    uncertainty : float or None
        The relative band on unit costs (None when not priced).
    """

    items: tuple[RepairItem, ...]
    by_element: tuple[RepairTotals, ...]
    totals: RepairTotals
    currency: str | None
    priced: bool
    uncertainty: float | None


def is_repair_item(anomaly: Any) -> bool:
    """True for an anomaly that becomes a repair item.

    Not an item: rejected by the review, unclassified (or without a cause), or a framing member of
    a regular set (its reason says "expected in framed construction"), or an anomaly of a pressurised
    image that the ambient image of the same view counts (:data:`irseg.vocabulary.REPEAT_MARK`).
    """
    cause = getattr(anomaly, "cause", None)
    if getattr(anomaly, "review", None) == "rejected" or cause not in _PRICE:
        return False
    reason = str(getattr(anomaly, "reason", "") or "")
    return FRAMING_MARK not in reason and REPEAT_MARK not in reason


def survey_rank(anomaly: Any) -> int | None:
    """The survey rank of a record: its ``rank`` field when it has one, else ``severity``."""
    value = getattr(anomaly, "rank", None) if hasattr(anomaly, "rank") else getattr(anomaly, "severity", None)
    return value if isinstance(value, int) and not isinstance(value, bool) else None


def _finite(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _quantity(a: Any) -> tuple[float | None, float | None, float | None, str, list[str]]:
    """``(quantity, low, high, unit, notes)`` of one anomaly."""
    cause = a.cause
    notes: list[str] = []
    if cause == "air_leakage":
        return 1.0, 1.0, 1.0, "item", ["one leak to seal"]
    if cause == "thermal_bridge":
        length = _finite(getattr(a, "length_m", None))
        if length is not None:
            return length, length, length, "m", [f"length {length:.2f} m"]
        notes.append("no length measured: quantified by area; priced per m only when the length is known")
    area = _finite(a.area_m2)
    if area is None:
        notes.append("area unknown (no camera geometry): give [camera] hfov_deg and distance_m")
        return None, None, None, "m2", notes
    k = 1.0 + WORKING_MARGIN_REL
    low, high = _finite(a.area_low_m2), _finite(a.area_high_m2)
    notes.insert(0, f"area {area:.3g} m² + {WORKING_MARGIN_REL:.0%} working margin")
    return area * k, (area if low is None else low) * k, (area if high is None else high) * k, "m2", notes


def _saving(a: Any) -> tuple[float | None, float | None, float | None, list[str]]:
    """``(kWh/year, low, high, notes)``: none for moisture, none without air temperatures."""
    if a.cause == "moisture":
        return None, None, None, ["moisture: damage first, no energy saving or payback; ranked as in the defect list"]
    kwh = _finite(a.excess_kwh_year)
    if kwh is None:
        return None, None, None, ["saving unknown (no air temperatures or no geometry)"]
    watts, low_w, high_w = (_finite(getattr(a, k)) for k in ("excess_w", "excess_low_w", "excess_high_w"))
    if watts is None or watts <= 0 or low_w is None or high_w is None:
        return kwh, kwh, kwh, []
    return kwh, kwh * low_w / watts, kwh * high_w / watts, []


def _item(rank: int, a: Any, costs: Costs | None) -> RepairItem:
    quantity, q_low, q_high, unit, notes = _quantity(a)
    kwh, kwh_low, kwh_high, saving_notes = _saving(a)
    notes += saving_notes
    values: dict[str, Any] = {}
    key, price_unit = _PRICE[a.cause]
    unit_cost = None if costs is None else getattr(costs, key)
    if costs is not None and unit_cost is None:
        notes.append(f"no price: give [costs] {key}")
    elif unit_cost is not None and quantity is not None and unit == price_unit:
        u = costs.uncertainty
        values.update(cost=quantity * unit_cost, cost_low=q_low * unit_cost * (1 - u),
                      cost_high=q_high * unit_cost * (1 + u))
    price = None if costs is None else costs.energy_price_per_kwh
    if kwh is not None and price is not None:
        values["saving_per_year"] = kwh * price
        if "cost" in values and kwh > 0 and price > 0:  # payback = cost / (saving × price)
            values["payback_years"] = values["cost"] / (kwh * price)
            values["payback_low_years"] = values["cost_low"] / (kwh_high * price)
            if kwh_low > 0:  # no upper end when the low saving is nil
                values["payback_high_years"] = values["cost_high"] / (kwh_low * price)
    elif kwh is not None and costs is not None:
        notes.append("no energy price: give [costs] energy_price_per_kwh")
    return RepairItem(
        rank=rank, uid=a.uid, image=a.image, title=a.title, element=a.element, cause=a.cause,
        quantity=quantity, unit=unit, quantity_low=q_low, quantity_high=q_high,
        saving_kwh_year=kwh, saving_kwh_year_low=kwh_low, saving_kwh_year_high=kwh_high,
        note="; ".join(notes), **values,
    )


def _priced(costs: Costs | None) -> bool:
    return costs is not None and any(
        getattr(costs, key) is not None for key in (*(k for k, _ in _PRICE.values()), "energy_price_per_kwh")
    )


def repair_plan(anomalies: Iterable[Any], costs: Costs | None = None) -> RepairPlan:
    """The repair plan of a survey's anomalies.

    Parameters
    ----------
    anomalies : iterable of SurveyAnomaly
        The survey's records after the review (any objects with the same fields; ``rank`` is
        used when present, else ``severity``; ``length_m`` when present).
    costs : Costs, optional
        The user's prices; None or no price: quantities and energy savings only.

    Returns
    -------
    RepairPlan
        Items in the order of the survey rank (records without one last, in the order given),
        ranked 1, 2, ...; see the module's formulas.
    """
    costs = costs if _priced(costs) else None
    records = [a for a in anomalies if is_repair_item(a)]
    order = sorted(range(len(records)),
                   key=lambda i: (survey_rank(records[i]) is None, survey_rank(records[i]) or 0, i))
    items = tuple(_item(k, records[i], costs) for k, i in enumerate(order, start=1))
    elements: list[str | None] = list(dict.fromkeys(item.element for item in items))
    by_element = tuple(_totals(e, [i for i in items if i.element == e]) for e in elements)
    return RepairPlan(items=items, by_element=by_element, totals=_totals(None, items),
                      currency=None if costs is None else costs.currency, priced=costs is not None,
                      uncertainty=None if costs is None else costs.uncertainty)


def _sum(values: Iterable[float | None]) -> float | None:
    known = [v for v in values if v is not None]
    return math.fsum(known) if known else None


def _totals(element: str | None, items: Sequence[RepairItem]) -> RepairTotals:
    def total(name: str) -> float | None:
        return _sum(getattr(i, name) for i in items)

    return RepairTotals(
        element=element,
        count=len(items),
        **{f"quantity_{unit}": _sum(i.quantity for i in items if i.unit == unit) for unit in REPAIR_UNITS},
        **{name: total(name) for name in ("cost", "cost_low", "cost_high", "saving_kwh_year", "saving_kwh_year_low",
                                          "saving_kwh_year_high", "saving_per_year")},
        n_unpriced=sum(i.cost is None for i in items),
        n_no_saving=sum(i.saving_kwh_year is None for i in items),
    )


#: Decimals of each column in repairs.csv (money to the cent, energy to 0.1 kWh, payback to 0.1 year).
_DECIMALS = {"quantity": 3, "cost": 2, "cost_low": 2, "cost_high": 2, "saving_kwh_year": 1,
             "saving_kwh_year_low": 1, "saving_kwh_year_high": 1, "saving_per_year": 2,
             "payback_years": 1, "payback_low_years": 1, "payback_high_years": 1}


def repair_rows(plan: RepairPlan) -> list[dict[str, Any]]:
    """The rows of repairs.csv: one mapping per item, columns :data:`REPAIR_COLUMNS`, rounded."""
    rows = []
    for item in plan.items:
        row = {column: getattr(item, column) for column in REPAIR_COLUMNS}
        for column, digits in _DECIMALS.items():
            if row[column] is not None:
                row[column] = round(float(row[column]), digits)
        rows.append(row)
    return rows


def plan_to_json(plan: RepairPlan) -> dict[str, Any]:
    """``summary.json``'s ``repairs``: currency, bands, totals per element and for the survey (JSON data)."""
    def totals(t: RepairTotals) -> dict[str, Any]:
        return {f.name: getattr(t, f.name) for f in fields(t)}

    return {
        "currency": plan.currency,
        "priced": plan.priced,
        "uncertainty": plan.uncertainty,
        "working_margin_rel": WORKING_MARGIN_REL,
        "n_items": len(plan.items),
        "by_element": [totals(t) for t in plan.by_element],
        "totals": totals(plan.totals),
    }

