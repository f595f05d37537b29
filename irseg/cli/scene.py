"""``irseg scene ...``: make synthetic thermograms with known truth (thin layer over irseg.scenes).

Only click is imported at module level; the physics loads when a command runs.
"""

from __future__ import annotations

from pathlib import Path

import click

from . import options as opt

__all__ = ["scene_cmd"]

# copies of irseg.scenes.PRESETS / FORMATS, so --help needs no physics import (test_survey keeps them in step)
_KINDS = ("timber-wall", "ceiling", "masonry-wall", "flat-roof")
_FORMATS = ("tiff-float", "tiff-u16", "png16", "csv", "npy")
# default camera distance per kind: the view must fit on the simulated element
_DISTANCE = {"timber-wall": 2.6, "ceiling": 2.4, "masonry-wall": 4.4, "flat-roof": 4.4}
_CENTRE = {"timber-wall": (1.2, 0.9), "ceiling": (1.2, 0.9), "masonry-wall": (2.0, 1.5), "flat-roof": (2.0, 1.5)}
_DEFAULT_OPTIONS = {
    "timber-wall": {"defects": ("bay:2",)},
    "ceiling": {},
    "masonry-wall": {"slab_y": 2.0, "patch": (1.0, 1.8, 0.8, 1.4)},
    "flat-roof": {},
}


@click.group("scene", short_help="Make synthetic thermograms with known defects (sample survey, tests).")
def scene_cmd() -> None:
    """Physics-based synthetic thermograms: each scene is simulated with and without its
    defects, so the truth (defect masks, excess heat, reference temperatures) is known.

    \b
    Examples:
      irseg scene sample sample_images
      irseg scene make timber-wall out/ --writer png16 --inside-c 21 --outside-c -3
    """


@scene_cmd.command("sample", short_help="Remake the bundled sample survey in OUT.")
@click.argument("out", type=click.Path(file_okay=False, path_type=Path))
def sample_cmd(out: Path) -> None:
    """Write the Larchfield test house sample survey (images, survey.toml, sidecars,
    truth.json, truth_masks.npz) into OUT. Seeded: the files are identical every time."""
    from irseg.scenes import make_sample_survey

    written: list[str] = []

    def _wrote(stem: str) -> None:
        written.append(stem)
        click.echo(f"wrote {stem}", err=True)

    records = make_sample_survey(out, on_image=_wrote)
    pair = len(written) - len(records)  # the pair under a pressure difference, with its own truth file
    extra = f", {pair} of them a pair under pressure with pair_truth.json" if pair > 0 else ""
    click.echo(f"{len(written)} images with survey.toml and truth.json{extra} in {out}")


@scene_cmd.command("make", short_help="Simulate one scene and write it with its sidecar and truth.")
@click.argument("kind", type=click.Choice(_KINDS))
@click.argument("out", type=click.Path(file_okay=False, path_type=Path))
@click.option("--stem", default=None, help="File name without suffix (default: the kind).")
@opt.writer_option(_FORMATS, default="tiff-float")
@opt.inside_c_option(default=20.0)
@opt.outside_c_option(default=0.0, note="flat-roof: ignored, the day-night schedule sets it")
@opt.wind_m_s_option(default=1.0)
@opt.distance_m_option(help="Camera to surface, m (default: 2.4-4.4 m by kind, so the view fits on the element).")
@opt.hfov_deg_option(default=45.0)
@opt.size_px_option(default=(240, 320))
@opt.netd_k_option(default=0.05)
@opt.seed_option(help="Seed of the camera noise (same seed, same file).")
def make_cmd(kind: str, out: Path, stem: str | None, writer: str, inside_c: float, outside_c: float,
             wind_m_s: float, distance_m: float | None, hfov_deg: float, size_px: tuple[int, int], netd_k: float,
             seed: int) -> None:
    """Simulate a KIND scene (timber-wall, ceiling, masonry-wall, flat-roof) and write the image,
    its <stem>.toml sidecar and <stem>.truth.json into OUT."""
    from irseg.scenes import CameraModel, ImageRecipe, export_image, write_truth_json

    options = dict(_DEFAULT_OPTIONS[kind], inside_c=inside_c, wind_m_s=wind_m_s)
    if kind != "flat-roof":
        options["outside_c"] = outside_c
    integer = writer in ("tiff-u16", "png16")
    n_rows, n_cols = size_px
    recipe = ImageRecipe(
        stem or kind, f"synthetic {kind} scene", kind, options,
        CameraModel(n_cols=n_cols, n_rows=n_rows, hfov_deg=hfov_deg,
                    distance_m=distance_m or _DISTANCE[kind],
                    centre_m=_CENTRE[kind], netd_k=netd_k, seed=seed),
        writer, scale=0.01 if integer else 1.0, offset=-100.0 if integer else 0.0,
    )
    rec = export_image(recipe, out)
    write_truth_json(out / f"{recipe.stem}.truth.json", rec)
    click.echo(f"wrote {out / rec['image']} with {len(rec['defects'])} defect(s); truth in {recipe.stem}.truth.json")
