"""The free-text sections ``[survey]`` (survey.toml) and ``[image]`` (sidecar): checks and records."""

from __future__ import annotations

import dataclasses
import datetime
import difflib
from collections.abc import Mapping
from typing import Any

from ..errors import MetadataError
from ..types import ImageDetails, SurveyDetails

__all__ = ["DETAIL_SECTIONS", "MAX_DETAIL_CHARS", "check_details", "details_from"]

#: The free-text sections, their record type and the file they belong in.
DETAIL_SECTIONS: dict[str, type] = {"survey": SurveyDetails, "image": ImageDetails}

#: Longest free-text value accepted, in characters (a paragraph; the report shows it whole).
MAX_DETAIL_CHARS = 2000


def _keys(section: str) -> tuple[str, ...]:
    return tuple(f.name for f in dataclasses.fields(DETAIL_SECTIONS[section]))


def check_details(source: str, section: str, table: Any) -> dict[str, str]:
    """Check one ``[survey]`` or ``[image]`` table; return its values as stripped text.

    Parameters
    ----------
    source : str
        The file (named in messages).
    section : {"survey", "image"}
    table : Any
        The parsed TOML table.

    Returns
    -------
    dict of str to str
        The keys given; TOML dates and times as ISO text (``2026-01-14``, ``2026-01-14T21:40:00``).

    Raises
    ------
    MetadataError
        Not a table, an unknown key (with the nearest valid one), a value that is not text,
        a date or a time, or a value longer than 2000 characters; the message names the file,
        the key and the fix.
    """
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: {section} = ... should be a section [{section}] holding keys, not a value")
    valid = _keys(section)
    out: dict[str, str] = {}
    for key, value in table.items():
        if key not in valid:
            near = difflib.get_close_matches(str(key), valid, n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise MetadataError(f"{source}: [{section}] has no key {key!r}; {hint}valid keys: {', '.join(valid)}")
        out[key] = _text(source, section, key, value)
    return out


def _text(source: str, section: str, key: str, value: Any) -> str:
    if isinstance(value, (datetime.date, datetime.time)):  # datetime.datetime is a date
        return value.isoformat()
    if not isinstance(value, str):
        raise MetadataError(
            f"{source}: [{section}] {key} = {value!r:.60} is not text; write it in quotes, e.g. {key} = \"...\""
        )
    text = value.strip()
    if len(text) > MAX_DETAIL_CHARS:
        raise MetadataError(
            f"{source}: [{section}] {key} is {len(text)} characters long; keep it under {MAX_DETAIL_CHARS} "
            "(details are a line or a paragraph)"
        )
    if key == "photo" and (not text or "\0" in text):
        raise MetadataError(f'{source}: [image] photo = "{text}" is not a file name; name the photo, e.g. "IMG_0412.jpg"')
    return text


def details_from(section: str, values: Mapping[str, str]) -> SurveyDetails | ImageDetails:
    """The record of a checked table (:func:`check_details`); keys absent read as None."""
    return DETAIL_SECTIONS[section](**dict(values))
