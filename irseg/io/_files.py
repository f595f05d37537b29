"""Reading irseg's own small files back: metadata TOML text, result records, overlay bytes.

Every read is bounded: only regular files are opened (a FIFO or a device named like a
metadata file would otherwise block or never end), and the size is capped.
"""

from __future__ import annotations

import json
import os
import stat
from pathlib import Path
from typing import Any

from ..errors import InputError

__all__ = [
    "MAX_TEXT_BYTES",
    "SURVEY_FILE",
    "read_small_bytes",
    "read_small_text",
    "read_json_file",
    "metadata_candidates",
    "read_metadata_texts",
]

#: Largest metadata or record file read back (1 MiB: a sidecar is a few hundred bytes).
MAX_TEXT_BYTES = 1 << 20


def read_small_bytes(path: str | os.PathLike[str], *, max_bytes: int = MAX_TEXT_BYTES, what: str = "file") -> bytes:
    """The bytes of a regular file of at most ``max_bytes``.

    Raises
    ------
    InputError
        The path is not a regular file, cannot be read, or is larger than ``max_bytes``.
    """
    name = os.fspath(path)
    try:
        # O_NONBLOCK: opening a FIFO for reading must not wait for a writer; fstat then
        # checks the very file opened (no gap between a check and the open).
        fd = os.open(name, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0)
                     | getattr(os, "O_BINARY", 0))
    except OSError as exc:
        raise InputError(f"{name}: cannot read the {what} ({exc.strerror or exc}); check it exists") from None
    info = os.fstat(fd)
    if not stat.S_ISREG(info.st_mode):
        os.close(fd)
        raise InputError(f"{name}: the {what} is not a regular file (a folder, pipe or device); replace it by a file")
    with os.fdopen(fd, "rb") as handle:
        if info.st_size > max_bytes:
            raise InputError(
                f"{name}: the {what} is {info.st_size} bytes, more than the {max_bytes} accepted; "
                "check that it is the right file"
            )
        try:
            blob = handle.read(max_bytes + 1)
        except OSError as exc:
            raise InputError(f"{name}: cannot read the {what} ({exc.strerror or exc}); check its permissions") from None
    if len(blob) > max_bytes:
        raise InputError(f"{name}: the {what} grew beyond {max_bytes} bytes while being read; check the file")
    return blob


def read_small_text(path: str | os.PathLike[str], *, max_bytes: int = MAX_TEXT_BYTES, what: str = "file") -> str:
    """UTF-8 text (a byte-order mark is dropped) of a regular file of at most ``max_bytes``.

    Raises
    ------
    InputError
        As :func:`read_small_bytes`, or the text is not UTF-8 (naming the line).
    """
    blob = read_small_bytes(path, max_bytes=max_bytes, what=what)
    try:
        return blob.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = blob[: exc.start].count(b"\n") + 1
        raise InputError(f"{os.fspath(path)}: line {line} is not valid UTF-8; save the {what} as UTF-8 text") from None


def read_json_file(path: str | os.PathLike[str], *, max_bytes: int = 64 << 20) -> Any:
    """A JSON document irseg wrote earlier (e.g. ``result.json``), or None when absent or unreadable."""
    try:
        text = read_small_text(Path(path), max_bytes=max_bytes, what="record")
        return json.loads(text)
    except (InputError, ValueError):
        return None


#: Name of the folder-wide metadata file.
SURVEY_FILE = "survey.toml"


def metadata_candidates(image_path: str | os.PathLike[str]) -> tuple[Path, Path]:
    """The metadata files that can apply to an image: its folder's ``survey.toml``, its sidecar ``<stem>.toml``."""
    image = Path(image_path)
    return image.parent / SURVEY_FILE, image.with_suffix(".toml")


def read_metadata_texts(image_path: str | os.PathLike[str]) -> list[tuple[str, str]]:
    """``(file name, TOML text)`` of the metadata files present for an image, folder file first.

    A name that exists but is not a regular file (a folder, a pipe, a device) or is too
    large is an error, never a silent skip and never a blocking read.

    Raises
    ------
    InputError
        A metadata file that cannot be read, is not a regular file, is too large or is not UTF-8.
    """
    folder_file, sidecar = metadata_candidates(image_path)
    found: list[tuple[str, str]] = []
    for path in (folder_file, sidecar):
        if not os.path.lexists(path):
            continue
        if path is sidecar and found and os.path.realpath(path) == os.path.realpath(folder_file):
            continue  # an image called survey.<ext>: its sidecar is the folder file
        found.append((os.fspath(path), read_small_text(path, what="metadata file")))
    return found
