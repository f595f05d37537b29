"""The repair plan of a whole survey: repairs.csv, confirm_points.csv and summary.json's ``repairs``.

Pure: built from the survey's anomaly records (after the review), each image's recorded
``[costs]`` and confirmation points (``result.json``); :mod:`irseg.batch` writes the results
with the other survey files, as one set.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from ._confirm import CONFIRM_COLUMNS
from ._costs import survey_costs
from ._plan import RepairPlan, plan_to_json, repair_plan, repair_rows

__all__ = ["SurveyRepairs", "survey_repairs", "confirm_rows"]


@dataclass(frozen=True)
class SurveyRepairs:
    """What the survey files need of the repair plan.

    Attributes
    ----------
    plan : RepairPlan
    rows : list of dict
        repairs.csv (:data:`irseg.repairs.REPAIR_COLUMNS`).
    points : list of dict
        confirm_points.csv (:data:`irseg.repairs.CONFIRM_COLUMNS`).
    summary : dict
        ``summary.json``'s ``repairs``: :func:`plan_to_json` plus ``items`` (the rows) and
        ``confirm_points``.
    notes : list of (str, str)
        ``(image, warning)``: images whose ``[costs]`` differ from the survey's.
    """

    plan: RepairPlan
    rows: list[dict[str, Any]]
    points: list[dict[str, Any]]
    summary: dict[str, Any]
    notes: list[tuple[str, str]]


def confirm_rows(points: Iterable[tuple[str, Sequence[Mapping[str, Any]]]], plan: RepairPlan) -> list[dict[str, Any]]:
    """Rows of confirm_points.csv: the recorded points of the plan's moisture items.

    Parameters
    ----------
    points : iterable of (str, sequence of mapping)
        ``(stem, points)`` per image, each point as recorded (``anomaly``, ``point``, ``kind``,
        ``row``, ``col``, ``x_m``, ``y_m``). An anomaly the review rejected or relabelled away from
        moisture keeps its marks on the overlay (it is not redrawn) but gets no row.
    plan : RepairPlan
    """
    wanted = {item.uid for item in plan.items if item.cause == "moisture"}
    rows = []
    for stem, recorded in points:
        for p in recorded or ():
            if not isinstance(p, Mapping):
                continue
            uid = f"{stem}#{p.get('anomaly')}"
            if uid in wanted:
                row = {column: p.get(column) for column in CONFIRM_COLUMNS}
                row["uid"] = uid
                for key in ("x_m", "y_m"):
                    row[key] = None if row[key] is None else round(float(row[key]), 3)
                rows.append(row)
    return rows


def survey_repairs(
    anomalies: Sequence[Any],
    costs: Sequence[tuple[str, Any]],
    points: Sequence[tuple[str, Sequence[Mapping[str, Any]]]] = (),
) -> SurveyRepairs:
    """The survey's repair plan and its tables.

    Parameters
    ----------
    anomalies : sequence of SurveyAnomaly
        The survey's records after the review, ranked.
    costs : sequence of (str, mapping or None)
        ``(image, [costs] as recorded)`` in input order: the first that gives prices is used.
    points : sequence of (str, sequence of mapping)
        ``(stem, confirmation points as recorded)`` per image.
    """
    chosen, notes = survey_costs(costs)
    plan = repair_plan(anomalies, chosen)
    rows = repair_rows(plan)
    confirm = confirm_rows(points, plan)
    summary = {**plan_to_json(plan), "items": rows, "confirm_points": confirm}
    return SurveyRepairs(plan=plan, rows=rows, points=confirm, summary=summary, notes=notes)
