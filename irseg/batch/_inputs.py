"""Finding a survey's images and giving each a unique, safe output name (used by irseg.batch)."""

from __future__ import annotations

import os
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from ..errors import ConfigError, InputError
from ..io import is_candidate, metadata_candidates, safe_component

__all__ = ["InputImage", "collect_inputs", "RESERVED_NAMES"]

#: Names under OUT that belong to the survey-level files.
RESERVED_NAMES = ("anomalies.csv", "summary.json", "report.html", "failures.csv", "run.log")


@dataclass(frozen=True)
class InputImage:
    """One image of a survey.

    Attributes
    ----------
    index : int
        Position in the survey order.
    path : str
        Absolute path of the file (never written to data files).
    rel : str
        Path relative to the survey root (POSIX separators).
    image : str
        Name used in the outputs: the file name, or ``rel`` when file names repeat.
    stem : str
        Output folder name under OUT: safe, unique (case-insensitively).
    """

    index: int
    path: str
    rel: str
    image: str
    stem: str


def _walk(folder: Path, exclude: Path | None) -> list[Path]:
    found: list[Path] = []
    for dirpath, dirnames, filenames in os.walk(folder, followlinks=False):
        current = Path(dirpath)
        keep = []
        for name in dirnames:
            sub = current / name
            if name.startswith("."):
                continue
            if exclude is not None and _same_or_inside(sub, exclude):
                continue
            keep.append(name)
        dirnames[:] = sorted(keep)
        for name in filenames:
            file = current / name
            if is_candidate(file) and file.is_file():  # not hidden files, metadata or other suffixes
                found.append(file)
    return sorted(found, key=lambda p: p.relative_to(folder).as_posix())


def _same_or_inside(path: Path, other: Path) -> bool:
    try:
        a, b = path.resolve(), other.resolve()
    except OSError:
        return False
    return a == b or b in a.parents


def collect_inputs(
    inputs: Iterable[str | os.PathLike[str]], *, exclude: str | os.PathLike[str] | None = None
) -> tuple[list[InputImage], str]:
    """Expand files and folders into the survey's images, in a deterministic order.

    Folders are searched recursively for the files :func:`irseg.io.is_candidate`
    accepts, sorted by relative path. Files given explicitly are kept in the order
    given, even when no reader claims them (so the failure is reported), except
    metadata files (a ``survey.toml`` or a sidecar). Repeats are dropped.

    Parameters
    ----------
    inputs : iterable of path-like
        Files and folders.
    exclude : path-like, optional
        A folder never searched (the output folder).

    Returns
    -------
    images : list of InputImage
    root : str
        The common folder the relative names are taken from (absolute; kept out of data files).

    Raises
    ------
    InputError
        If an input does not exist or no image is found.
    ConfigError
        If the output folder is an input folder or contains one.
    """
    excluded = Path(exclude) if exclude is not None else None
    files: list[Path] = []
    given = [Path(p) for p in inputs]
    if not given:
        raise InputError("no input given; name image files or survey folders")
    for entry in given:
        if excluded is not None and entry.is_dir() and _same_or_inside(entry, excluded):
            raise ConfigError(
                f"{excluded}: the output folder is, or contains, the input folder {entry}; "
                "choose a separate output folder (the out_dir setting; a subfolder of the survey is fine)"
            )
        if entry.is_dir():
            found = _walk(entry, excluded)
            if not found:
                raise InputError(
                    f"{entry}: no thermograms found in this folder; irseg reads TIFF, 16-bit PNG, CSV/TXT and NPY files"
                )
            files.extend(found)
        elif entry.is_file():
            if is_candidate(entry) or entry not in metadata_candidates(entry):
                files.append(entry)  # kept even when no reader claims it, so its failure is reported
        elif os.path.lexists(entry):
            raise InputError(f"{entry}: is neither a file nor a folder (broken link?); check the path")
        else:
            raise InputError(f"{entry}: no such file or folder; check the path")
    unique: list[Path] = []
    seen: set[str] = set()
    for file in files:
        key = os.path.realpath(file)
        if key not in seen:
            seen.add(key)
            unique.append(Path(os.path.abspath(file)))
    if not unique:
        raise InputError("no thermograms among the inputs (.toml files are metadata, not images)")
    root = os.path.commonpath([str(p.parent) for p in unique])
    rels = [PurePosixPath(Path(os.path.relpath(p, root)).as_posix()) for p in unique]
    names = [r.name for r in rels]
    name_counts: dict[str, int] = {}
    for n in names:
        name_counts[n] = name_counts.get(n, 0) + 1
    images = [str(r) if name_counts[r.name] > 1 else r.name for r in rels]
    stems = _unique_stems(rels)
    return [
        InputImage(index=i, path=str(p), rel=str(r), image=img, stem=s)
        for i, (p, r, img, s) in enumerate(zip(unique, rels, images, stems))
    ], root


def _unique_stems(rels: list[PurePosixPath]) -> list[str]:
    """Safe output folder names: the stem, or the relative path joined with '__' when stems repeat."""

    def clean(text: str) -> str:
        return safe_component(text, reserved=RESERVED_NAMES)

    first = [clean(r.stem) for r in rels]
    counts = _counts(first)
    second = [
        f if counts[f.lower()] == 1 else clean("__".join([*r.parent.parts, r.stem])) for f, r in zip(first, rels)
    ]
    counts = _counts(second)
    third = [
        s if counts[s.lower()] == 1 else clean("__".join([*r.parent.parts, r.name])) for s, r in zip(second, rels)
    ]
    result: list[str] = []
    used: set[str] = set()
    for name in third:
        candidate, k = name, 2
        while candidate.lower() in used:
            candidate = f"{name}-{k}"
            k += 1
        used.add(candidate.lower())
        result.append(candidate)
    return result


def _counts(names: list[str]) -> dict[str, int]:
    counts: dict[str, int] = {}
    for n in names:
        counts[n.lower()] = counts.get(n.lower(), 0) + 1
    return counts
