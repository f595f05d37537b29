"""The repair plan's arithmetic, exclusions, ranking and totals (irseg.repairs.repair_plan).

The worked example below is computed by hand from the formulas of issue 17 ("From defect list to
repair plan"), tagged [C]: quantity = area × (1 + working margin), cost = quantity × unit cost with the
band ``× (1 ∓ uncertainty)`` on the area's band, saving = the anomaly's excess kWh/year with the band of
its excess W, saving per year = saving × energy price, payback = cost / (saving × price).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import pytest

from irseg.report import SurveyAnomaly
from irseg.repairs import REPAIR_COLUMNS, WORKING_MARGIN_REL, repair_plan, repair_rows
from irseg.types import Costs

COSTS = Costs(currency="EUR", energy_price_per_kwh=0.12, missing_insulation_per_m2=85.0, moisture_per_m2=120.0,
              thermal_bridge_per_m=60.0, air_leakage_per_item=150.0, uncertainty=0.25)


@dataclass(frozen=True)
class WithLength(SurveyAnomaly):
    """A record that carries a measured length (the ``length_m`` column a later analysis may add)."""

    length_m: float | None = None


def _a(uid: str, cause: str, rank: int | None, **kw) -> SurveyAnomaly:
    image, anomaly = uid.split("#")
    values = dict(image=f"{image}.tif", anomaly=int(anomaly), uid=uid, cause=cause, rank=rank,
                  reason="compact cold area", kind="cold")
    values.update(kw)
    return SurveyAnomaly(**values)


def _survey() -> list[SurveyAnomaly]:
    return [
        _a("wall#1", "missing_insulation", 2, area_m2=2.0, area_low_m2=1.5, area_high_m2=2.5,
           excess_w=40.0, excess_low_w=30.0, excess_high_w=52.0, excess_kwh_year=200.0, element="north wall"),
        _a("wall#2", "air_leakage", 3, area_m2=0.3, excess_w=10.0, excess_low_w=5.0, excess_high_w=20.0,
           excess_kwh_year=50.0, element="north wall"),
        _a("roof#1", "moisture", 1, area_m2=1.0, area_low_m2=0.8, area_high_m2=1.2, excess_w=30.0,
           excess_low_w=20.0, excess_high_w=40.0, excess_kwh_year=190.0, kind="warm", element="flat roof"),
        _a("wall#3", "thermal_bridge", 4, area_m2=0.25, excess_w=2.0, excess_low_w=1.0, excess_high_w=3.0,
           excess_kwh_year=8.0, reason="long narrow straight cold band: stud, plate", element="north wall"),
        # never items: rejected by review, a regular framing member, unclassified
        _a("wall#4", "missing_insulation", None, area_m2=5.0, excess_kwh_year=900.0, review="rejected"),
        _a("wall#5", "thermal_bridge", 5, area_m2=0.08, excess_kwh_year=2.0,
           reason="one of 6 parallel cold bands at regular 0.40 m spacing: framing members (studs, joists); "
                  "expected in framed construction: repair only a member clearly colder than its neighbours"),
        _a("wall#6", "unclassified", 6, area_m2=0.5, excess_kwh_year=20.0),
    ]


def test_worked_example_of_the_issue_formulas():
    plan = repair_plan(_survey(), COSTS)
    items = {i.uid: i for i in plan.items}
    # [C] missing insulation: 2.0 m² × 1.20 = 2.4 m²; × 85 = 204.0; low 1.5×1.2×85×0.75 = 114.75;
    # high 2.5×1.2×85×1.25 = 318.75; saving 200 kWh (band 200×30/40 = 150, 200×52/40 = 260);
    # 200 × 0.12 = 24.0 a year; payback 204/24 = 8.5 years, low 114.75/(260×0.12) = 3.678,
    # high 318.75/(150×0.12) = 17.708.
    assert WORKING_MARGIN_REL == 0.20
    mi = items["wall#1"]
    assert (mi.quantity, mi.unit) == (pytest.approx(2.4), "m2")
    assert (mi.cost, mi.cost_low, mi.cost_high) == (pytest.approx(204.0), pytest.approx(114.75), pytest.approx(318.75))
    assert (mi.saving_kwh_year, mi.saving_kwh_year_low, mi.saving_kwh_year_high) == (200.0, 150.0, 260.0)
    assert mi.saving_per_year == pytest.approx(24.0)
    assert mi.payback_years == pytest.approx(8.5)
    assert mi.payback_low_years == pytest.approx(114.75 / 31.2)
    assert mi.payback_high_years == pytest.approx(318.75 / 18.0)
    # [C] air leakage by item: 1 × 150 = 150 (112.5-187.5); 50 kWh (25-100); 6.0 a year; payback 25 years
    # (112.5/12 = 9.375 to 187.5/3 = 62.5).
    leak = items["wall#2"]
    assert (leak.quantity, leak.unit, leak.cost, leak.cost_low, leak.cost_high) == (1.0, "item", 150.0, 112.5, 187.5)
    assert (leak.saving_kwh_year_low, leak.saving_kwh_year_high) == (25.0, 100.0)
    assert (leak.payback_years, leak.payback_low_years, leak.payback_high_years) == (
        pytest.approx(25.0), pytest.approx(9.375), pytest.approx(62.5))
    # [C] moisture: 1.0 m² × 1.2 × 120 = 144 (0.8×1.2×120×0.75 = 86.4 to 1.2×1.2×120×1.25 = 216); no saving,
    # no payback (damage first, not energy).
    wet = items["roof#1"]
    assert (wet.quantity, wet.cost, wet.cost_low, wet.cost_high) == (
        pytest.approx(1.2), pytest.approx(144.0), pytest.approx(86.4), pytest.approx(216.0))
    assert (wet.saving_kwh_year, wet.saving_per_year, wet.payback_years, wet.payback_low_years) == (None,) * 4
    # a thermal bridge without a measured length: by area (0.25 × 1.2 = 0.3 m²), not priced per metre
    tb = items["wall#3"]
    assert (tb.quantity, tb.unit, tb.cost, tb.payback_years) == (pytest.approx(0.3), "m2", None, None)
    assert "quantified by area" in tb.note and tb.saving_kwh_year == 8.0


def test_a_thermal_bridge_with_a_length_is_priced_per_metre():
    record = WithLength(image="w.tif", anomaly=1, uid="w#1", cause="thermal_bridge", rank=1, area_m2=0.2,
                        excess_w=3.0, excess_low_w=2.0, excess_high_w=4.0, excess_kwh_year=12.0, length_m=3.0)
    (item,) = repair_plan([record], COSTS).items
    # [C] 3.0 m × 60 = 180 (135-225); 12 kWh × 0.12 = 1.44 a year; payback 180/1.44 = 125 years
    assert (item.quantity, item.unit, item.cost, item.cost_low, item.cost_high) == (3.0, "m", 180.0, 135.0, 225.0)
    assert item.payback_years == pytest.approx(125.0)


def test_rejected_framing_and_unclassified_never_appear_and_ranks_follow_the_survey():
    plan = repair_plan(_survey(), COSTS)
    assert [i.uid for i in plan.items] == ["roof#1", "wall#1", "wall#2", "wall#3"]  # survey ranks 1, 2, 3, 4
    assert [i.rank for i in plan.items] == [1, 2, 3, 4]
    assert not {"wall#4", "wall#5", "wall#6"} & {row["uid"] for row in repair_rows(plan)}


def test_a_record_with_a_rank_column_is_ranked_by_it():
    # the survey's `rank` column (issue 14), not the anomaly id, orders the plan
    records = [SurveyAnomaly(image="a.tif", anomaly=k, uid=f"a#{k}", cause="air_leakage", rank=3 - k)
               for k in (1, 2)]
    assert [i.uid for i in repair_plan(records).items] == ["a#2", "a#1"]


def test_without_costs_quantities_only_and_no_money_column_filled():
    for costs in (None, Costs(), Costs(currency="EUR")):
        plan = repair_plan(_survey(), costs)
        assert not plan.priced and plan.currency is None
        rows = repair_rows(plan)
        money = ("cost", "cost_low", "cost_high", "saving_per_year", "payback_years", "payback_low_years",
                 "payback_high_years")
        assert all(row[c] is None for row in rows for c in money)
        assert all(row["quantity"] is not None for row in rows)
        assert [row["saving_kwh_year"] for row in rows] == [None, 200.0, 50.0, 8.0]
        assert plan.totals.cost is None and plan.totals.n_unpriced == len(rows)


def test_totals_per_element_equal_the_sum_of_their_rows():
    plan = repair_plan(_survey(), COSTS)
    assert [t.element for t in plan.by_element] == ["flat roof", "north wall"]
    for totals in plan.by_element:
        rows = [i for i in plan.items if i.element == totals.element]
        assert totals.count == len(rows)
        for name in ("cost", "cost_low", "cost_high", "saving_kwh_year", "saving_kwh_year_low",
                     "saving_kwh_year_high", "saving_per_year"):
            known = [getattr(i, name) for i in rows if getattr(i, name) is not None]
            assert getattr(totals, name) == (pytest.approx(math.fsum(known)) if known else None), name
        assert totals.quantity_m2 == pytest.approx(math.fsum(i.quantity for i in rows if i.unit == "m2"))
    # [C] survey: 204 + 150 + 144 = 498 (wall#3 unpriced)
    assert plan.totals.cost == pytest.approx(498.0) and plan.totals.n_unpriced == 1
    assert plan.totals.cost_low == pytest.approx(114.75 + 112.5 + 86.4)


def test_rows_have_the_interface_columns():
    rows = repair_rows(repair_plan(_survey(), COSTS))
    assert all(tuple(row) == REPAIR_COLUMNS for row in rows)
    assert REPAIR_COLUMNS[:8] == ("rank", "uid", "image", "title", "element", "cause", "quantity", "unit")
    assert {row["unit"] for row in rows} <= {"m2", "m", "item"}


def test_the_reports_element_table_shows_metres_and_items_beside_square_metres():
    """Bridges count by length and air leaks by item: the report's totals per element show all three."""
    from html.parser import HTMLParser

    from irseg.repairs import plan_to_json
    from irseg.report import render_report

    bridge = WithLength(image="wall.tif", anomaly=7, uid="wall#7", cause="thermal_bridge", rank=5, area_m2=0.3,
                        excess_kwh_year=12.0, length_m=2.35, element="north wall",
                        reason="straight warm band: slab edge")
    plan = repair_plan([*_survey(), bridge], COSTS)
    summary = {"irseg_version": "0.1.0", "images": [], "totals_by_cause": {}, "anomalies": [],
               "repairs": plan_to_json(plan)}

    class Cells(HTMLParser):
        def __init__(self):
            super().__init__()
            self.rows, self.inside, self.cell = [], False, None

        def handle_starttag(self, tag, attrs):
            if tag == "table":
                self.inside = dict(attrs).get("id") == "repair-totals"
            elif self.inside and tag == "tr":
                self.rows.append([])
            elif self.inside and tag in ("td", "th"):
                self.cell = []

        def handle_endtag(self, tag):
            if tag == "table":
                self.inside = False
            elif self.inside and tag in ("td", "th") and self.cell is not None:
                self.rows[-1].append(" ".join(" ".join(self.cell).split()))
                self.cell = None

        def handle_data(self, data):
            if self.cell is not None:
                self.cell.append(data)

    parser = Cells()
    parser.feed(render_report(summary, {}))
    header, *body = parser.rows
    col = {name: k for k, name in enumerate(header)}
    assert "Length (m)" in col and "Area (m²)" in col
    north = next(r for r in body if r[0] == "north wall")
    # [C] issue 17: a bridge with a measured length counts its length; wall#3 has none (area, unpriced)
    assert north[col["Length (m)"]] == "2.35"
    assert north[col["Area (m²)"]] == f"{2.0 * 1.2 + 0.25 * 1.2:.2f}"
    assert north[col["Leaks items"]] == "1"  # wall#2, the air leak
    survey = next(r for r in body if r[0] == "Survey")
    assert survey[col["Length (m)"]] == "2.35"
