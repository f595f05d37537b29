"""The ``[costs]`` section: the user's own prices, checked where the other metadata keys are.

A leaf of :mod:`irseg.repairs` (imports :mod:`irseg.types` and :mod:`irseg.errors` only), so
that :mod:`irseg.metadata` can check the section without loading the repair plan.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
from collections.abc import Mapping, Sequence
from typing import Any

from ..errors import MetadataError
from ..types import Costs

__all__ = ["COST_KEYS", "PRICE_KEYS", "check_costs", "costs_from", "costs_to_dict", "survey_costs"]

#: Every key of ``[costs]``, in the order of :class:`irseg.types.Costs` (an interface).
COST_KEYS: tuple[str, ...] = tuple(f.name for f in dataclasses.fields(Costs))

#: The keys that are prices (numbers >= 0 in ``currency``).
PRICE_KEYS: tuple[str, ...] = tuple(k for k in COST_KEYS if k not in ("currency", "uncertainty"))

#: Longest currency text accepted (a code or a short name).
MAX_CURRENCY_CHARS = 40


def check_costs(source: str, table: Any) -> dict[str, Any]:
    """Check one ``[costs]`` table; return its values (prices as floats, currency as stripped text).

    Parameters
    ----------
    source : str
        The file (named in messages).
    table : Any
        The parsed TOML table.

    Returns
    -------
    dict
        The keys given.

    Raises
    ------
    MetadataError
        Not a table; an unknown key (with the nearest valid one); a price that is not a number,
        not finite or negative; an ``uncertainty`` outside [0, 1); a ``currency`` that is not
        short text. The message names the file, the key and the fix.
    """
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: costs = ... should be a section [costs] holding keys, not a value")
    out: dict[str, Any] = {}
    for key, value in table.items():
        if key not in COST_KEYS:
            near = difflib.get_close_matches(str(key), COST_KEYS, n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise MetadataError(f"{source}: [costs] has no key {key!r}; {hint}valid keys: {', '.join(COST_KEYS)}")
        out[key] = _checked(source, key, value)
    return out


def _checked(source: str, key: str, value: Any) -> Any:
    if key == "currency":
        if not isinstance(value, str) or not value.strip() or len(value.strip()) > MAX_CURRENCY_CHARS:
            raise MetadataError(
                f"{source}: [costs] currency = {value!r:.60} is not a short text; write it in quotes, "
                'e.g. currency = "EUR"'
            )
        return value.strip()
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise MetadataError(
            f"{source}: [costs] {key} = {value!r:.60} is not a number; write a plain number, e.g. {key} = 85.0"
        )
    number = float(value)
    if not math.isfinite(number) or number < 0:
        raise MetadataError(
            f"{source}: [costs] {key} = {value!r:.60} is negative or not finite; give a price >= 0 "
            "(leave the key out when the price is not known)"
        )
    if key == "uncertainty" and number >= 1:
        raise MetadataError(
            f"{source}: [costs] uncertainty = {value!r:.60} is outside [0, 1); give the relative band on unit "
            "costs, e.g. 0.25 for +/-25 %"
        )
    return number


def costs_from(values: Mapping[str, Any] | None) -> Costs:
    """The record of a checked table (:func:`check_costs`); keys absent keep their defaults."""
    return Costs(**dict(values or {}))


def costs_to_dict(costs: Costs) -> dict[str, Any]:
    """The keys given, as JSON data: ``{}`` when no price and no currency was given."""
    if costs == Costs():
        return {}
    return {f.name: getattr(costs, f.name) for f in dataclasses.fields(costs) if getattr(costs, f.name) is not None}


def survey_costs(sections: Sequence[tuple[str, Any]]) -> tuple[Costs | None, list[tuple[str, str]]]:
    """The survey's prices: the first image's ``[costs]`` that gives any, and a note for each that differs.

    Parameters
    ----------
    sections : sequence of (str, mapping or None)
        ``(image, costs section as recorded in result.json)`` in input order.

    Returns
    -------
    (Costs or None, list of (image, message))
        None when no image gives a ``[costs]`` section (quantities only).
    """
    chosen: Costs | None = None
    first = ""
    notes: list[tuple[str, str]] = []
    for image, values in sections:
        if not isinstance(values, Mapping) or not values:
            continue
        try:
            costs = costs_from(check_costs(f"{image}: [costs]", values))
        except MetadataError as exc:  # a result.json edited by hand: the plan goes on without it
            notes.append((image, f"its recorded prices are not used: {exc}"))
            continue
        if chosen is None:
            chosen, first = costs, image
        elif costs != chosen:
            notes.append((image, f"its [costs] differ from those of {first}; the repair plan uses those of {first} "
                                 "(keep one [costs] section for the whole survey)"))
    return chosen, notes
