"""``python -m irseg.scenes [OUT]``: remake the sample survey in OUT (default ``sample_images``).

The same as ``irseg scene sample OUT``, and run through the ``irseg`` command line, so an
error prints one ``Error: ...`` line and exits with status 1 (see :mod:`irseg.cli.main`).
"""

from __future__ import annotations

import sys


def main(argv: list[str] | None = None) -> None:
    """Run ``irseg scene sample`` with ``argv`` (default ``sys.argv[1:]``, or ``sample_images``); exits."""
    from irseg.cli.main import cli

    args = list(sys.argv[1:] if argv is None else argv) or ["sample_images"]
    cli.main(["scene", "sample", *args], prog_name="irseg")


if __name__ == "__main__":  # pragma: no cover - exercised through a subprocess test
    main()
