"""``python -m irseg.scenes OUT``: remake the sample survey in OUT (default ``sample_images``)."""

from __future__ import annotations

import sys

from irseg.scenes._survey import make_sample_survey


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    out = args[0] if args else "sample_images"
    records = make_sample_survey(out, on_image=lambda stem: print(f"wrote {stem}", file=sys.stderr))
    print(f"{len(records)} images, truth.json and survey.toml in {out}")
    return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
