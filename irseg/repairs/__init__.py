"""From defect list to repair plan: quantities, costs, savings, payback, and where to confirm.

:func:`repair_plan` turns the survey's anomaly records (after the review) and the user's own
prices (``[costs]`` of ``survey.toml``, :class:`irseg.types.Costs`; irseg ships none) into
ranked repair items with quantities, costs with bands, yearly savings and payback, and totals
per element and for the survey. :func:`confirm_points` proposes, for each moisture anomaly of a
roof, where to confirm it on site (wet, edge, dry). The batch writes ``repairs.csv``,
``confirm_points.csv`` and the ``repairs`` part of ``summary.json``; the report shows the plan.

These are planning estimates from surface temperatures: to be confirmed on site and priced by
the contractor under local codes.

Modules: ``_costs`` (the ``[costs]`` section, a leaf the metadata stage imports), ``_plan``
(repair items, totals), ``_confirm`` (confirmation points), ``_survey`` (the survey's tables).
"""

from __future__ import annotations

from ._confirm import CONFIRM_COLUMNS, CONFIRM_KINDS, ConfirmPoint, confirm_points
from ._costs import COST_KEYS, check_costs, costs_from, costs_to_dict, survey_costs
from ._plan import (
    REPAIR_COLUMNS,
    REPAIR_UNITS,
    WORKING_MARGIN_REL,
    RepairItem,
    RepairPlan,
    RepairTotals,
    is_repair_item,
    plan_to_json,
    repair_plan,
    repair_rows,
    survey_rank,
)
from ._survey import SurveyRepairs, confirm_rows, survey_repairs

__all__ = [
    "COST_KEYS",
    "CONFIRM_COLUMNS",
    "CONFIRM_KINDS",
    "REPAIR_COLUMNS",
    "REPAIR_UNITS",
    "WORKING_MARGIN_REL",
    "ConfirmPoint",
    "RepairItem",
    "RepairPlan",
    "RepairTotals",
    "check_costs",
    "confirm_points",
    "costs_from",
    "costs_to_dict",
    "is_repair_item",
    "plan_to_json",
    "repair_plan",
    "repair_rows",
    "survey_costs",
    "survey_rank",
    "SurveyRepairs",
    "confirm_rows",
    "survey_repairs",
]
