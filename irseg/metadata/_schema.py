"""The metadata schema: sections, keys, their checks, and the validation of a parsed tree.

The sections mirror the dataclasses of :mod:`irseg.types` (``[camera]`` is
:class:`~irseg.types.Camera`, ...). Keys renamed in a later version are still accepted
under their old name, with a :class:`~irseg.errors.MetadataWarning` naming the new one.
Every number is checked against its range in :data:`._bounds.BOUNDS`, where each range
has its reason (and ``docs/guide.md`` lists them).
"""

from __future__ import annotations

import difflib
import warnings
from collections.abc import Mapping
from typing import Any

from ._details import check_details
from ._pressure import check_pressure
from ._zones import check_zone_tables
from ..errors import MetadataError, MetadataWarning
from ..repairs._costs import check_costs
from ..types import Air, AnalysisSettings, Camera, SegmentSettings, Surface
from ._bounds import BOUNDS
from ._checks import (
    _Check,
    _md_band,
    _md_choice,
    _md_kind,
    _md_range,
    _md_scale,
    _md_seed,
    _md_show,
    _md_temperature,
)

__all__: list[str] = []

_SECTIONS: dict[str, type] = {
    "camera": Camera,
    "surface": Surface,
    "air": Air,
    "analysis": AnalysisSettings,
    "segment": SegmentSettings,
}


def _rng(sec: str, key: str, fix: str, *, optional: bool = False) -> _Check:
    return _md_range(BOUNDS[sec][key], fix=fix, optional=optional)


def _temp(sec: str, key: str) -> _Check:
    return _md_temperature(BOUNDS[sec][key])


_SCHEMA: dict[str, dict[str, _Check]] = {
    "camera": {
        "hfov_deg": _rng("camera", "hfov_deg", "give the lens's horizontal field of view in degrees, e.g. 45",
                         optional=True),
        "distance_m": _rng("camera", "distance_m", "give the camera-to-surface distance in metres", optional=True),
        "pixel_m": _rng("camera", "pixel_m", "give one pixel's side on the surface in metres, e.g. 0.005",
                        optional=True),
        "tilt_deg": _rng("camera", "tilt_deg",
                         "give the angle between line of sight and surface normal, 0 to 80 degrees"),
        "units": _md_choice(("celsius", "kelvin")),
        "scale": _md_scale(BOUNDS["camera"]["scale"]),
        "offset": _rng("camera", "offset", "give the export's offset (value = raw * scale + offset, in units)"),
        "band_um": _md_band,
        "netd_k": _rng("camera", "netd_k", "give the camera's NETD in kelvin, e.g. 0.05"),
        "export_emissivity": _rng("camera", "export_emissivity",
                                  "give the emissivity the export applied, in (0, 1] (1 = apparent)"),
        "export_reflected_c": _temp("camera", "export_reflected_c"),
        "transmittance": _rng("camera", "transmittance",
                              "give the path transmittance (1 for building distances)"),
        "atmosphere_c": _temp("camera", "atmosphere_c"),
    },
    "surface": {
        "emissivity": _rng("surface", "emissivity", "use the material's long-wave emissivity"),
        "reflected_c": _temp("surface", "reflected_c"),
        "view": _md_choice(("interior", "exterior", "roof")),
        "heat_flow": _md_choice(("horizontal", "upward", "downward"), optional=True),
        "emissivity_uncertainty_abs": _rng("surface", "emissivity_uncertainty_abs",
                                           "give the absolute emissivity uncertainty, e.g. 0.02"),
    },
    "air": {
        "inside_c": _temp("air", "inside_c"),
        "outside_c": _temp("air", "outside_c"),
        "wind_m_s": _rng("air", "wind_m_s", "give the wind speed at the surface in m/s", optional=True),
    },
    "analysis": {
        "degree_days": _rng("analysis", "degree_days",
                            "give heating degree-days in K·d per year (3000 is a temperate climate)"),
        "frsi_limit": _rng("analysis", "frsi_limit", "give the f_Rsi mould limit, e.g. 0.70"),
        "distance_uncertainty_rel": _rng("analysis", "distance_uncertainty_rel",
                                         "give the relative distance uncertainty (0.05 = 5 %)"),
        "h_uncertainty_rel": _rng("analysis", "h_uncertainty_rel",
                                  "give the relative heat-transfer uncertainty (0.20 = 20 %)"),
        "max_wind_m_s": _rng("analysis", "max_wind_m_s", "give a wind limit in m/s (6.7 in ASTM C1060)"),
        "min_delta_t_k": _rng("analysis", "min_delta_t_k",
                              "give the smallest inside-outside difference in K (10 in EN 13187)"),
        "min_contrast_k": _rng("analysis", "min_contrast_k", "give the smallest anomaly contrast in K",
                               optional=True),
        "seed": _md_seed,
    },
    "segment": {
        "noise_k": _rng("segment", "noise_k", "give the image noise in K, or leave it out to estimate it",
                        optional=True),
        "min_step_k": _rng("segment", "min_step_k",
                           "give the smallest temperature step that makes an edge, in K"),
        "min_feature_px": _rng("segment", "min_feature_px", "give the smallest feature size in pixels"),
    },
}

#: Sections that are not settings (checked by irseg.controls and irseg.repairs): free-text details,
#: zones and prices. ``[survey]`` and ``[costs]`` belong in survey.toml, ``[image]`` in a sidecar,
#: ``[[zone]]`` in either. ``[pressure]`` (a sidecar's pair, ``_pressure``) never raises: its problem
#: fails the pair only.
_EXTRA_SECTIONS = ("survey", "image", "zone", "costs", "pressure")


def _md_extra(source: str, sec: str, table: Any) -> Any:
    """A checked ``[survey]``/``[image]``/``[costs]`` table (dict) or ``[[zone]]`` list (tuple of Zone)."""
    if sec == "costs":
        return check_costs(source, table)
    if sec == "pressure":
        return check_pressure(source, table)
    return check_zone_tables(source, table) if sec == "zone" else check_details(source, sec, table)


#: Old key names still accepted (with a warning): {section: {old name: new name}}.
_RENAMED: dict[str, dict[str, str]] = {
    "surface": {"emissivity_uncertainty": "emissivity_uncertainty_abs"},
    "analysis": {"distance_uncertainty": "distance_uncertainty_rel", "h_uncertainty": "h_uncertainty_rel"},
}


def _md_home_of(key: str) -> str | None:
    """The section that defines ``key`` (under its current or its old name), if any."""
    for sec, keys in _SCHEMA.items():
        if key in keys or key in _RENAMED.get(sec, {}):
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
    near = difflib.get_close_matches(sec, [*_SCHEMA, *_EXTRA_SECTIONS], n=1, cutoff=0.5)
    hint = f"did you mean [{near[0]}]? " if near else ""
    return MetadataError(f"{src}: unknown section [{sec}]; {hint}valid sections: {', '.join(_SCHEMA)}")


def _md_not_a_section(source: str, sec: str, table: Any) -> MetadataError:
    """The error for a top-level name that is not one of the sections."""
    if not isinstance(table, Mapping):
        home = _md_home_of(sec)
        if home is not None:
            return MetadataError(f"{source}: key {sec!r} is outside any section; put it under [{home}]")
        return MetadataError(
            f"{source}: {sec} = {_md_show(table)} is outside any section and is not a metadata key; "
            f"keys live in the sections {', '.join(f'[{s}]' for s in _SCHEMA)}"
        )
    return _md_unknown_section(source, sec)


def _md_current_name(source: str, sec: str, key: str, table: Mapping[str, Any]) -> str:
    """``key`` under its current name; an old name warns (or fails when both names are given)."""
    new = _RENAMED.get(sec, {}).get(key)
    if new is None:
        return key
    if new in table:
        raise MetadataError(
            f"{source}: [{sec}] gives both {key} (the old name) and {new}; keep only {new}"
        )
    warnings.warn(
        f"{source}: [{sec}] {key} is renamed: use {new} (the old name is still read)",
        MetadataWarning,
        stacklevel=5,
    )
    return new


def _md_validate(tree: Mapping[str, Any], *, source: str) -> dict[str, dict[str, Any]]:
    """Check a {section: {key: value}} mapping; return it converted (floats, tuples, lower-case names)."""
    out: dict[str, dict[str, Any]] = {}
    if not isinstance(tree, Mapping):
        raise MetadataError(f"{source}: metadata must be a table of sections, got a {_md_kind(tree)}")
    for sec, table in tree.items():
        if not isinstance(sec, str):
            raise MetadataError(f"{source}: section names must be strings, got {sec!r}")
        if sec in _EXTRA_SECTIONS:
            out[sec] = _md_extra(source, sec, table)
            continue
        if sec not in _SCHEMA:
            raise _md_not_a_section(source, sec, table)
        if not isinstance(table, Mapping):
            raise MetadataError(
                f"{source}: {sec} = {_md_show(table)} should be a section [{sec}] holding keys, not a value"
            )
        checked: dict[str, Any] = {}
        for key, value in table.items():
            name = _md_current_name(source, sec, key, table) if isinstance(key, str) else key
            if not isinstance(name, str) or name not in _SCHEMA[sec]:
                raise _md_unknown_key(source, sec, str(key))
            checked[name] = _SCHEMA[sec][name](source, sec, name, value)
        out[sec] = checked
    return out
