"""The ``irseg`` click group: registers every command and holds the one error -> exit-code map.

Exit codes of all commands: 0 success, 1 error (one ``Error: ...`` line), 2 usage error,
3 finished but some inputs failed, 130 interrupted (Ctrl-C or SIGTERM).

Commands parse options, make one library call and format its result; they never catch
irseg's exceptions. :class:`_IrsegGroup` does, here and nowhere else: an
:class:`~irseg.errors.IrsegError` becomes exit 1 with its message, a bug becomes exit 1 with
a short message (the traceback with ``-v``), an interrupt exit 130 with the command's hint.
Library messages name *settings* ("the max_pixels setting"); :func:`describe` rewrites them
to the flags of :data:`irseg.cli.options.SETTING_FLAGS` (``_exit.py`` holds the codes and
:func:`describe`, so commands and this map share them without importing each other).
"""

from __future__ import annotations

import signal
import traceback
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

import click

from .._version import __version__
from ..errors import IrsegError
from ._exit import EXIT_ERROR, EXIT_INTERRUPTED, INTERRUPT_HINT, VERBOSE, describe

__all__ = ["cli"]

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


class _IrsegGroup(click.Group):
    """A click group that maps every command's exceptions to exit codes in one place."""

    def invoke(self, ctx: click.Context) -> Any:
        try:
            with _sigterm_as_interrupt():
                return super().invoke(ctx)
        except (click.exceptions.Exit, click.ClickException, click.exceptions.Abort):
            raise
        except KeyboardInterrupt:
            hint = ctx.meta.get(INTERRUPT_HINT) or "interrupted"
            click.echo(f"Interrupted: {hint}", err=True)
            ctx.exit(EXIT_INTERRUPTED)
        except IrsegError as exc:
            if ctx.meta.get(VERBOSE):
                click.echo(traceback.format_exc().rstrip(), err=True)
            click.echo(f"Error: {describe(str(exc))}", err=True)
            ctx.exit(EXIT_ERROR)
        except Exception as exc:  # a bug: short message, traceback on request
            if ctx.meta.get(VERBOSE):
                click.echo(traceback.format_exc().rstrip(), err=True)
                click.echo(f"Error: unexpected {type(exc).__name__}: {exc}", err=True)
            else:
                click.echo(f"Error: unexpected {type(exc).__name__}: {exc} (run again with -v for the "
                           "traceback and please report it)", err=True)
            ctx.exit(EXIT_ERROR)


@click.group(cls=_IrsegGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "-V", "--version", prog_name="irseg")
def cli() -> None:
    """irseg: defect lists from building-envelope thermograms.

    Corrects radiometric thermograms for emissivity and reflected temperature,
    segments them into regions of different temperature, and estimates the
    area and extra heat loss of each anomaly. All figures are estimates: confirm
    defects on site and defer to local codes and licensed practice.
    """


def _register() -> None:
    from .scene import scene_cmd
    from .segment import segment_cmd

    cli.add_command(segment_cmd, "segment")
    cli.add_command(scene_cmd, "scene")


_register()


if __name__ == "__main__":  # pragma: no cover - exercised through subprocess tests
    cli(prog_name="irseg")
