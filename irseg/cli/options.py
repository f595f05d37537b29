"""The one registry of command-line options shared by irseg's commands (units in every name).

Every option that means the same thing in two commands is declared here once, with one
spelling: a temperature is ``--<what>-c`` (°C), a length ``--<what>-m``, an angle
``--<what>-deg``, a speed ``--<what>-m-s``, a temperature difference or noise ``--<what>-k``,
a pixel count or size ``--<what>-px`` (rows before columns, as everywhere in irseg).
``--reader`` names an input reader, ``--writer`` an output image format.

:data:`SETTING_FLAGS` maps the library's setting names (which its messages use, e.g. "the
max_pixels setting") to these flags; :func:`irseg.cli.main.describe` rewrites messages with it.
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Callable
from pathlib import Path
from typing import Any

import click

from .._shared import DEFAULT_MAX_PIXELS
from ..vocabulary import VIEWS

__all__ = [
    "METADATA_OPTIONS",
    "SETTING_FLAGS",
    "metadata_options",
    "overrides_from",
    "parse_set",
    "out_dir_option",
    "jobs_option",
    "reader_option",
    "writer_option",
    "max_pixels_option",
    "cmap_option",
    "overlay_options",
    "verbose_option",
    "quiet_option",
    "inside_c_option",
    "outside_c_option",
    "wind_m_s_option",
    "distance_m_option",
    "hfov_deg_option",
    "netd_k_option",
    "size_px_option",
    "seed_option",
    "review_option",
]

#: Library setting name -> the command-line flag that sets it.
SETTING_FLAGS: dict[str, str] = {
    "out_dir": "-o/--out",
    "jobs": "-j/--jobs",
    "resume": "--resume",
    "scheduler": "--scheduler",
    "reader": "--reader",
    "max_pixels": "--max-pixels",
    "cmap": "--cmap",
    "fail_fast": "--fail-fast",
    "verbose": "-v/--verbose",
    "review": "--review",
    "show_jumps": "--show-jumps",
    "range_c": "--range-c",
    "csv_dialect": "--csv-dialect",
}

# The metadata options: flag, [section] key, type, help. The one table behind both the click
# options and the overrides they become (section.key is also settable with --set).
METADATA_OPTIONS: tuple[tuple[str, str, str, Any, str], ...] = (
    ("--emissivity", "surface", "emissivity", float, "[surface] emissivity, (0, 1]."),
    ("--reflected-c", "surface", "reflected_c", float, "[surface] reflected_c, reflected temperature in °C."),
    ("--view", "surface", "view", click.Choice(list(VIEWS)), "[surface] view."),
    ("--inside-c", "air", "inside_c", float, "[air] inside_c, inside air temperature in °C."),
    ("--outside-c", "air", "outside_c", float, "[air] outside_c, outside air temperature in °C."),
    ("--wind-m-s", "air", "wind_m_s", float, "[air] wind_m_s, wind speed at the surface in m/s."),
    ("--distance-m", "camera", "distance_m", float, "[camera] distance_m, camera to surface in m."),
    ("--hfov-deg", "camera", "hfov_deg", float, "[camera] hfov_deg, horizontal field of view in degrees."),
    ("--pixel-m", "camera", "pixel_m", float, "[camera] pixel_m, pixel footprint on the surface in m."),
    ("--min-step-k", "segment", "min_step_k", float, "[segment] min_step_k, smallest step that makes an edge, K."),
    ("--noise-k", "segment", "noise_k", float, "[segment] noise_k, image noise in K (default: estimated)."),
    ("--degree-days", "analysis", "degree_days", float, "[analysis] degree_days, K·d per year."),
    ("--frsi-limit", "analysis", "frsi_limit", float, "[analysis] frsi_limit, mould-risk limit of f_Rsi."),
)

# click's parameter name of each metadata option -> (section, key)
_OVERRIDES = {flag[2:].replace("-", "_"): (section, key) for flag, section, key, _, _ in METADATA_OPTIONS}


def metadata_options(command: Any) -> Any:
    """Add the options of :data:`METADATA_OPTIONS`, in table order, to a click command."""
    for flag, _, _, kind, text in reversed(METADATA_OPTIONS):
        command = click.option(flag, type=kind, help=text)(command)
    return command


#: Deepest list/table nesting a --set value may have (metadata needs at most one list).
MAX_SET_NESTING = 8


def _nesting(raw: str) -> int:
    """Deepest bracket nesting of a TOML value, outside quoted strings (a cheap bound)."""
    depth = deepest = 0
    quote = ""
    for ch in raw:
        if quote:
            if ch == quote:
                quote = ""
        elif ch in "\"'":
            quote = ch
        elif ch in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif ch in "]}":
            depth -= 1
    return deepest


def _excerpt(text: str, limit: int = 40) -> str:
    return text if len(text) <= limit else text[: limit - 3] + "..."


def parse_set(text: str) -> tuple[str, str, Any]:
    """Split ``section.key=value``; the value is read as a TOML value, else kept as text.

    A value that opens a list or a table (``[`` or ``{``) must be valid TOML, nested at most
    :data:`MAX_SET_NESTING` deep; it is never kept as text.

    Raises
    ------
    click.BadParameter
        Not of the form ``section.key=value``; a list or table value that is not valid TOML or
        is nested too deep (the message quotes at most 40 characters of it).
    """
    name, sep, raw = text.partition("=")
    section, dot, key = name.strip().partition(".")
    if not sep or not dot or not section or not key or "." in key:
        raise click.BadParameter(
            f"{_excerpt(text)!r} is not section.key=value, e.g. --set surface.emissivity=0.95", param_hint="--set"
        )
    raw = raw.strip()
    structured = raw[:1] in ("[", "{")
    if structured and _nesting(raw) > MAX_SET_NESTING:
        raise click.BadParameter(
            f"the value of {name.strip()} ({_excerpt(raw)!r}) is nested more than {MAX_SET_NESTING} deep; "
            "metadata values are numbers, names or one list such as [8.0, 14.0]", param_hint="--set"
        )
    try:
        value = tomllib.loads(f"v = {raw}")["v"]
    except (tomllib.TOMLDecodeError, RecursionError, MemoryError) as exc:
        if structured:
            reason = "nested too deep" if isinstance(exc, (RecursionError, MemoryError)) else str(exc)
            raise click.BadParameter(
                f"the value of {name.strip()} ({_excerpt(raw)!r}) is not a TOML list or table ({reason}); "
                "write e.g. --set camera.band_um=[8.0,14.0]", param_hint="--set"
            ) from None
        value = raw
    return section.strip(), key.strip(), value


def overrides_from(options: dict[str, Any], sets: tuple[str, ...]) -> dict[str, dict[str, Any]]:
    """``{section: {key: value}}`` from ``--set`` items, then the metadata options (which win)."""
    result: dict[str, dict[str, Any]] = {}
    for item in sets:
        section, key, value = parse_set(item)
        result.setdefault(section, {})[key] = value
    for option, (section, key) in _OVERRIDES.items():
        if options.get(option) is not None:
            result.setdefault(section, {})[key] = options[option]
    return result


def out_dir_option(*, help: str) -> Callable[[Any], Any]:
    """``-o/--out DIR``: the output folder (required)."""
    return click.option("-o", "--out", "out_dir", required=True, type=click.Path(path_type=Path), help=help)


def jobs_option() -> Callable[[Any], Any]:
    """``-j/--jobs N``: worker processes."""
    return click.option("-j", "--jobs", type=click.IntRange(min=1), default=None,
                        help="Worker processes (default: the cores, as many as the free memory allows for "
                        "the largest image; 1 = in this process).")


def reader_option(choices: list[str]) -> Callable[[Any], Any]:
    """``--reader NAME``: force an input reader instead of detecting the format."""
    return click.option("--reader", type=click.Choice(choices), default=None,
                        help="Force an input reader instead of detecting the format.")


def writer_option(choices: tuple[str, ...], *, default: str) -> Callable[[Any], Any]:
    """``--writer NAME``: the image format written."""
    return click.option("--writer", type=click.Choice(list(choices)), default=default, show_default=True,
                        help="Image file format written.")


def max_pixels_option() -> Callable[[Any], Any]:
    """``--max-pixels N``: the pixel budget of one image, checked before decoding."""
    return click.option("--max-pixels", type=click.IntRange(min=1), default=DEFAULT_MAX_PIXELS, show_default=True,
                        help="Largest image accepted, in pixels (rows x columns), checked before decoding.")


def cmap_option() -> Callable[[Any], Any]:
    """``--cmap NAME``: colour map of the overlays (the open libraries' names)."""
    return click.option("--cmap", default="inferno", show_default=True,
                        help="Colour map of the overlays (inferno, magma, plasma, viridis, cividis, turbo, gray).")


def _check_range_c(ctx: click.Context, param: click.Parameter, value: str) -> str:
    """``--range-c`` checked as it is parsed: a bad value is a usage error (exit 2) before any work."""
    text = value.strip().lower()
    if text in ("auto", "survey"):
        return text
    try:
        lo, hi = (float(v) for v in value.split(","))
    except ValueError:
        raise click.BadParameter(f"{value!r}: give auto, survey or two temperatures LO,HI in °C, e.g. 5,22") from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise click.BadParameter(f"{value!r}: LO must be below HI and both finite, in °C (e.g. 5,22)")
    return value


def overlay_options(func: Callable[..., Any]) -> Callable[..., Any]:
    """``--show-jumps``, ``--range-c auto|survey|LO,HI`` and ``--csv-dialect rfc4180|excel-eu``."""
    func = click.option("--csv-dialect", type=click.Choice(["rfc4180", "excel-eu"]), default="rfc4180",
                        show_default=True,
                        help="anomalies.csv format: rfc4180 (',' and decimal points) or excel-eu "
                        "(';' and decimal commas, for spreadsheets set to such a locale).")(func)
    func = click.option("--range-c", metavar="auto|survey|LO,HI", default="auto", show_default=True,
                        callback=_check_range_c,
                        help="Colour range of the overlays: each image's own (auto), one range for the whole "
                        "survey (survey), or fixed, in °C (e.g. 5,22).")(func)
    return click.option("--show-jumps", is_flag=True,
                        help="Draw the temperature edges the segmentation found on the overlays.")(func)


def verbose_option() -> Callable[[Any], Any]:
    """``-v/--verbose``: tracebacks of failures."""
    return click.option("-v", "--verbose", is_flag=True, help="Show tracebacks of failures.")


def quiet_option() -> Callable[[Any], Any]:
    """``-q/--quiet``: errors and failed images only."""
    return click.option("-q", "--quiet", is_flag=True, help="Print only errors and failed images.")


def inside_c_option(*, default: float) -> Callable[[Any], Any]:
    """``--inside-c T``: inside air, °C."""
    return click.option("--inside-c", type=float, default=default, show_default=True, help="Inside air, °C.")


def outside_c_option(*, default: float, note: str = "") -> Callable[[Any], Any]:
    """``--outside-c T``: outside air, °C."""
    return click.option("--outside-c", type=float, default=default, show_default=True,
                        help="Outside air, °C" + (f" ({note})" if note else "") + ".")


def wind_m_s_option(*, default: float) -> Callable[[Any], Any]:
    """``--wind-m-s V``: wind speed at the surface, m/s."""
    return click.option("--wind-m-s", type=float, default=default, show_default=True,
                        help="Wind speed at the surface, m/s.")


def distance_m_option(*, help: str) -> Callable[[Any], Any]:
    """``--distance-m D``: camera to surface, m."""
    return click.option("--distance-m", type=float, default=None, help=help)


def hfov_deg_option(*, default: float) -> Callable[[Any], Any]:
    """``--hfov-deg A``: horizontal field of view, degrees."""
    return click.option("--hfov-deg", type=float, default=default, show_default=True,
                        help="Horizontal field of view, degrees.")


def netd_k_option(*, default: float) -> Callable[[Any], Any]:
    """``--netd-k N``: the camera's temporal noise (NETD), K."""
    return click.option("--netd-k", type=float, default=default, show_default=True,
                        help="Temporal noise of the camera (NETD), K.")


def size_px_option(*, default: tuple[int, int]) -> Callable[[Any], Any]:
    """``--size-px ROWS COLS``: image size in pixels, rows first."""
    return click.option("--size-px", type=(click.IntRange(min=8), click.IntRange(min=8)), default=default,
                        show_default=True, metavar="ROWS COLS", help="Image size in pixels: rows, then columns.")


def seed_option(*, help: str) -> Callable[[Any], Any]:
    """``--seed N``: a random seed (same seed, same output)."""
    return click.option("--seed", type=int, default=0, show_default=True, help=help)


def review_option() -> Callable[[Any], Any]:
    """``--review FILE``: the thermographer's review (``[[review]]`` tables) applied to the survey files."""
    return click.option("--review", type=click.Path(exists=True, dir_okay=False, path_type=Path), default=None,
                        metavar="FILE",
                        help="Review file of [[review]] tables (reject, accept or relabel anomalies; default: "
                        "review.toml in the survey folder). Applied without computing images again with --resume.")
