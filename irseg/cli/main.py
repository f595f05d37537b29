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

import sys

try:  # a Ctrl-C while the command line loads is an interrupt too: exit 130, one line, no traceback
    import signal
    import traceback
    from collections.abc import Iterator
    from contextlib import contextmanager
    from typing import Any

    import click

    from .._version import __version__
    from ..errors import IrsegError
    from ._exit import EXIT_ERROR, EXIT_INTERRUPTED, INTERRUPT_HINT, VERBOSE, describe
except KeyboardInterrupt:  # pragma: no cover - timing-dependent; exercised by tests/cli/test_stop_signals.py
    sys.stderr.write("Interrupted: irseg was starting; nothing was done.\n")
    raise SystemExit(130) from None

__all__ = ["cli"]

#: The line printed when an interrupt comes before a command has started its work.
_NOT_STARTED = "irseg was starting; nothing was done."

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


def _ignore_stop_signals() -> None:
    for signum in (signal.SIGINT, signal.SIGTERM):
        try:
            signal.signal(signum, signal.SIG_IGN)
        except (ValueError, OSError):  # not the main thread
            return


def _interrupted(hint: str) -> None:
    try:
        click.echo(f"Interrupted: {hint}", err=True)
    except (KeyboardInterrupt, OSError):  # a second Ctrl-C, or stderr gone: the exit code says it
        pass


def _silence_stdout() -> None:
    """Point stdout at /dev/null, so that flushing at exit does not raise a second BrokenPipeError."""
    import os
    import sys

    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):  # no real stdout (embedded use): nothing to silence
        pass


class _IrsegGroup(click.Group):
    """A click group that maps every command's exceptions to exit codes in one place.

    :meth:`main` runs click without its standalone handling so that a Ctrl-C or SIGTERM at
    any moment (also while the arguments are parsed) ends in exit 130 and one line, never
    click's "Aborted!" and exit 1; :meth:`invoke` maps the commands' exceptions.
    """

    def main(self, args: Any = None, prog_name: str | None = None, complete_var: str | None = None,
             standalone_mode: bool = True, **extra: Any) -> Any:
        if not standalone_mode:
            return super().main(args, prog_name, complete_var, standalone_mode, **extra)
        code: int = EXIT_INTERRUPTED
        try:
            with _sigterm_as_interrupt():
                try:
                    rv = super().main(args, prog_name, complete_var, False, **extra)
                except click.exceptions.Abort as exc:
                    if isinstance(exc.__cause__ or exc.__context__, KeyboardInterrupt):
                        raise KeyboardInterrupt from None
                    click.echo("Aborted!", err=True)
                    code = EXIT_ERROR
                except click.ClickException as exc:
                    exc.show()
                    code = exc.exit_code
                else:
                    code = rv if isinstance(rv, int) and not isinstance(rv, bool) else 0
        except KeyboardInterrupt:
            _interrupted(_NOT_STARTED)
            code = EXIT_INTERRUPTED
        if args is None:  # the process's own command line (not an embedding caller or a test runner):
            _ignore_stop_signals()  # the outcome is decided; a late Ctrl-C must not turn it into a signal death
        sys.exit(code)

    def invoke(self, ctx: click.Context) -> Any:
        try:
            return super().invoke(ctx)
        except (click.exceptions.Exit, click.ClickException, click.exceptions.Abort):
            raise
        except BrokenPipeError:  # the reader of our output went away (`irseg ... | head`): stop quietly
            _silence_stdout()
            ctx.exit(EXIT_ERROR)
        except KeyboardInterrupt:
            _interrupted(ctx.meta.get(INTERRUPT_HINT) or _NOT_STARTED)
            ctx.exit(EXIT_INTERRUPTED)
        except IrsegError as exc:
            if ctx.meta.get(VERBOSE):
                click.echo(traceback.format_exc().rstrip(), err=True)
            click.echo(f"Error: {describe(str(exc))}", err=True)
            ctx.exit(EXIT_ERROR)
        except Exception as exc:  # a bug: short message, traceback on request
            text = describe(f"unexpected {type(exc).__name__}: {_short(exc)}")
            if ctx.meta.get(VERBOSE):
                click.echo(traceback.format_exc().rstrip(), err=True)
                click.echo(f"Error: {text}", err=True)
            else:
                click.echo(f"Error: {text} (run again with -v for the traceback and please report it)", err=True)
            ctx.exit(EXIT_ERROR)


def _short(exc: BaseException, limit: int = 300) -> str:
    """An unexpected exception's text, cut to one screen line's worth."""
    text = str(exc)
    return text if len(text) <= limit else text[: limit - 3] + "..."


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


try:
    _register()
except KeyboardInterrupt:  # pragma: no cover - timing-dependent, as above
    sys.stderr.write(f"Interrupted: {_NOT_STARTED}\n")
    raise SystemExit(130) from None


if __name__ == "__main__":  # pragma: no cover - exercised through subprocess tests
    cli(prog_name="irseg")
