"""Finding a survey's images and giving each a unique, safe output name (used by irseg.batch).

A folder scan reads every entry once and says why it leaves a file out: each skipped file
or folder becomes a :class:`SkippedFile` (written to run.log, summary.json and the report).
Only hidden names (starting with ``.``), ``.toml`` metadata files, the photos of the images
(``<stem>_photo.jpg``/``.jpeg``/``.png`` or an ``[image] photo``, shown in the report) and the
run's own output folder are left out without a word.
"""

from __future__ import annotations

import os
import stat
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

from ..controls import photo_files
from ..errors import ConfigError, InputError
from ..io import MANIFEST_NAME, escape_text, is_candidate, metadata_candidates, read_json_file, safe_component

__all__ = [
    "InputImage", "SkippedFile", "SurveyInputs", "collect_inputs", "scan_inputs", "relativise", "RESERVED_NAMES",
]

#: Names under OUT that belong to the survey-level files.
RESERVED_NAMES = ("anomalies.csv", "summary.json", "report.html", "failures.csv", "run.log", "repairs.csv",
                  "confirm_points.csv")

#: Files whose presence (with irseg's content) marks a folder of irseg outputs.
_OUTPUT_MARKERS = ("result.json", "summary.json")


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
        Path relative to the survey root (POSIX separators; bytes that are not valid in
        the filesystem encoding escaped as ``\\xNN``).
    image : str
        Name used in the outputs: the file name, or ``rel`` when file names repeat (escaped
        like ``rel``).
    stem : str
        Output folder name under OUT: safe, unique (case-insensitively), at most
        :data:`irseg.io.MAX_NAME_BYTES` bytes.
    base : str
        Absolute folder ``rel`` is relative to: the survey root, or, for inputs that share
        no folder but the filesystem root, the folder above the file's own (never written
        to data files; messages drop it).
    """

    index: int
    path: str
    rel: str
    image: str
    stem: str
    base: str = ""


@dataclass(frozen=True)
class SkippedFile:
    """A file or folder that a scan left out, and why.

    Attributes
    ----------
    file : str
        Path relative to the survey root (POSIX separators, escaped like
        :attr:`InputImage.rel`); a folder ends with ``/``.
    reason : str
        E.g. ``"not a thermogram (no reader for .jpg files)"``, ``"cannot read folder
        (Permission denied)"``, ``"holds irseg outputs"``.
    """

    file: str
    reason: str


@dataclass(frozen=True)
class SurveyInputs:
    """What :func:`scan_inputs` found.

    Attributes
    ----------
    images : tuple of InputImage
        In survey order.
    root : str
        The common folder of the inputs (absolute; kept out of data files).
    skipped : tuple of SkippedFile
        Sorted by ``file``.
    """

    images: tuple[InputImage, ...]
    root: str
    skipped: tuple[SkippedFile, ...]


# --------------------------------------------------------------------------- the scan


def _holds_outputs(folder: Path, names: set[str]) -> bool:
    """True for a folder of irseg outputs: its manifest, or a result/summary JSON irseg wrote."""
    if MANIFEST_NAME in names:
        return True
    for marker in _OUTPUT_MARKERS:
        if marker in names:
            data = read_json_file(folder / marker, max_bytes=16 << 20)
            if isinstance(data, dict) and "irseg_version" in data:
                return True
    return False


def _not_a_thermogram(name: str) -> str:
    suffix = Path(name).suffix.lower()
    return f"not a thermogram (no reader for {suffix} files)" if suffix else "not a thermogram (no suffix)"


def _walk(folder: Path, exclude: Path | None, skipped: list[tuple[Path, str, bool]]) -> list[Path]:
    """Candidate image files under ``folder``; every other entry that is not hidden lands in ``skipped``."""
    found: list[Path] = []
    pending = [folder]
    while pending:
        current = pending.pop()
        top = current == folder
        reason = ""
        entries: list[os.DirEntry[str]] = []
        if not os.access(current, os.R_OK | os.X_OK):
            reason = "cannot read folder (no read or search permission)"
        else:
            try:
                with os.scandir(current) as listing:
                    entries = sorted(listing, key=lambda e: e.name)
            except OSError as exc:
                reason = f"cannot read folder ({exc.strerror or exc})"
        if not reason and _holds_outputs(current, {e.name for e in entries}):
            reason = "holds irseg outputs (the output folder of an earlier run)"
        if reason:
            if top:
                fix = "name the folder of thermograms instead" if reason.startswith("holds") else "check its permissions"
                raise InputError(f"{folder}: {reason}; {fix}")
            skipped.append((current, reason, True))
            continue
        subfolders: list[Path] = []
        for entry in entries:
            if entry.name.startswith("."):
                continue  # hidden files and folders: silent (the guide says so)
            path = Path(entry.path)
            try:
                is_link, is_dir = entry.is_symlink(), entry.is_dir()
            except OSError as exc:
                skipped.append((path, f"cannot read ({exc.strerror or exc})", False))
                continue
            if is_dir:
                if exclude is not None and _same_or_inside(path, exclude):
                    continue  # this run's output folder
                if is_link:
                    reason = "link to a folder (not followed; name the folder itself to include it)"
                    skipped.append((path, reason, True))
                else:
                    subfolders.append(path)
                continue
            if path.suffix.lower() == ".toml":
                continue  # metadata, read with the images of its folder
            if not is_candidate(path):
                skipped.append((path, _not_a_thermogram(entry.name), False))
                continue
            try:
                mode = os.stat(path).st_mode
            except FileNotFoundError:
                skipped.append((path, "broken link", False))
                continue
            except OSError as exc:
                skipped.append((path, f"cannot read ({exc.strerror or exc})", False))
                continue
            if not stat.S_ISREG(mode):
                skipped.append((path, "not a regular file (a pipe, device or socket)", False))
                continue
            found.append(path)
        pending.extend(reversed(subfolders))
    return sorted(found, key=lambda p: p.relative_to(folder).as_posix())


def _kind(entry: Path) -> str:
    """``folder``, ``file`` (anything else that exists, or cannot be looked at), ``broken`` or ``missing``."""
    try:
        mode = os.stat(entry).st_mode
    except FileNotFoundError:
        return "broken" if os.path.lexists(entry) else "missing"
    except OSError:
        return "file"  # e.g. a file in a folder without search permission: it fails alone, at read
    return "folder" if stat.S_ISDIR(mode) else "file"


def _same_or_inside(path: Path, other: Path) -> bool:
    try:
        a, b = path.resolve(), other.resolve()
    except OSError:
        return False
    return a == b or b in a.parents


def _inside(path: str, folder: str) -> bool:
    return path == folder or path.startswith(folder.rstrip(os.sep) + os.sep)


def _check_outputs_spare_inputs(files: list[Path], out: Path) -> None:
    """Refuse an output folder that holds an input file (it could be written over)."""
    out_abs, out_real = os.path.abspath(out), os.path.realpath(out)
    for file in files:
        if _inside(os.path.abspath(file), out_abs) or _inside(os.path.realpath(file), out_real):
            raise ConfigError(
                f"{out}: the output folder holds the input {escape_text(file.name)}, which irseg could "
                "write over; choose a separate output folder (the out_dir setting; a subfolder of the survey is fine)"
            )


def scan_inputs(
    inputs: Iterable[str | os.PathLike[str]], *, exclude: str | os.PathLike[str] | None = None
) -> SurveyInputs:
    """Expand files and folders into the survey's images, in a deterministic order.

    Folders are searched recursively for the files :func:`irseg.io.is_candidate`
    accepts, sorted by relative path. Every other entry is listed in ``skipped`` with
    its reason (not a thermogram, not a regular file, a broken link, a folder that
    cannot be read, a link to a folder, a folder holding irseg outputs), except hidden
    names, ``.toml`` metadata files, the images' photos (:func:`irseg.controls.photo_files`)
    and the output folder ``exclude``. Files given
    explicitly are kept in the order given, even when no reader claims them (so the
    failure is reported), except metadata files (listed as skipped). Repeats are dropped.

    Parameters
    ----------
    inputs : iterable of path-like
        Files and folders.
    exclude : path-like, optional
        The output folder: never searched, and never allowed to hold an input.

    Returns
    -------
    SurveyInputs

    Raises
    ------
    InputError
        If an input does not exist, a folder given cannot be read or holds irseg outputs,
        or no image is found.
    ConfigError
        If the output folder is an input folder, contains one, or holds an input file.
    """
    excluded = Path(exclude) if exclude is not None else None
    files: list[Path] = []
    folders: list[str] = []
    skipped: list[tuple[Path, str, bool]] = []  # path, reason, is a folder
    given = [Path(p) for p in inputs]
    if not given:
        raise InputError("no input given; name image files or survey folders")
    for entry in given:
        kind = _kind(entry)
        if excluded is not None and kind == "folder" and _same_or_inside(entry, excluded):
            raise ConfigError(
                f"{excluded}: the output folder is, or contains, the input folder {entry}; "
                "choose a separate output folder (the out_dir setting; a subfolder of the survey is fine)"
            )
        if kind == "folder":
            before = len(skipped)
            found = _walk(entry, excluded, skipped)
            if not found:
                left_out = skipped[before:]
                detail = (f" ({len(left_out)} entries skipped, e.g. {escape_text(left_out[0][0].name)}: "
                          f"{left_out[0][1]})" if left_out else "")
                raise InputError(
                    f"{entry}: no thermograms found in this folder{detail}; "
                    "irseg reads TIFF, 16-bit PNG, CSV/TXT and NPY files"
                )
            files.extend(found)
            folders.append(os.path.abspath(entry))
        elif kind == "file":  # any non-folder, even unreadable: its failure is reported with the images
            if is_candidate(entry) or entry not in metadata_candidates(entry):
                files.append(entry)
            else:
                skipped.append((entry, "metadata file, not an image (read with the images of its folder)", False))
        elif kind == "broken":
            raise InputError(f"{entry}: is a link to nothing (broken link); check the path")
        else:
            raise InputError(f"{entry}: no such file or folder; check the path")
    photos = photo_files(files)  # pictures of an image (shown in the report): neither inputs nor skipped
    if photos:
        files = [f for f in files if os.path.normpath(os.path.abspath(f)) not in photos]
        skipped = [s for s in skipped if os.path.normpath(os.path.abspath(s[0])) not in photos]
    unique: list[Path] = []
    seen: set[str] = set()
    for file in files:
        key = os.path.realpath(file)
        if key not in seen:
            seen.add(key)
            unique.append(Path(os.path.abspath(file)))
    if not unique:
        raise InputError("no thermograms among the inputs (.toml files are metadata, not images)")
    if excluded is not None:
        _check_outputs_spare_inputs(unique, excluded)
    root, common = _survey_root(folders, unique)

    def base_of(path: Path) -> str:
        return root if common else os.path.dirname(os.path.dirname(path))

    bases = [base_of(p) for p in unique]
    rels = [PurePosixPath(_relative(p, b)) for p, b in zip(unique, bases)]
    names = [r.name for r in rels]
    name_counts: dict[str, int] = {}
    for n in names:
        name_counts[n] = name_counts.get(n, 0) + 1
    images = [str(r) if name_counts[r.name] > 1 else r.name for r in rels]
    stems = _unique_stems(rels)
    items = tuple(
        InputImage(index=i, path=str(p), rel=str(r), image=img, stem=s, base=b)
        for i, (p, r, img, s, b) in enumerate(zip(unique, rels, images, stems, bases))
    )
    notes = sorted(
        {SkippedFile(_relative(path, base_of(path)) + ("/" if is_folder else ""), reason)
         for path, reason, is_folder in skipped},
        key=lambda s: (s.file, s.reason),
    )
    return SurveyInputs(images=items, root=root, skipped=tuple(notes))


def collect_inputs(
    inputs: Iterable[str | os.PathLike[str]], *, exclude: str | os.PathLike[str] | None = None
) -> tuple[list[InputImage], str]:
    """The images and root folder of :func:`scan_inputs` (without the skipped files).

    Returns
    -------
    images : list of InputImage
    root : str
        The common folder the relative names are taken from (absolute; kept out of data files).
    """
    found = scan_inputs(inputs, exclude=exclude)
    return list(found.images), found.root


def _survey_root(folders: list[str], files: list[Path]) -> tuple[str, bool]:
    """The deepest folder holding every input folder and file; False when that is only the filesystem root."""
    try:
        root = os.path.commonpath([*folders, *(str(p.parent) for p in files)])
    except ValueError:  # different drives
        return "", False
    return root, os.path.dirname(root) != root


def relativise(text: str, base: str) -> str:
    """``text`` without the absolute folder ``base`` (messages name inputs relative to the survey root).

    Both the folder as given and with its links resolved are dropped; never the filesystem
    root, which would eat every separator.
    """
    for prefix in dict.fromkeys([base, os.path.realpath(base)] if base else []):
        prefix = prefix.rstrip(os.sep)
        if prefix:
            text = text.replace(prefix + os.sep, "")
    return text


def _relative(path: Path, base: str) -> str:
    """``path`` relative to ``base``, POSIX separators, undecodable bytes escaped."""
    return escape_text(Path(os.path.relpath(os.path.abspath(path), base)).as_posix())


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
