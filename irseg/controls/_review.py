"""Review: the thermographer's verdict on single anomalies, applied to the survey's records.

``review.toml`` (beside ``survey.toml`` at the survey's root, or any file named by the review
setting) holds ``[[review]]`` tables::

    [[review]]
    image = "lf01_lounge_north_wall.tiff"   # as in anomalies.csv
    at = [119, 71]                         # [row, col] of a pixel inside the anomaly
    # anomaly = 2                          # or the id, when the pixel is not given
    action = "reject"                      # reject | accept | relabel
    cause = "thermal_bridge"               # with relabel
    note = "tripod leg"                    # free text, shown in the report

A pixel is looked up in the image's ``labels.png`` (pixel = anomaly id), so an entry survives a
renumbering. The review changes only the survey's records, never an image's results: it is
applied when the survey files are rebuilt, so a resumed run applies it without computing any
image again. An entry that matches nothing is a warning naming the entry, never a failure.
"""

from __future__ import annotations

import difflib
import os
import tomllib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from ..errors import InputError, MetadataError
from ..report._table import SurveyAnomaly
from ..vocabulary import CAUSES

__all__ = [
    "REVIEW_FILE",
    "REVIEW_ACTIONS",
    "REVIEW_STATES",
    "ReviewEntry",
    "ReviewResult",
    "parse_review_text",
    "load_review",
    "apply_review",
]

#: Name of the survey's review file, looked for in the survey's root folder.
REVIEW_FILE = "review.toml"

#: What a review entry does.
REVIEW_ACTIONS = ("reject", "accept", "relabel")

#: The ``review`` column of anomalies.csv for each action (empty when not reviewed).
REVIEW_STATES = {"reject": "rejected", "accept": "accepted", "relabel": "relabelled"}

_KEYS = ("image", "at", "anomaly", "action", "cause", "note")


@dataclass(frozen=True)
class ReviewEntry:
    """One ``[[review]]`` table.

    Attributes
    ----------
    number : int
        Position in the file, from 1 (named in messages).
    image : str
        The image's name as in anomalies.csv.
    action : {"reject", "accept", "relabel"}
    at : (int, int) or None
        ``(row, col)`` of a pixel inside the anomaly.
    anomaly : int or None
        The anomaly's id within the image (used when ``at`` is not given).
    cause : str or None
        The new cause (``relabel`` only), one of :data:`irseg.vocabulary.CAUSES`.
    note : str or None
        Free text, shown in anomalies.csv and the report.
    source : str
        The file's name (named in messages).
    """

    number: int
    image: str
    action: str
    at: tuple[int, int] | None = None
    anomaly: int | None = None
    cause: str | None = None
    note: str | None = None
    source: str = REVIEW_FILE

    def describe(self) -> str:
        """``review.toml entry 3 (image "x.tiff", at [119, 71], reject)``."""
        where = f"at [{self.at[0]}, {self.at[1]}]" if self.at is not None else f"anomaly {self.anomaly}"
        return f'{self.source} entry {self.number} (image "{self.image}", {where}, {self.action})'


def _fail(source: str, number: int, what: str, fix: str) -> MetadataError:
    return MetadataError(f"{source}: [[review]] entry {number}: {what}; {fix}")


def _whole(value: Any, *, minimum: int) -> int | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value:
        return None
    if isinstance(value, float) and (not value.is_integer() or abs(value) > 2**53):
        return None
    return int(value) if int(value) >= minimum else None


def _entry(source: str, number: int, table: Any) -> ReviewEntry:
    if not isinstance(table, Mapping):
        raise MetadataError(f"{source}: review entry {number} is not a table; write each as a [[review]] table")
    for key in table:
        if key not in _KEYS:
            near = difflib.get_close_matches(str(key), _KEYS, n=1, cutoff=0.6)
            hint = f"did you mean {near[0]!r}? " if near else ""
            raise _fail(source, number, f"has no key {key!r}", f"{hint}valid keys: {', '.join(_KEYS)}")
    image = table.get("image")
    if not isinstance(image, str) or not image.strip():
        raise _fail(source, number, "needs image, the image's name as in anomalies.csv",
                    'add image = "lf01_lounge_north_wall.tiff", for instance')
    action = table.get("action")
    action = action.strip().lower() if isinstance(action, str) else action
    if action not in REVIEW_ACTIONS:
        raise _fail(source, number, f"action = {action!r:.40} is not one of {', '.join(REVIEW_ACTIONS)}",
                    'write action = "reject", "accept" or "relabel"')
    at = None
    if "at" in table:
        value = table["at"]
        pair = [_whole(v, minimum=0) for v in value] if isinstance(value, (list, tuple)) and len(value) == 2 else []
        if len(pair) != 2 or None in pair:
            raise _fail(source, number, f"at = {value!r:.40} is not a [row, col] pixel",
                        "write at = [row, col] with whole numbers >= 0, e.g. at = [119, 71]")
        at = (int(pair[0]), int(pair[1]))
    anomaly = None
    if "anomaly" in table:
        anomaly = _whole(table["anomaly"], minimum=1)
        if anomaly is None:
            raise _fail(source, number, f"anomaly = {table['anomaly']!r:.40} is not an anomaly id",
                        "write the id from anomalies.csv, a whole number >= 1")
    if at is None and anomaly is None:
        raise _fail(source, number, "names no anomaly", "add at = [row, col] (a pixel inside it) or anomaly = <id>")
    cause = table.get("cause")
    if action == "relabel":
        if cause not in CAUSES:
            near = difflib.get_close_matches(str(cause), CAUSES, n=1, cutoff=0.5)
            hint = f'did you mean "{near[0]}"? ' if near else ""
            raise _fail(source, number, f"relabel needs a cause, got {cause!r:.40}",
                        f"{hint}use one of {', '.join(CAUSES)}")
    elif cause is not None:
        raise _fail(source, number, f"cause is read with action = \"relabel\" only, not {action!r}",
                    'remove cause, or write action = "relabel"')
    note = table.get("note")
    if note is not None and not isinstance(note, str):
        raise _fail(source, number, f"note = {note!r:.40} is not text", 'write it in quotes, e.g. note = "tripod leg"')
    note = note.strip() or None if isinstance(note, str) else None
    return ReviewEntry(number=number, image=image.strip(), action=action, at=at, anomaly=anomaly, cause=cause,
                       note=note, source=source)


def parse_review_text(text: str, *, source: str = REVIEW_FILE) -> tuple[ReviewEntry, ...]:
    """Parse and check a review file.

    Parameters
    ----------
    text : str
        TOML text of ``[[review]]`` tables.
    source : str
        The file's name (named in messages).

    Returns
    -------
    tuple of ReviewEntry
        In file order.

    Raises
    ------
    MetadataError
        A TOML syntax error (naming the line), anything but ``[[review]]`` tables, an unknown
        key (with the nearest one), no image, an unknown action, neither ``at`` nor
        ``anomaly``, a relabel without a known cause; each names the file, the entry and the fix.
    """
    try:
        tree = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MetadataError(f"{source}: TOML syntax error: {exc}; fix that line (see https://toml.io)") from None
    except RecursionError:
        raise MetadataError(f"{source}: TOML nesting too deep; a review file holds [[review]] tables") from None
    extra = [key for key in tree if key != "review"]
    if extra:
        raise MetadataError(
            f"{source}: {extra[0]!r} is not part of a review file; it holds [[review]] tables only "
            "(image, at or anomaly, action, cause, note)"
        )
    tables = tree.get("review", [])
    if isinstance(tables, Mapping):
        raise MetadataError(f"{source}: [review] is a single table; write [[review]] (two brackets) before each entry")
    return tuple(_entry(source, k, table) for k, table in enumerate(tables, start=1))


def load_review(path: str | os.PathLike[str]) -> tuple[ReviewEntry, ...]:
    """Read and check a review file (:func:`parse_review_text`); messages name it by its file name.

    Raises
    ------
    MetadataError
        The file cannot be read, is not a regular file, is larger than 1 MiB or not UTF-8, or
        its content is refused.
    """
    from ..io import read_small_text

    name = Path(path).name
    try:
        text = read_small_text(path, what="review file")
    except InputError as exc:
        raise MetadataError(str(exc).replace(os.fspath(path), name, 1)) from None
    return parse_review_text(text, source=name)


# --------------------------------------------------------------------------- applying


@dataclass(frozen=True)
class ReviewResult:
    """The survey's anomalies with a review applied.

    Attributes
    ----------
    anomalies : tuple of SurveyAnomaly
        In the order given; reviewed ones with ``review`` (accepted, rejected or relabelled),
        ``note``, and for a relabel the new ``cause`` (its ``reason`` says from which cause).
    applied : int
        Anomalies the review changed (one per anomaly, however many entries named it).
    unmatched : tuple of (ReviewEntry, str)
        Each entry that matched nothing (or was overridden, or matched with a correction) and
        the warning naming it.
    """

    anomalies: tuple[SurveyAnomaly, ...]
    applied: int
    unmatched: tuple[tuple[ReviewEntry, str], ...]

    @property
    def warnings(self) -> tuple[str, ...]:
        """The warnings of :attr:`unmatched`, in file order."""
        return tuple(text for _, text in self.unmatched)


#: ``label_at(image, row, col)``: the anomaly id at a pixel of an image (0: none); raises
#: LookupError with the reason when the pixel cannot be looked up.
LabelLookup = Callable[[str, int, int], int]


def _target(entry: ReviewEntry, ids: set[int], label_at: LabelLookup) -> tuple[int | None, str | None]:
    """The anomaly id an entry names, or None and the warning saying why nothing matched."""
    if entry.at is not None:
        row, col = entry.at
        try:
            found = int(label_at(entry.image, row, col))
        except LookupError as exc:
            return None, f"{entry.describe()}: {exc}; the entry is not applied"
        if found == 0 or found not in ids:
            return None, (f"{entry.describe()}: the pixel is inside no anomaly of this image; give a pixel "
                          "inside the anomaly's outline (labels.png holds the ids), or its id")
        if entry.anomaly is not None and entry.anomaly != found:
            return found, (f"{entry.describe()}: the pixel is inside anomaly {found}, not {entry.anomaly}; "
                           f"applied to anomaly {found} (the pixel wins)")
        return found, None
    assert entry.anomaly is not None
    if entry.anomaly not in ids:
        return None, f"{entry.describe()}: the image has no anomaly {entry.anomaly}; check the id in anomalies.csv"
    return entry.anomaly, None


def _reviewed(anomaly: SurveyAnomaly, entry: ReviewEntry) -> SurveyAnomaly:
    updates: dict[str, Any] = {"review": REVIEW_STATES[entry.action], "note": entry.note}
    if entry.action == "relabel":
        updates["cause"] = entry.cause
        updates["reason"] = f"{anomaly.reason or ''}; relabelled by review from {anomaly.cause}".lstrip("; ")
    return replace(anomaly, **updates)


def apply_review(
    anomalies: Sequence[SurveyAnomaly], entries: Sequence[ReviewEntry], *, label_at: LabelLookup
) -> ReviewResult:
    """Apply review entries to a survey's anomalies (no image is read but the label images).

    Parameters
    ----------
    anomalies : sequence of SurveyAnomaly
        Every anomaly of the survey's analysed images.
    entries : sequence of ReviewEntry
        In file order; when two name the same anomaly, the later wins (with a warning).
    label_at : callable
        ``label_at(image, row, col)`` -> the anomaly id at that pixel (0: none); raises
        LookupError naming the reason when it cannot say (no label image, pixel outside).

    Returns
    -------
    ReviewResult
        Unmatched entries (unknown image, pixel outside every anomaly, unknown id) are warnings.
    """
    by_image: dict[str, dict[int, int]] = {}
    for position, a in enumerate(anomalies):
        by_image.setdefault(a.image, {})[a.anomaly] = position
    images = {a.image for a in anomalies}
    chosen: dict[tuple[str, int], ReviewEntry] = {}
    warnings: list[tuple[ReviewEntry, str]] = []
    for entry in entries:
        ids = by_image.get(entry.image)
        if ids is None:
            warnings.append((entry, f"{entry.describe()}: no analysed image of this name has anomalies; use "
                                    "the name as in anomalies.csv" + _nearest(entry.image, images)))
            continue
        aid, warning = _target(entry, set(ids), label_at)
        if warning is not None:
            warnings.append((entry, warning))
        if aid is None:
            continue
        earlier = chosen.get((entry.image, aid))
        if earlier is not None:
            warnings.append((entry, f"{entry.describe()} overrides entry {earlier.number} for anomaly {aid}; "
                                    "keep one entry per anomaly"))
        chosen[(entry.image, aid)] = entry
    out = list(anomalies)
    for (image, aid), entry in chosen.items():
        position = by_image[image][aid]
        out[position] = _reviewed(out[position], entry)
    return ReviewResult(tuple(out), len(chosen), tuple(warnings))


def _nearest(name: str, images: set[str]) -> str:
    near = difflib.get_close_matches(name, sorted(images), n=1, cutoff=0.6)
    return f' (did you mean "{near[0]}"?)' if near else ""
