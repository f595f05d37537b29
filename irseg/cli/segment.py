"""``irseg segment INPUT... -o OUT``: process a survey (parsing only; the work is irseg.batch.run_survey)."""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Any

import click

from .._shared import escape_name
from ..vocabulary import CAUTION_LINE
from . import options as opt
from ._exit import EXIT_OK, EXIT_PARTIAL, INTERRUPT_HINT, VERBOSE, describe

__all__ = ["segment_cmd"]


def _heat_text(excess_w: float | None, excess_kwh_year: float | None, *, n_anomalies: int,
               n_unmeasured: int) -> str:
    if n_anomalies == 0:
        return "no excess heat loss to estimate"
    if excess_w is None and excess_kwh_year is None:
        return ("no excess heat-loss estimate; where the report warns of missing geometry or air "
                "temperatures, give --distance-m and --hfov-deg (or --pixel-m) and --inside-c/--outside-c")
    watts = "W n/a" if excess_w is None else f"{excess_w:,.0f} W"
    energy = "kWh/year n/a" if excess_kwh_year is None else f"{excess_kwh_year:,.0f} kWh/year"
    text = f"estimated excess heat loss {watts}, {energy}"
    if n_unmeasured:
        text += f" ({n_unmeasured} of {n_anomalies} anomalies have no estimate and are not counted)"
    return text


# a copy of irseg.io.list_readers(), so that the command line starts without NumPy (a Ctrl-C
# at start-up then finds irseg's handler in place); tests/cli keeps the two in step
READERS = ("csv", "npy", "png", "tiff")


@click.command("segment", short_help="Process a survey: defect list, overlays, report.",
               context_settings={"help_option_names": ["-h", "--help"]})
@click.argument("inputs", metavar="INPUT...", nargs=-1, required=True,
                type=click.Path(exists=True, path_type=Path))
@opt.out_dir_option(help="Output folder (created; only files irseg names are written there).")
@opt.jobs_option()
@click.option("--resume", is_flag=True,
              help="Skip images whose outputs are complete and match the input, metadata and settings.")
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Run on dask.distributed: 'local' starts a local cluster, else a scheduler address "
              "(tcp://host:8786) whose workers have irseg installed.")
@opt.reader_option(list(READERS))
@opt.max_pixels_option()
@opt.cmap_option()
@opt.overlay_options
@click.option("--fail-fast", is_flag=True, help="Stop at the first failed image (exit 1).")
@opt.review_option()
@opt.metadata_options
@click.option("--set", "sets", metavar="SECTION.KEY=VALUE", multiple=True,
              help="Any metadata key, e.g. --set camera.tilt_deg=20 (repeatable; applied before the options above).")
@opt.quiet_option()
@opt.verbose_option()
@click.pass_context
def segment_cmd(ctx: click.Context, inputs: tuple[Path, ...], out_dir: Path, jobs: int | None, resume: bool,
                scheduler: str | None, reader: str | None, max_pixels: int, cmap: str, fail_fast: bool,
                review: Path | None, sets: tuple[str, ...], quiet: bool, verbose: bool, show_jumps: bool,
                range_c: str, csv_dialect: str, **options: Any) -> None:
    """Segment thermograms and write the defect list, images and report to OUT.

    INPUT are image files (TIFF, 16-bit PNG, CSV/TXT, NPY) and/or folders, searched
    recursively. Metadata comes from survey.toml in each image's folder, then the
    sidecar <stem>.toml beside the image, then the options below.

    Exit status: 0 all images ok, 1 error, 2 usage error, 3 finished but some
    inputs failed (listed in OUT/failures.csv), 130 interrupted (run again with
    --resume to finish).
    """
    from ..batch import run_survey

    ctx.meta[VERBOSE] = verbose
    ctx.meta[INTERRUPT_HINT] = (f"completed images are kept in {escape_name(str(out_dir))}; run the same "
                                "command with --resume to finish.")
    overrides = opt.overrides_from(options, sets)
    bar = None
    if sys.stderr.isatty() and not quiet:
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
            bar.set_postfix_str(escape_name(outcome.image), refresh=False)
        if outcome.failure is not None:
            failure = outcome.failure
            message = describe(failure.message.removeprefix(f"{Path(failure.image).name}: "))
            # names escaped: a newline or an escape sequence in a file name cannot forge a line
            say_err(f"{escape_name(failure.image)}: failed at {failure.stage}: {message}")
            if verbose and failure.traceback:
                say_err(failure.traceback.rstrip())

    try:
        result = run_survey(
            [str(p) for p in inputs], out_dir, jobs=jobs, resume=resume, scheduler=scheduler,
            overrides=overrides or None, fail_fast=fail_fast, on_progress=progress,
            format=reader, max_pixels=max_pixels, cmap=cmap, review=review,
            show_jumps=show_jumps, range_c=range_c, csv_dialect=csv_dialect,
        )
    finally:
        if bar is not None:
            bar.close()
    if not quiet:
        resumed = f" ({result.n_skipped} resumed)" if result.n_skipped else ""
        n_pairs = sum(f.stage == "pair" for f in result.failures)  # pairs under pressure (irseg.pairs)
        parts = [f"{result.n_failed - n_pairs} failed"] if result.n_failed > n_pairs else []
        parts += [f"{n_pairs} pair{'' if n_pairs == 1 else 's'} under pressure failed"] if n_pairs else []
        failed = (f", {', '.join(parts)} (see {escape_name(str(out_dir / 'failures.csv'))})" if parts else "")
        defects = result.summary["defects"]  # the same figures as the report's first page
        heat = _heat_text(defects["excess_w"], defects["excess_kwh_year"], n_anomalies=int(defects["count"]),
                          n_unmeasured=int(defects.get("n_unmeasured") or 0))
        expected, repeated = (int(defects.get(key) or 0) for key in ("n_expected", "n_repeated"))
        apart = ([f"{expected} framing expected in the construction"] if expected else []) + (
            [f"{repeated} seen again under pressure"] if repeated else [])
        found = (f"{result.n_anomalies} anomalies ({defects['count']} probable defects; not counted: "
                 f"{', '.join(apart)})" if apart else f"{result.n_anomalies} anomalies")
        click.echo(
            f"irseg: {result.n_ok} of {len(result.outcomes)} images ok{resumed}{failed}; "
            f"{found}; {heat}; "
            f"report: {escape_name(str(result.report_path))}"
        )
        click.echo(CAUTION_LINE)
    ctx.exit(EXIT_PARTIAL if result.n_failed else EXIT_OK)
