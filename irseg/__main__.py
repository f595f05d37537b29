"""``python -m irseg`` runs the command line, same as the ``irseg`` script."""

from irseg.cli.main import cli

if __name__ == "__main__":  # pragma: no cover - exercised through subprocess tests
    cli(prog_name="irseg")
