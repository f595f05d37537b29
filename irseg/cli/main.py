"""The ``irseg`` click group; registers every command explicitly.

Exit codes of all commands: 0 success, 1 error (one ``Error: ...`` line),
2 usage error, 3 finished but some inputs failed, 130 interrupted.
"""

from __future__ import annotations

import click

from .._version import __version__
from .scene import scene_cmd
from .segment import segment_cmd

__all__ = ["cli"]


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "-V", "--version", prog_name="irseg")
def cli() -> None:
    """irseg: defect lists from building-envelope thermograms.

    Corrects radiometric thermograms for emissivity and reflected temperature,
    segments them into regions of different temperature, and estimates the
    area and extra heat loss of each anomaly. All figures are estimates: confirm
    defects on site and defer to local codes and licensed practice.
    """


cli.add_command(segment_cmd, "segment")
cli.add_command(scene_cmd)


if __name__ == "__main__":  # pragma: no cover - exercised through subprocess tests
    cli(prog_name="irseg")
