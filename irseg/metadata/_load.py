"""Parse one TOML document, merge the layers, load what applies to an image, JSON round trip."""

from __future__ import annotations

import dataclasses
import os
import tomllib
from collections.abc import Mapping
from typing import Any

from ._details import details_from
from ._pressure import pressure_to_dict
from ._zones import zone_to_dict
from ..errors import InputError, MetadataError
from ..io import SURVEY_FILE, read_metadata_texts
from ..repairs._costs import costs_from, costs_to_dict
from ..types import Assumption, Pressure, SurveyMeta
from ._assume import _md_assume
from ._checks import _md_kind
from ._schema import _SECTIONS, _md_validate

__all__ = [
    "load_metadata",
    "parse_metadata_text",
    "check_overrides",
    "merge_metadata",
    "meta_to_dict",
    "meta_from_dict",
]


def parse_metadata_text(text: str, *, source: str) -> dict[str, dict[str, Any]]:
    """Parse and validate one metadata TOML document.

    Parameters
    ----------
    text : str
        TOML text.
    source : str
        Name used in messages (usually the file name).

    Returns
    -------
    dict
        ``{section: {key: value}}`` holding only the keys present, converted (floats,
        ``band_um`` as a tuple, choices in lower case, renamed keys under their new name).

    Raises
    ------
    MetadataError
        TOML syntax error (naming the line), unknown section or key (with the nearest valid
        name), wrong type or out-of-range value, a key given under both its old and new name.

    Warns
    -----
    MetadataWarning
        A key given under its old name (e.g. ``[analysis] h_uncertainty``): it is read,
        and the message names the new one.
    """
    if not isinstance(text, str):
        raise MetadataError(f"{source}: metadata text must be a string, got {_md_kind(text)}")
    try:
        tree = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MetadataError(f"{source}: TOML syntax error: {exc}; fix that line (see https://toml.io)") from None
    except RecursionError:
        raise MetadataError(f"{source}: TOML nesting too deep; metadata needs only [section] key = value") from None
    except ValueError as exc:  # e.g. an integer of more than 4300 digits, which Python refuses to convert
        detail = str(exc).split(";")[0][:160]
        raise MetadataError(f"{source}: a TOML value cannot be read ({detail}); write plain numbers") from None
    return _md_validate(tree, source=source)


def check_overrides(overrides: Mapping[str, Mapping[str, Any]] | None, *, source: str = "command line") -> dict:
    """Validate an overrides mapping ``{section: {key: value}}`` the same way as a file.

    ``None`` values are accepted for keys whose default is None (meaning "not known").
    """
    if not overrides:
        return {}
    return _md_validate(overrides, source=source)


def merge_metadata(*layers: Mapping[str, Mapping[str, Any]], sources: tuple[str, ...] = ()) -> SurveyMeta:
    """Apply validated layers key by key over the defaults (later layers win), then resolve defaults.

    Parameters
    ----------
    *layers : mapping
        Validated ``{section: {key: value}}`` trees (:func:`parse_metadata_text`,
        :func:`check_overrides`), first applied first.
    sources : tuple of str
        Names of the layers, recorded in ``SurveyMeta.sources``.

    Returns
    -------
    SurveyMeta
        ``surface.reflected_c`` is never None: when no layer gave it, it is the air
        temperature on the camera's side, else 20 °C (:func:`irseg._defaults.resolve_reflected_c`).
        Every value assumed this way (reflected temperature, and the emissivity and view
        when no layer gave them) is listed in ``assumed``.

    Warns
    -----
    MetadataWarning
        One per assumed value, naming it and how to give it.
    """
    merged: dict[str, dict[str, Any]] = {sec: {} for sec in (*_SECTIONS, "survey", "image", "costs")}
    zones: list[Any] = []
    pressure = None
    for layer in layers:
        for sec, table in layer.items():
            if sec == "zone":
                zones.extend(table)  # a sidecar's zones add to the folder's
            elif sec == "pressure":
                pressure = table  # a Pressure record (irseg.metadata._pressure): the last layer's
            else:
                merged[sec].update(table)
    parts = {sec: cls(**merged[sec]) for sec, cls in _SECTIONS.items()}
    details = {sec: details_from(sec, merged[sec]) for sec in ("survey", "image")}
    meta = SurveyMeta(**parts, **details, zones=tuple(zones), sources=tuple(sources),
                      costs=costs_from(merged["costs"]), pressure=pressure)
    return _md_assume(meta, merged["surface"])


def load_metadata(
    image_path: str | os.PathLike[str], *, overrides: Mapping[str, Mapping[str, Any]] | None = None
) -> SurveyMeta:
    """Metadata in force for one image, with every default resolved.

    Parameters
    ----------
    image_path : path-like
        The image. Its folder's ``survey.toml`` (if any) gives defaults; the sidecar
        ``<stem>.toml`` beside it (if any) overrides them key by key.
    overrides : mapping, optional
        ``{"section": {"key": value}}`` applied last, validated the same way
        (source name "command line").

    Returns
    -------
    SurveyMeta
        With ``sources`` listing the files read (folder first) and "command line" when
        overrides were given, and ``assumed`` listing the values no layer gave
        (see :func:`merge_metadata`).

    Raises
    ------
    MetadataError
        Any syntax, key, type or range problem, naming file, key, value and fix; a
        metadata file that is not a regular file (a folder, a pipe), is too large or
        cannot be read.

    Warns
    -----
    MetadataWarning
        One per assumed value, and one per key given under its old name.
    """
    try:
        texts = read_metadata_texts(image_path)
    except InputError as exc:
        raise MetadataError(str(exc)) from None
    layers: list[dict[str, dict[str, Any]]] = []
    sources: list[str] = []
    for name, text in texts:
        layers.append(_md_placed(parse_metadata_text(text, source=name), source=name))
        sources.append(name)
    if overrides:
        layers.append(check_overrides(overrides))
        sources.append("command line")
    return merge_metadata(*layers, sources=tuple(sources))


def _md_placed(layer: dict[str, Any], *, source: str) -> dict[str, Any]:
    """``layer`` when its free-text sections sit in the right file: [survey] in survey.toml, [image] in a sidecar."""
    folder_file = os.path.basename(source) == SURVEY_FILE
    if folder_file and "image" in layer:
        raise MetadataError(
            f"{source}: [image] describes one image; move it to that image's sidecar <stem>.toml "
            "([survey] holds what the whole folder shares)"
        )
    if folder_file and "pressure" in layer:  # the pair fails, the images do not (irseg.types.Pressure)
        layer = {**layer, "pressure": Pressure(problem=(
            f"{source}: [pressure] describes one image taken under a pressure difference; move it to that "
            "image's sidecar <stem>.toml"))}
    if not folder_file and "costs" in layer:
        raise MetadataError(
            f"{source}: [costs] holds the survey's prices; move it to {SURVEY_FILE} in the survey's folder"
        )
    if not folder_file and "survey" in layer:
        raise MetadataError(
            f"{source}: [survey] describes the whole job; move it to {SURVEY_FILE} in the survey's folder "
            "([image] holds what this image shows)"
        )
    return layer


def meta_to_dict(meta: SurveyMeta) -> dict[str, Any]:
    """A JSON-ready dict of the metadata: sections as dicts (tuples as lists), ``sources``, ``assumed``.

    ``assumed`` is a list of ``{"key": ..., "value": ..., "reason": ...}``; the free-text
    sections ``survey`` and ``image`` hold the keys given, ``zone`` the zones as
    ``[[zone]]`` tables, ``costs`` the prices given (``{}`` without any).
    """
    out: dict[str, Any] = {}
    for sec in _SECTIONS:
        obj = getattr(meta, sec)
        out[sec] = {
            f.name: (list(v) if isinstance(v := getattr(obj, f.name), tuple) else v) for f in dataclasses.fields(obj)
        }
    for sec in ("survey", "image"):
        obj = getattr(meta, sec)
        out[sec] = {f.name: getattr(obj, f.name) for f in dataclasses.fields(obj) if getattr(obj, f.name) is not None}
    out["zone"] = [zone_to_dict(z) for z in meta.zones]
    out["costs"] = costs_to_dict(meta.costs)
    if meta.pressure is not None:  # only a pressurised image's record has the section
        out["pressure"] = pressure_to_dict(meta.pressure)
    out["sources"] = list(meta.sources)
    out["assumed"] = [{"key": a.key, "value": a.value, "reason": a.reason} for a in meta.assumed]
    return out


def meta_from_dict(data: Mapping[str, Any], *, source: str = "metadata record") -> SurveyMeta:
    """Rebuild a :class:`SurveyMeta` from :func:`meta_to_dict` output (validated).

    Raises
    ------
    MetadataError
        A section, key or value the schema refuses, or a malformed ``assumed`` list.
    """
    if not isinstance(data, Mapping):
        raise MetadataError(f"{source}: metadata must be a table of sections, got a {_md_kind(data)}")
    tree = {k: v for k, v in data.items() if k not in ("sources", "assumed")}
    sources = tuple(str(s) for s in data.get("sources", ()))
    meta = merge_metadata(_md_validate(tree, source=source), sources=sources)
    recorded = _md_assumed_from(data.get("assumed", ()), source=source)
    return dataclasses.replace(meta, assumed=(*recorded, *meta.assumed))


def _md_assumed_from(items: Any, *, source: str) -> tuple[Assumption, ...]:
    """The ``assumed`` list of a :func:`meta_to_dict` record as Assumption objects."""
    if not isinstance(items, (list, tuple)):
        raise MetadataError(f"{source}: assumed = {items!r:.60} is not a list; write a list of key/value/reason tables")
    out: list[Assumption] = []
    for item in items:
        ok = isinstance(item, Mapping) and isinstance(item.get("key"), str) and isinstance(item.get("reason"), str)
        if not ok or set(item) != {"key", "value", "reason"}:
            raise MetadataError(
                f"{source}: assumed entry {item!r:.60} is not a table of key, value and reason; "
                "write it as meta_to_dict does"
            )
        out.append(Assumption(item["key"], item["value"], item["reason"]))
    return tuple(out)
