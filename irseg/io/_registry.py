"""Reader registry and format detection: magic bytes first, then the file suffix."""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from ..errors import ConfigError, UnsupportedFormatError
from ..types import RawFrame
from ._common import _io_display, _io_open_bytes
from ._csv import CSV_SUFFIXES, read_csv
from ._npy import NPY_MAGIC, NPY_SUFFIXES, read_npy
from ._png import PNG_MAGIC, PNG_SUFFIXES, read_png
from ._tiff import TIFF_MAGIC, TIFF_SUFFIXES, read_tiff

__all__: list[str] = []


@dataclass(frozen=True)
class _Reader:
    """One built-in reader: its name, suffixes, signatures and read function.

    ``read(path, *, max_pixels)`` checks the header against the pixel budget before it
    decodes anything and raises only InputError / UnsupportedFormatError.
    """

    name: str
    suffixes: tuple[str, ...]
    magic: tuple[bytes, ...]
    read: Callable[..., RawFrame]
    description: str

    def sniff(self, head: bytes) -> bool:
        """True when the file's first bytes carry this format's signature."""
        return any(head.startswith(m) for m in self.magic)


_READERS: tuple[_Reader, ...] = (
    _Reader("csv", CSV_SUFFIXES, (), read_csv, "text matrix (; tab , or whitespace delimited)"),
    _Reader("npy", NPY_SUFFIXES, (NPY_MAGIC,), read_npy, "NumPy .npy 2-D array"),
    _Reader("png", PNG_SUFFIXES, (PNG_MAGIC,), read_png, "greyscale PNG (16-bit raw values)"),
    _Reader("tiff", TIFF_SUFFIXES, TIFF_MAGIC, read_tiff, "TIFF, float temperature or integer raw values"),
)
_BY_NAME = {r.name: r for r in _READERS}
_ALIASES = {"tif": "tiff", "txt": "csv", "tsv": "csv"}

# well-known signatures of pictures and containers that are not radiometric matrices
_FOREIGN_MAGIC = (
    (b"\xff\xd8\xff", "a JPEG photo"),
    (b"GIF87a", "a GIF picture"),
    (b"GIF89a", "a GIF picture"),
    (b"BM", "a BMP picture"),
    (b"%PDF", "a PDF document"),
    (b"PK\x03\x04", "a ZIP archive (or .npz); unpack it first"),
    (b"RIFF", "a RIFF container (WebP/AVI)"),
)


def _reg_names() -> list[str]:
    return sorted(_BY_NAME)


def _reg_by_name(fmt: str) -> _Reader:
    key = str(fmt).strip().lower().lstrip(".")
    key = _ALIASES.get(key, key)
    reader = _BY_NAME.get(key)
    if reader is None:
        raise ConfigError(f"format {fmt!r} is not a known reader; use one of: {', '.join(_reg_names())}")
    return reader


def _reg_by_suffix(path: str | os.PathLike[str]) -> _Reader | None:
    suffix = Path(path).suffix.lower()
    for reader in _READERS:
        if suffix in reader.suffixes:
            return reader
    return None


def _reg_detect(path: str | os.PathLike[str]) -> _Reader:
    """Choose the reader: the file's signature wins over its suffix."""
    head = _io_open_bytes(path, limit=16)
    for reader in _READERS:
        if reader.sniff(head):
            return reader
    by_suffix = _reg_by_suffix(path)
    if by_suffix is not None:
        return by_suffix
    name = _io_display(path)
    for magic, what in _FOREIGN_MAGIC:
        if head.startswith(magic):
            raise UnsupportedFormatError(
                f"{name}: looks like {what}, not a radiometric thermogram; export the temperature matrix "
                f"as one of: {', '.join(_reg_names())}"
            )
    raise UnsupportedFormatError(
        f"{name}: no reader recognises this file (suffix {Path(path).suffix or 'none'!r}); "
        f"irseg reads {', '.join(_reg_names())}; pass format=... if the suffix is wrong"
    )
