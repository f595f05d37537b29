"""Synthetic survey folders for the batch and CLI tests (no tests here; imported by them).

Images are small float32 arrays of surface temperature in °C: a uniform wall with
Gaussian noise and one rectangular cold patch whose position and contrast are known
by construction. Invented data for tests only.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

#: survey.toml of the synthetic survey: interior view, 20 K inside-outside difference.
SURVEY_TOML = """\
[camera]
distance_m = 3.0
hfov_deg = 45.0

[surface]
emissivity = 0.95
reflected_c = 20.0
view = "interior"

[air]
inside_c = 20.0
outside_c = 0.0
"""

SHAPE = (64, 80)


def wall_image(seed: int, *, shape: tuple[int, int] = SHAPE, cold_k: float = 3.0,
               box: tuple[int, int, int, int] = (20, 30, 36, 50)) -> np.ndarray:
    """A 20 °C wall, noise 0.05 K, a cold patch ``box = (row0, col0, row1, col1)`` (exclusive)."""
    rng = np.random.default_rng(seed)
    image = np.full(shape, 20.0, np.float32) + rng.normal(0.0, 0.05, shape).astype(np.float32)
    r0, c0, r1, c1 = box
    image[r0:r1, c0:c1] -= np.float32(cold_k)
    return image


def make_survey(folder: Path, n: int = 3, *, shape: tuple[int, int] = SHAPE, tiff: bool = True) -> list[Path]:
    """Write ``n`` good images (NPY, and one TIFF when ``tiff``) plus survey.toml; return their paths."""
    import tifffile

    folder.mkdir(parents=True, exist_ok=True)
    (folder / "survey.toml").write_text(SURVEY_TOML, encoding="utf-8")
    paths = []
    for k in range(n):
        image = wall_image(k, shape=shape, cold_k=2.0 + k)
        if tiff and k == n - 1:
            path = folder / f"wall_{k:02d}.tif"
            tifffile.imwrite(path, image)
        else:
            path = folder / f"wall_{k:02d}.npy"
            np.save(path, image)
        paths.append(path)
    return paths


def make_bad_inputs(folder: Path) -> dict[str, str]:
    """Write one file of every bad kind; return ``{file name: expected failure stage}``."""
    import cv2
    import tifffile

    rng = np.random.default_rng(7)
    expected: dict[str, str] = {}
    good = wall_image(99)

    tifffile.imwrite(folder / "truncated.tif", good)
    blob = (folder / "truncated.tif").read_bytes()
    (folder / "truncated.tif").write_bytes(blob[: len(blob) // 3])
    expected["truncated.tif"] = "read"

    (folder / "noise.png").write_bytes(rng.bytes(4000))
    expected["noise.png"] = "read"

    photo = rng.integers(0, 255, (40, 50, 3), dtype=np.uint8)
    cv2.imwrite(str(folder / "photo.png"), photo)
    expected["photo.png"] = "read"

    (folder / "empty.csv").write_bytes(b"")
    expected["empty.csv"] = "read"
    (folder / "ragged.csv").write_text("20.1,20.2,20.3\n20.1,20.2\n20.0,20.1,20.2\n", encoding="utf-8")
    expected["ragged.csv"] = "read"
    (folder / "words.csv").write_text("warm,cold\nwall,roof\n", encoding="utf-8")
    expected["words.csv"] = "read"

    np.save(folder / "all_nan.npy", np.full(SHAPE, np.nan, np.float32))
    expected["all_nan.npy"] = "calibrate"
    np.save(folder / "tiny.npy", np.full((2, 2), 20.0, np.float32))
    expected["tiny.npy"] = "segment"

    for name, text in {
        "bad_type": '[surface]\nemissivity = "high"\n',
        "bad_key": "[surface]\nemisivity = 0.9\n",
        "bad_eps": "[surface]\nemissivity = 0.0\n",
        "bad_distance": "[camera]\ndistance_m = -2.0\n",
    }.items():
        np.save(folder / f"{name}.npy", good)
        (folder / f"{name}.toml").write_text(text, encoding="utf-8")
        expected[f"{name}.npy"] = "metadata"
    return expected


def hash_tree(folder: Path) -> dict[str, str]:
    """sha256 of every file under ``folder`` (relative POSIX name -> hex)."""
    return {
        p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def data_files(out: Path) -> dict[str, bytes]:
    """Bytes of every CSV/JSON data file under OUT (run.log excluded: it carries timestamps)."""
    return {
        p.relative_to(out).as_posix(): p.read_bytes()
        for p in sorted(out.rglob("*"))
        if p.is_file() and p.suffix in {".csv", ".json"}
    }


def crash_on_second(task: dict) -> int:
    """A pool task that kills its worker process for index 1 (for the worker-death test)."""
    import os

    if task["index"] == 1:
        os._exit(3)
    return task["index"]
