"""Helpers shared by the readers: safe file access, pixel budget, dtype checks."""

from __future__ import annotations

import contextlib
import logging
import os
import struct
import warnings
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from ..errors import InputError, UnsupportedFormatError

__all__: list[str] = []

#: Numeric dtype kinds a thermogram may be stored with: signed, unsigned, float.
_NUMERIC_KINDS = "iuf"


def _io_display(path: str | os.PathLike[str]) -> str:
    """The file name as shown in messages."""
    return os.fspath(path)


def _io_os_error(name: str, exc: OSError) -> InputError:
    """The InputError (naming the file and the fix) for an operating-system read failure."""
    if isinstance(exc, FileNotFoundError):
        return InputError(f"{name}: no such file; check the path")
    if isinstance(exc, IsADirectoryError):
        return InputError(f"{name}: is a folder, not an image file")
    if isinstance(exc, PermissionError):
        return InputError(f"{name}: permission denied; make the file readable")
    return InputError(f"{name}: cannot be read ({exc.strerror or exc}); check the disk or re-copy the file")


def _io_open_bytes(path: str | os.PathLike[str], *, limit: int | None = None) -> bytes:
    """Read a file read-only (at most ``limit`` bytes), mapping OS errors to InputError."""
    try:
        with open(path, "rb") as fh:
            return fh.read() if limit is None else fh.read(limit)
    except OSError as exc:
        raise _io_os_error(_io_display(path), exc) from None


def _io_file_size(path: str | os.PathLike[str]) -> int:
    """Size of a regular file in bytes, mapping OS errors to InputError."""
    name = _io_display(path)
    try:
        st = os.stat(path)
    except OSError as exc:
        raise _io_os_error(name, exc) from None
    if Path(path).is_dir():
        raise InputError(f"{name}: is a folder, not an image file")
    return int(st.st_size)


def _io_check_budget(name: str, shape: tuple[int, ...], max_pixels: int) -> None:
    """Refuse images whose declared size exceeds the pixel budget, before decoding."""
    n = 1
    for s in shape:
        n *= int(s)
    if n > max_pixels:
        dims = " x ".join(str(int(s)) for s in shape)
        raise InputError(
            f"{name}: declared size {dims} = {n} pixels exceeds the pixel budget of {max_pixels}; "
            "raise the max_pixels setting if the image is genuine, otherwise the file is corrupt"
        )


def _io_article(word: str) -> str:
    """``word`` with "a" or "an" before it, as it is read aloud (an RGB, an 8-bit, a palette)."""
    letters = word[:1] in "FHLMNRSX" and word[1:2].isupper()  # an acronym spelt out: "ar-gee-bee"
    spoken_vowel = word[:1].lower() in "aeio" or letters or word.startswith(("8", "11", "18"))
    return f"{'an' if spoken_vowel else 'a'} {word}"


def _io_squeeze_2d(name: str, shape: tuple[int, ...], *, fmt: str) -> tuple[int, int]:
    """Reduce a declared shape to (M, N), refusing colour and stacked images."""
    dims = tuple(int(s) for s in shape)
    while len(dims) > 2 and dims[0] == 1:
        dims = dims[1:]
    while len(dims) > 2 and dims[-1] == 1:
        dims = dims[:-1]
    if len(dims) == 3 and dims[-1] in (2, 3, 4):
        what = "grey + alpha" if dims[-1] == 2 else f"{dims[-1]}-channel colour"
        raise UnsupportedFormatError(
            f"{name}: {_io_article(what)} picture, not a radiometric thermogram (a colour picture holds no "
            "temperatures); export the temperature matrix as a single-channel image instead"
        )
    if len(dims) != 2:
        raise InputError(
            f"{name}: {fmt} holds an array of shape {tuple(int(s) for s in shape)}; "
            "a thermogram is one 2-D matrix (rows, columns)"
        )
    m, n = dims
    if m < 1 or n < 1:
        raise InputError(f"{name}: {fmt} holds an empty image of shape {tuple(shape)}")
    return m, n


def _io_check_dtype(name: str, dtype: np.dtype, *, fmt: str) -> np.dtype:
    """Accept integer and float dtypes only; return the native-byte-order equivalent."""
    if dtype.fields is not None or dtype.hasobject or dtype.kind not in _NUMERIC_KINDS:
        raise UnsupportedFormatError(
            f"{name}: {fmt} stores values of type {dtype}; a thermogram needs integer or float pixels"
        )
    return dtype.newbyteorder("=")


@contextlib.contextmanager
def _io_quiet() -> Iterator[None]:
    """Silence third-party warnings while a library decodes a (possibly corrupt) file."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with np.errstate(all="ignore"):
            yield


def _io_corrupt(name: str, fmt: str, exc: BaseException) -> InputError:
    """An InputError for a file a library could not decode."""
    if isinstance(exc, (TypeError, IndexError, KeyError, AttributeError, struct.error)):
        # the decoder tripped over a malformed structure; its own wording would name Python internals
        detail = "its structure cannot be parsed"
    else:
        detail = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    if len(detail) > 160:
        detail = detail[:157] + "..."
    return InputError(f"{name}: corrupt or truncated {fmt} file ({detail}); re-export or re-copy it")


class _IoLogCapture(logging.Filter):
    """Collects (and swallows) a library logger's records while a file is decoded."""

    def __init__(self) -> None:
        super().__init__()
        self.messages: list[str] = []

    def filter(self, record: logging.LogRecord) -> bool:
        if len(self.messages) < 20:
            try:
                self.messages.append(record.getMessage()[:200])
            except Exception:  # noqa: BLE001 - a malformed log record must not break reading
                pass
        return False


@contextlib.contextmanager
def _io_capture_log(logger_name: str) -> Iterator[list[str]]:
    """Keep a decoder's complaints about a corrupt file off stderr; yield them as a list."""
    logger = logging.getLogger(logger_name)
    capture = _IoLogCapture()
    logger.addFilter(capture)
    try:
        yield capture.messages
    finally:
        logger.removeFilter(capture)
