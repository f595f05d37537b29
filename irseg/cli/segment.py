"""``irseg segment INPUT... -o OUT``: process a survey (parsing only; the work is irseg.batch.run_survey)."""

from __future__ import annotations

import signal
import sys
import tomllib
import traceback
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import click

from ..errors import IrsegError
from ..pipeline import DEFAULT_MAX_PIXELS

__all__ = ["segment_cmd", "parse_set"]

EXIT_OK, EXIT_ERROR, EXIT_USAGE, EXIT_PARTIAL, EXIT_INTERRUPTED = 0, 1, 2, 3, 130

CAUTION_LINE = (
    "All figures are estimates: confirm each defect on site before repairs or budgets, follow local "
    "codes and licensed practice, and mind the safety cautions in the report."
)

# The metadata options: flag, [section] key, type, help. The one table behind both the click
# options and the overrides they become.
_OVERRIDE_OPTIONS: tuple[tuple[str, str, str, Any, str], ...] = (
    ("--emissivity", "surface", "emissivity", float, "[surface] emissivity, (0, 1]."),
    ("--reflected-c", "surface", "reflected_c", float, "[surface] reflected_c, reflected temperature in °C."),
    ("--view", "surface", "view", click.Choice(["interior", "exterior", "roof"]), "[surface] view."),
    ("--inside-c", "air", "inside_c", float, "[air] inside_c, inside air temperature in °C."),
    ("--outside-c", "air", "outside_c", float, "[air] outside_c, outside air temperature in °C."),
    ("--wind", "air", "wind_m_s", float, "[air] wind_m_s, wind speed at the surface in m/s."),
    ("--distance", "camera", "distance_m", float, "[camera] distance_m, camera to surface in m."),
    ("--hfov", "camera", "hfov_deg", float, "[camera] hfov_deg, horizontal field of view in degrees."),
    ("--pixel-m", "camera", "pixel_m", float, "[camera] pixel_m, pixel footprint on the surface in m."),
    ("--min-step-k", "segment", "min_step_k", float, "[segment] min_step_k, smallest step that makes an edge, K."),
    ("--noise-k", "segment", "noise_k", float, "[segment] noise_k, image noise in K (default: estimated)."),
    ("--degree-days", "analysis", "degree_days", float, "[analysis] degree_days, K·d per year."),
    ("--frsi-limit", "analysis", "frsi_limit", float, "[analysis] frsi_limit, mould-risk limit of f_Rsi."),
)

# click's parameter name of each option -> (section, key)
_OVERRIDES = {flag[2:].replace("-", "_"): (section, key) for flag, section, key, _, _ in _OVERRIDE_OPTIONS}


def _override_options(command: Any) -> Any:
    """Add the metadata options of :data:`_OVERRIDE_OPTIONS`, in table order, to a click command."""
    for flag, _, _, kind, text in reversed(_OVERRIDE_OPTIONS):
        command = click.option(flag, type=kind, help=text)(command)
    return command


def parse_set(text: str) -> tuple[str, str, Any]:
    """Split ``section.key=value``; the value is read as a TOML value, else kept as text.

    Raises
    ------
    click.BadParameter
        Not of the form ``section.key=value``.
    """
    name, sep, raw = text.partition("=")
    section, dot, key = name.strip().partition(".")
    if not sep or not dot or not section or not key or "." in key:
        raise click.BadParameter(
            f"{text!r} is not section.key=value, e.g. --set surface.emissivity=0.95", param_hint="--set"
        )
    raw = raw.strip()
    try:
        value = tomllib.loads(f"v = {raw}")["v"]
    except tomllib.TOMLDecodeError:
        value = raw
    return section.strip(), key.strip(), value


def _overrides(options: dict[str, Any], sets: tuple[str, ...]) -> dict[str, dict[str, Any]]:
    result: dict[str, dict[str, Any]] = {}
    for item in sets:
        section, key, value = parse_set(item)
        result.setdefault(section, {})[key] = value
    for option, (section, key) in _OVERRIDES.items():
        if options.get(option) is not None:
            result.setdefault(section, {})[key] = options[option]
    return result


@contextmanager
def _sigterm_as_interrupt() -> Iterator[None]:
    def handler(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, handler)
    except ValueError:  # not the main thread (e.g. embedded use)
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _heat_text(excess_w: float | None, excess_kwh_year: float | None, *, n_anomalies: int,
               n_unmeasured: int) -> str:
    if n_anomalies == 0:
        return "no excess heat loss to estimate"
    if excess_w is None and excess_kwh_year is None:
        return ("no excess heat-loss estimate; where the report warns of missing geometry or air "
                "temperatures, give --distance and --hfov (or --pixel-m) and --inside-c/--outside-c")
    watts = "W n/a" if excess_w is None else f"{excess_w:,.0f} W"
    energy = "kWh/year n/a" if excess_kwh_year is None else f"{excess_kwh_year:,.0f} kWh/year"
    text = f"estimated excess heat loss {watts}, {energy}"
    if n_unmeasured:
        text += f" ({n_unmeasured} of {n_anomalies} anomalies have no estimate and are not counted)"
    return text


def _readers() -> list[str]:
    from ..io import list_readers

    return list_readers()


@click.command("segment", short_help="Process a survey: defect list, overlays, report.",
               context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("inputs", metavar="INPUT...", nargs=-1, required=True,
                type=click.Path(exists=True, path_type=Path))
@click.option("-o", "--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Output folder (created; only files irseg names are written there).")
@click.option("-j", "--jobs", type=click.IntRange(min=1), default=None,
              help="Worker processes (default: all cores; 1 = in this process).")
@click.option("--resume", is_flag=True,
              help="Skip images whose outputs are complete and match the input, metadata and settings.")
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Run on dask.distributed: 'local' starts a local cluster, else a scheduler address "
              "(tcp://host:8786) whose workers have irseg installed.")
@click.option("--format", "format_", type=click.Choice(_readers()), default=None,
              help="Force a reader instead of detecting the format.")
@click.option("--max-pixels", type=click.IntRange(min=1), default=DEFAULT_MAX_PIXELS, show_default=True,
              help="Largest image accepted, in pixels (rows x columns), checked before decoding.")
@click.option("--cmap", default="inferno", show_default=True,
              help="Colour map of the overlays (inferno, magma, plasma, viridis, cividis, turbo, gray).")
@click.option("--fail-fast", is_flag=True, help="Stop at the first failed image (exit 1).")
@_override_options
@click.option("--set", "sets", metavar="SECTION.KEY=VALUE", multiple=True,
              help="Any metadata key, e.g. --set camera.tilt_deg=20 (repeatable; applied before the options above).")
@click.option("-q", "--quiet", is_flag=True, help="Print only errors and failed images.")
@click.option("-v", "--verbose", is_flag=True, help="Show tracebacks of failures.")
@click.pass_context
def segment_cmd(ctx: click.Context, inputs: tuple[Path, ...], out_dir: Path, jobs: int | None, resume: bool,
                scheduler: str | None, format_: str | None, max_pixels: int, cmap: str, fail_fast: bool,
                sets: tuple[str, ...], quiet: bool, verbose: bool, **options: Any) -> None:
    """Segment thermograms and write the defect list, images and report to OUT.

    INPUT are image files (TIFF, 16-bit PNG, CSV/TXT, NPY) and/or folders, searched
    recursively. Metadata comes from survey.toml in each image's folder, then the
    sidecar <stem>.toml beside the image, then the options below.

    Exit status: 0 all images ok, 1 error, 2 usage error, 3 finished but some
    inputs failed (listed in OUT/failures.csv), 130 interrupted (run again with
    --resume to finish).
    """
    from ..batch import run_survey

    overrides = _overrides(options, sets)
    show_bar = sys.stderr.isatty() and not quiet
    bar = None
    if show_bar:
        from tqdm import tqdm

        bar = tqdm(total=0, unit="image", file=sys.stderr, dynamic_ncols=True, leave=False)

    def say_err(text: str) -> None:
        if bar is not None:
            bar.write(text, file=sys.stderr)
        else:
            click.echo(text, err=True)

    def progress(done: int, total: int, outcome: Any) -> None:
        if bar is not None:
            bar.total = total
            bar.update(done - bar.n)
            bar.set_postfix_str(outcome.image, refresh=False)
        if outcome.failure is not None:
            failure = outcome.failure
            message = failure.message.removeprefix(f"{Path(failure.file).name}: ")
            say_err(f"{failure.file}: failed at {failure.stage}: {message}")
            if verbose and failure.traceback:
                say_err(failure.traceback.rstrip())

    try:
        with _sigterm_as_interrupt():
            result = run_survey(
                [str(p) for p in inputs], out_dir, jobs=jobs, resume=resume, scheduler=scheduler,
                overrides=overrides or None, fail_fast=fail_fast, on_progress=progress,
                format=format_, max_pixels=max_pixels, cmap=cmap,
            )
    except KeyboardInterrupt:
        if bar is not None:
            bar.close()
        click.echo(f"Interrupted: completed images are kept in {out_dir}; run the same command with "
                   "--resume to finish.", err=True)
        ctx.exit(EXIT_INTERRUPTED)
    except IrsegError as exc:
        if bar is not None:
            bar.close()
        if verbose:
            click.echo(traceback.format_exc().rstrip(), err=True)
        click.echo(f"Error: {exc}", err=True)
        ctx.exit(EXIT_ERROR)
    except Exception as exc:  # a bug: short message, traceback on request
        if bar is not None:
            bar.close()
        if verbose:
            click.echo(traceback.format_exc().rstrip(), err=True)
            click.echo(f"Error: unexpected {type(exc).__name__}: {exc}", err=True)
        else:
            click.echo(f"Error: unexpected {type(exc).__name__}: {exc} (run again with -v for the "
                       "traceback and please report it)", err=True)
        ctx.exit(EXIT_ERROR)
    if bar is not None:
        bar.close()
    if not quiet:
        resumed = f" ({result.n_skipped} resumed)" if result.n_skipped else ""
        failed = f", {result.n_failed} failed (see {out_dir / 'failures.csv'})" if result.n_failed else ""
        heat = _heat_text(result.excess_w, result.excess_kwh_year, n_anomalies=result.n_anomalies,
                          n_unmeasured=int(result.summary["totals"].get("n_unmeasured") or 0))
        click.echo(
            f"irseg: {result.n_ok} of {len(result.outcomes)} images ok{resumed}{failed}; "
            f"{result.n_anomalies} anomalies; {heat}; "
            f"report: {result.report_path}"
        )
        click.echo(CAUTION_LINE)
    ctx.exit(EXIT_PARTIAL if result.n_failed else EXIT_OK)
