"""A survey's settings: built once and checked before any image is read (used by irseg.batch).

A bad setting would fail every image the same way, so it fails the run instead, before
the output folder is touched.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from ..errors import ConfigError, OutputError
from ._records import SurveySettings

__all__ = ["survey_settings", "check_out_dir"]


def survey_settings(
    *,
    jobs: int | None,
    overrides: Mapping[str, Mapping[str, Any]] | None,
    format: str | None,
    max_pixels: int,
    cmap: str,
    show_jumps: bool = False,
    range_c: Any = "auto",
) -> SurveySettings:
    """The settings that change results, validated (``jobs`` is checked too, but not part of them).

    Raises
    ------
    ConfigError
        A job count or pixel budget below 1, an override the metadata would reject, an unknown
        reader name or colour map.
    MetadataError
        An override with an unknown key or a bad value.
    """
    if jobs is not None and int(jobs) < 1:
        raise ConfigError(f"jobs = {jobs} must be at least 1 (the jobs setting)")
    settings = SurveySettings(
        overrides={str(s): dict(v) for s, v in (overrides or {}).items()},
        format=format,
        max_pixels=int(max_pixels),
        cmap=cmap,
        show_jumps=bool(show_jumps),
        range_c=_range_setting(range_c),
    )
    if settings.overrides:  # checked once, so a bad one fails the run instead of every image
        from ..metadata import check_overrides

        check_overrides(settings.overrides)
    if settings.format is not None:
        from ..io import list_readers

        readers = list_readers()
        if settings.format not in readers:
            raise ConfigError(
                f"reader {settings.format!r} is not a reader; use one of {', '.join(readers)} (the reader setting)"
            )
    from ..render import colormap_lut

    colormap_lut(settings.cmap)
    if settings.max_pixels < 1:
        raise ConfigError(f"max_pixels = {settings.max_pixels} must be at least 1 (the max_pixels setting)")
    return settings


def _range_setting(value: Any) -> str | tuple[float, float]:
    """``"auto"``, ``"survey"`` or a ``(lo_c, hi_c)`` pair with ``lo_c < hi_c`` (text ``"LO,HI"`` accepted)."""
    if isinstance(value, str) and value.strip().lower() in ("auto", "survey"):
        return value.strip().lower()
    try:
        parts = value.split(",") if isinstance(value, str) else list(value)
        lo, hi = (float(v) for v in parts)
    except (TypeError, ValueError):
        raise ConfigError(f"range_c = {value!r}: give auto, survey or two temperatures LO,HI in °C "
                          "(the range_c setting)") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise ConfigError(f"range_c = {value!r}: LO must be below HI and both finite (the range_c setting)")
    return (lo, hi)


def check_out_dir(out_dir: Path) -> None:
    """Create the output folder; fail when it cannot be created or written.

    Raises
    ------
    OutputError
    """
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(
            f"{out_dir}: cannot create the output folder ({exc.strerror}); choose another folder (the out_dir setting)"
        ) from exc
    if not out_dir.is_dir():
        raise OutputError(f"{out_dir}: exists and is not a folder; choose another output folder (the out_dir setting)")
    if not os.access(out_dir, os.W_OK | os.X_OK):
        raise OutputError(f"{out_dir}: the output folder is not writable; choose a writable folder (the out_dir setting)")
