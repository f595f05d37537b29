"""Survey metadata: ``survey.toml`` folder defaults, ``<stem>.toml`` sidecars, overrides.

Layers are applied key by key in this order: the folder's ``survey.toml``, the image's
sidecar ``<stem>.toml``, then ``overrides`` (source name "command line"). Every key is
checked for type and range where it is read, so a message names the file, the key, the
value and the fix, e.g.
``survey.toml: [surface] emissivity = 1.7 is outside (0, 1]; use the material's long-wave emissivity``.
Missing geometry is not an error here; the analysis warns about what it cannot compute.
"""

from __future__ import annotations

import dataclasses
import difflib
import math
import os
import tomllib
from collections.abc import Callable, Mapping
from typing import Any

from .errors import InputError, MetadataError
from .io import SURVEY_FILE, read_metadata_texts
from .types import Air, AnalysisSettings, Camera, SegmentSettings, Surface, SurveyMeta

__all__ = [
    "load_metadata",
    "parse_metadata_text",
    "check_overrides",
    "merge_metadata",
    "meta_to_dict",
    "meta_from_dict",
    "SURVEY_FILE",
]


_SECTIONS: dict[str, type] = {
    "camera": Camera,
    "surface": Surface,
    "air": Air,
    "analysis": AnalysisSettings,
    "segment": SegmentSettings,
}

_Check = Callable[[str, str, str, Any], Any]


# --------------------------------------------------------------------------- value checks


def _md_fail(src: str, sec: str, key: str, value: Any, why: str, fix: str) -> MetadataError:
    return MetadataError(f"{src}: [{sec}] {key} = {_md_show(value)} {why}; {fix}")


def _md_show(value: Any) -> str:
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _md_number(src: str, sec: str, key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _md_fail(src, sec, key, value, f"is a {_md_kind(value)}, not a number", "write a plain number")
    out = float(value)
    if not math.isfinite(out):
        raise _md_fail(src, sec, key, value, "is not finite", "write a finite number")
    return out


def _md_kind(value: Any) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, str):
        return "string"
    if isinstance(value, (list, tuple)):
        return "list"
    if isinstance(value, dict):
        return "table"
    if isinstance(value, float):
        return "float"
    if isinstance(value, int):
        return "integer"
    return type(value).__name__


def _md_range(
    lo: float | None, hi: float | None, *, lo_open: bool, hi_open: bool, fix: str, optional: bool = False
) -> _Check:
    """A float check for an interval; ``None`` bounds are unbounded."""

    def check(src: str, sec: str, key: str, value: Any) -> float | None:
        if value is None and optional:
            return None
        x = _md_number(src, sec, key, value)
        bad_lo = lo is not None and (x <= lo if lo_open else x < lo)
        bad_hi = hi is not None and (x >= hi if hi_open else x > hi)
        if bad_lo or bad_hi:
            left = "(" if lo_open else "["
            right = ")" if hi_open else "]"
            lo_s = "-inf" if lo is None else f"{lo:g}"
            hi_s = "inf" if hi is None else f"{hi:g}"
            raise _md_fail(src, sec, key, value, f"is outside {left}{lo_s}, {hi_s}{right}", fix)
        return x

    return check


def _md_temperature(*, optional: bool = True) -> _Check:
    def check(src: str, sec: str, key: str, value: Any) -> float | None:
        if value is None and optional:
            return None
        x = _md_number(src, sec, key, value)
        if not -100.0 <= x <= 200.0:
            hint = (
                f"temperatures are in °C; {x:g} looks like kelvin, use {x - 273.15:.2f}"
                if 173.15 <= x <= 473.15
                else "temperatures are in °C, between -100 and 200"
            )
            raise _md_fail(src, sec, key, value, "is outside [-100, 200] °C", hint)
        return x

    return check


def _md_choice(options: tuple[str, ...], *, optional: bool = False) -> _Check:
    def check(src: str, sec: str, key: str, value: Any) -> str | None:
        if value is None and optional:
            return None
        if not isinstance(value, str):
            raise _md_fail(
                src, sec, key, value, f"is a {_md_kind(value)}, not a name", f"use one of {_md_quote(options)}"
            )
        v = value.strip().lower()
        if v not in options:
            near = difflib.get_close_matches(v, options, n=1, cutoff=0.5)
            fix = f'did you mean "{near[0]}"? ' if near else ""
            raise _md_fail(src, sec, key, value, "is not a valid choice", f"{fix}use one of {_md_quote(options)}")
        return v

    return check


def _md_quote(options: tuple[str, ...]) -> str:
    return ", ".join(f'"{o}"' for o in options)


def _md_band(src: str, sec: str, key: str, value: Any) -> tuple[float, float]:
    fix = "write two increasing wavelengths in micrometres, e.g. band_um = [7.5, 14.0]"
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise _md_fail(src, sec, key, value, "is not a list of two numbers", fix)
    lo, hi = (_md_number(src, sec, key, v) for v in value)
    if not (0.0 < lo < hi) or hi > 1000.0:
        raise _md_fail(src, sec, key, value, "is not an increasing pair of positive wavelengths", fix)
    return (lo, hi)


def _md_seed(src: str, sec: str, key: str, value: Any) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        raise _md_fail(src, sec, key, value, f"is a {_md_kind(value)}, not an integer", "write a whole number >= 0")
    if value < 0 or value >= 2**63:
        raise _md_fail(src, sec, key, value, "is outside [0, 2**63)", "write a whole number >= 0")
    return int(value)


def _md_nonzero(src: str, sec: str, key: str, value: Any) -> float:
    x = _md_number(src, sec, key, value)
    if x == 0.0:
        raise _md_fail(src, sec, key, value, "is zero", "integer images need value = raw * scale + offset, scale != 0")
    return x


def _md_finite(src: str, sec: str, key: str, value: Any) -> float:
    return _md_number(src, sec, key, value)


_POS = {"lo_open": True, "hi_open": False}
_SCHEMA: dict[str, dict[str, _Check]] = {
    "camera": {
        "hfov_deg": _md_range(0, 180, lo_open=True, hi_open=True, optional=True,
                              fix="give the lens's horizontal field of view in degrees, e.g. 45"),
        "distance_m": _md_range(0, None, **_POS, optional=True, fix="give the camera-to-surface distance in metres (> 0)"),
        "pixel_m": _md_range(0, None, **_POS, optional=True, fix="give one pixel's footprint in metres (> 0), e.g. 0.005"),
        "tilt_deg": _md_range(0, 80, lo_open=False, hi_open=False,
                              fix="give the angle between line of sight and surface normal, 0 to 80 degrees"),
        "units": _md_choice(("celsius", "kelvin")),
        "scale": _md_nonzero,
        "offset": _md_finite,
        "band_um": _md_band,
        "netd_k": _md_range(0, None, **_POS, fix="give the camera's NETD in kelvin (> 0), e.g. 0.05"),
        "export_emissivity": _md_range(0, 1, **_POS, fix="give the emissivity the export applied, in (0, 1] (1 = apparent)"),
        "export_reflected_c": _md_temperature(),
        "transmittance": _md_range(0, 1, **_POS, fix="give the path transmittance in (0, 1] (1 for short building distances)"),
        "atmosphere_c": _md_temperature(),
    },
    "surface": {
        "emissivity": _md_range(0, 1, **_POS, fix="use the material's long-wave emissivity"),
        "reflected_c": _md_temperature(),
        "view": _md_choice(("interior", "exterior", "roof")),
        "heat_flow": _md_choice(("horizontal", "upward", "downward"), optional=True),
        "emissivity_uncertainty": _md_range(0, 1, lo_open=False, hi_open=True,
                                            fix="give the absolute emissivity uncertainty, >= 0, e.g. 0.02"),
    },
    "air": {
        "inside_c": _md_temperature(),
        "outside_c": _md_temperature(),
        "wind_m_s": _md_range(0, 100, lo_open=False, hi_open=False, optional=True,
                              fix="give the wind speed at the surface in m/s, >= 0"),
    },
    "analysis": {
        "degree_days": _md_range(0, 20000, lo_open=False, hi_open=False,
                                 fix="give heating degree-days in K·d per year, >= 0 (3000 is a temperate climate)"),
        "frsi_limit": _md_range(0, 1, lo_open=True, hi_open=True, fix="give the f_Rsi mould limit in (0, 1), e.g. 0.70"),
        "distance_uncertainty": _md_range(0, None, lo_open=False, hi_open=False,
                                          fix="give the relative distance uncertainty, >= 0 (0.05 = 5 %)"),
        "h_uncertainty": _md_range(0, None, lo_open=False, hi_open=False,
                                   fix="give the relative heat-transfer uncertainty, >= 0 (0.20 = 20 %)"),
        "max_wind_m_s": _md_range(0, None, lo_open=False, hi_open=False, fix="give a wind limit in m/s, >= 0"),
        "min_delta_t_k": _md_range(0, None, lo_open=False, hi_open=False,
                                   fix="give the smallest inside-outside difference in K, >= 0"),
        "min_contrast_k": _md_range(0, None, lo_open=False, hi_open=False, optional=True,
                                    fix="give the smallest anomaly contrast in K, >= 0"),
        "seed": _md_seed,
    },
    "segment": {
        "noise_k": _md_range(0, None, **_POS, optional=True, fix="give the image noise in K (> 0), or leave it out to estimate it"),
        "min_step_k": _md_range(0, None, **_POS, fix="give the smallest temperature step that makes an edge, in K (> 0)"),
        "min_feature_px": _md_range(1, None, lo_open=False, hi_open=False,
                                    fix="give the smallest feature size in pixels, >= 1"),
    },
}


# --------------------------------------------------------------------------- parsing


def _md_home_of(key: str) -> str | None:
    """The section that defines ``key``, if any."""
    for sec, keys in _SCHEMA.items():
        if key in keys:
            return sec
    return None


def _md_unknown_key(src: str, sec: str, key: str) -> MetadataError:
    home = _md_home_of(key)
    if home is not None and home != sec:
        return MetadataError(f"{src}: [{sec}] has no key {key!r}; it belongs in [{home}]: move it there")
    near = difflib.get_close_matches(key, list(_SCHEMA[sec]), n=1, cutoff=0.6)
    hint = f"did you mean {near[0]!r}? " if near else ""
    valid = ", ".join(_SCHEMA[sec])
    return MetadataError(f"{src}: [{sec}] has no key {key!r}; {hint}valid keys: {valid}")


def _md_unknown_section(src: str, sec: str) -> MetadataError:
    home = _md_home_of(sec)
    if home is not None:
        return MetadataError(f"{src}: unknown section [{sec}]; {sec!r} is a key of [{home}]: write it there")
    near = difflib.get_close_matches(sec, list(_SCHEMA), n=1, cutoff=0.5)
    hint = f"did you mean [{near[0]}]? " if near else ""
    return MetadataError(f"{src}: unknown section [{sec}]; {hint}valid sections: {', '.join(_SCHEMA)}")


def _md_validate(tree: Mapping[str, Any], *, source: str) -> dict[str, dict[str, Any]]:
    """Check a {section: {key: value}} mapping; return it converted (floats, tuples, lower-case names)."""
    out: dict[str, dict[str, Any]] = {}
    if not isinstance(tree, Mapping):
        raise MetadataError(f"{source}: metadata must be a table of sections, got a {_md_kind(tree)}")
    for sec, table in tree.items():
        if not isinstance(sec, str):
            raise MetadataError(f"{source}: section names must be strings, got {sec!r}")
        if sec not in _SCHEMA:
            if not isinstance(table, Mapping):
                home = _md_home_of(sec)
                if home is not None:
                    raise MetadataError(
                        f"{source}: key {sec!r} is outside any section; put it under [{home}]"
                    )
                raise MetadataError(
                    f"{source}: {sec} = {_md_show(table)} is outside any section and is not a metadata key; "
                    f"keys live in the sections {', '.join(f'[{s}]' for s in _SCHEMA)}"
                )
            raise _md_unknown_section(source, sec)
        if not isinstance(table, Mapping):
            raise MetadataError(
                f"{source}: {sec} = {_md_show(table)} should be a section [{sec}] holding keys, not a value"
            )
        checked: dict[str, Any] = {}
        for key, value in table.items():
            if not isinstance(key, str) or key not in _SCHEMA[sec]:
                raise _md_unknown_key(source, sec, str(key))
            checked[key] = _SCHEMA[sec][key](source, sec, key, value)
        out[sec] = checked
    return out


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
        ``band_um`` as a tuple, choices in lower case).

    Raises
    ------
    MetadataError
        TOML syntax error (naming the line), unknown section or key (with the nearest valid
        name), wrong type or out-of-range value.
    """
    if not isinstance(text, str):
        raise MetadataError(f"{source}: metadata text must be a string, got {_md_kind(text)}")
    try:
        tree = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MetadataError(f"{source}: TOML syntax error: {exc}; fix that line (see https://toml.io)") from None
    except RecursionError:
        raise MetadataError(f"{source}: TOML nesting too deep; metadata needs only [section] key = value") from None
    return _md_validate(tree, source=source)


def check_overrides(overrides: Mapping[str, Mapping[str, Any]] | None, *, source: str = "command line") -> dict:
    """Validate an overrides mapping ``{section: {key: value}}`` the same way as a file.

    ``None`` values are accepted for keys whose default is None (meaning "not known").
    """
    if not overrides:
        return {}
    return _md_validate(overrides, source=source)


def merge_metadata(*layers: Mapping[str, Mapping[str, Any]], sources: tuple[str, ...] = ()) -> SurveyMeta:
    """Apply validated layers key by key over the defaults (later layers win)."""
    merged: dict[str, dict[str, Any]] = {sec: {} for sec in _SECTIONS}
    for layer in layers:
        for sec, table in layer.items():
            merged[sec].update(table)
    parts = {sec: cls(**merged[sec]) for sec, cls in _SECTIONS.items()}
    return SurveyMeta(**parts, sources=tuple(sources))


def load_metadata(
    image_path: str | os.PathLike[str], *, overrides: Mapping[str, Mapping[str, Any]] | None = None
) -> SurveyMeta:
    """Metadata in force for one image.

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
        overrides were given.

    Raises
    ------
    MetadataError
        Any syntax, key, type or range problem, naming file, key, value and fix.
    """
    try:
        texts = read_metadata_texts(image_path)
    except InputError as exc:
        raise MetadataError(str(exc)) from None
    layers: list[dict[str, dict[str, Any]]] = []
    sources: list[str] = []
    for name, text in texts:
        layers.append(parse_metadata_text(text, source=name))
        sources.append(name)
    if overrides:
        layers.append(check_overrides(overrides))
        sources.append("command line")
    return merge_metadata(*layers, sources=tuple(sources))


def meta_to_dict(meta: SurveyMeta) -> dict[str, Any]:
    """A JSON-ready dict of the metadata (sections as dicts, tuples as lists, ``sources``)."""
    out: dict[str, Any] = {}
    for sec in _SECTIONS:
        obj = getattr(meta, sec)
        out[sec] = {
            f.name: (list(v) if isinstance(v := getattr(obj, f.name), tuple) else v) for f in dataclasses.fields(obj)
        }
    out["sources"] = list(meta.sources)
    return out


def meta_from_dict(data: Mapping[str, Any], *, source: str = "metadata record") -> SurveyMeta:
    """Rebuild a :class:`SurveyMeta` from :func:`meta_to_dict` output (validated)."""
    tree = {k: v for k, v in data.items() if k != "sources"}
    sources = tuple(str(s) for s in data.get("sources", ()))
    return merge_metadata(_md_validate(tree, source=source), sources=sources)
