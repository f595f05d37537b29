"""Atomic writers for irseg's output files, and safe output names.

Every file is first written to a temporary file in the folder it belongs to,
flushed and ``fsync``-ed, then moved over its final name with
:func:`os.replace`, so a reader (or a run killed with ``kill -9``) only ever
sees a complete old file, a complete new file or no file. Temporary files carry
the prefix :data:`TEMP_PREFIX`; :func:`remove_temp_files` clears leftovers of an
interrupted run.

Data files never carry timestamps or absolute paths, and numbers are written in
one fixed format (:func:`format_float`), so the same inputs give byte-identical
CSV and JSON files whatever the number of workers or the scheduler.

Text is always valid UTF-8: a file name that is not (an undecodable byte kept by the
operating system's ``surrogateescape`` decoding) is written escaped, ``\\xe9``
(:func:`escape_text`). CSV text cells that a spreadsheet would run as a formula are
neutralised (:func:`csv_bytes`).

The output folder's lock, manifest and set replacement live in :mod:`irseg.io._outfolder`.
"""

from __future__ import annotations

import csv
import errno
import hashlib
import io
import json
import math
import os
import re
import unicodedata
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._shared import escape_name
from ..errors import OutputError

__all__ = [
    "TEMP_PREFIX",
    "SIGNIFICANT_DIGITS",
    "format_float",
    "normalise_json",
    "dumps_json",
    "csv_bytes",
    "escape_text",
    "escape_line",
    "encode_png",
    "write_bytes",
    "write_text",
    "write_json",
    "write_csv",
    "remove_file",
    "remove_temp_files",
    "safe_component",
    "resolve_inside",
    "MAX_NAME_BYTES",
]

#: Prefix of temporary files; never used by a final output name.
TEMP_PREFIX = ".irseg-tmp-"

#: Significant digits kept for every float written to CSV or JSON.
SIGNIFICANT_DIGITS = 7

#: Longest output name made by :func:`safe_component`, in bytes of the filesystem encoding
#: (file systems cap one path component at 255 bytes; the margin leaves room for suffixes).
MAX_NAME_BYTES = 120

_WINDOWS_RESERVED = {
    "con", "prn", "aux", "nul",
    *(f"com{i}" for i in range(1, 10)),
    *(f"lpt{i}" for i in range(1, 10)),
}


# --------------------------------------------------------------------------- text

_SURROGATES = re.compile("[\ud800-\udfff]")


def _escape_surrogate(match: re.Match[str]) -> str:
    code = ord(match.group())
    if 0xDC80 <= code <= 0xDCFF:  # a byte that did not decode (os.fsdecode's surrogateescape)
        return f"\\x{code - 0xDC00:02x}"
    return f"\\u{code:04x}"


def escape_text(text: str) -> str:
    """``text`` made encodable as UTF-8: each undecodable byte of a file name becomes ``\\xNN``.

    The operating system hands back a file name that is not valid UTF-8 (e.g. Latin-1
    ``caf\\xe9.npy``) with each bad byte as a lone surrogate (``os.fsdecode``,
    ``surrogateescape``); such text cannot be written to a UTF-8 file. Other text is
    returned unchanged, so applying the function twice gives the same result.

    Parameters
    ----------
    text : str

    Returns
    -------
    str
    """
    return _SURROGATES.sub(_escape_surrogate, text) if _SURROGATES.search(text) else text


def escape_line(text: str) -> str:
    """``text`` for one line of a log: :func:`escape_text`, and control characters escaped.

    A newline, carriage return or terminal escape sequence in a file name would otherwise
    break the line or forge another one; they become ``\\n``, ``\\r``, ``\\x1b``...
    """
    return escape_name(text)  # one escaping rule for every line irseg prints or logs (irseg._shared)


# --------------------------------------------------------------------------- numbers


def _round_float(value: float) -> float | None:
    """Round to :data:`SIGNIFICANT_DIGITS`; None for NaN/inf (JSON has no NaN)."""
    if not math.isfinite(value):
        return None
    rounded = float(f"{value:.{SIGNIFICANT_DIGITS}g}")
    return 0.0 if rounded == 0.0 else rounded  # no "-0.0"


def format_float(value: float | None) -> str:
    """Text of a number as written to CSV: fixed significant digits, '' for None/NaN.

    Parameters
    ----------
    value : float or None
        The number.

    Returns
    -------
    str
        The shortest text that reads back as the rounded value (``repr``), or ``""``.
    """
    if value is None:
        return ""
    rounded = _round_float(float(value))
    return "" if rounded is None else repr(rounded)


def normalise_json(value: Any) -> Any:
    """Turn a nested structure into plain, deterministic JSON data.

    Floats are rounded to :data:`SIGNIFICANT_DIGITS` (NaN/inf become None), NumPy
    scalars and arrays become Python numbers and lists, tuples become lists,
    mapping keys become strings, text is made UTF-8-safe (:func:`escape_text`).
    Applying it twice gives the same result, so
    data read back from a written JSON file normalises to itself.

    Parameters
    ----------
    value : object
        dict/list/tuple/str/int/float/bool/None/NumPy values, nested.

    Returns
    -------
    object
        The normalised copy.

    Raises
    ------
    TypeError
        For a value of another type.
    """
    if value is None or isinstance(value, bool):
        return value
    if isinstance(value, str):
        return escape_text(value)
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return _round_float(float(value))
    if isinstance(value, Mapping):
        return {escape_text(str(k)): normalise_json(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return [normalise_json(v) for v in value.tolist()]
    if isinstance(value, (list, tuple)):
        return [normalise_json(v) for v in value]
    if isinstance(value, os.PathLike):
        return escape_text(os.fspath(value))
    raise TypeError(f"cannot write {type(value).__name__} to JSON")


def dumps_json(value: Any) -> bytes:
    """Serialise to deterministic UTF-8 JSON: normalised, sorted keys, 2-space indent, final newline."""
    text = json.dumps(normalise_json(value), sort_keys=True, indent=2, ensure_ascii=False, allow_nan=False)
    return (text + "\n").encode("utf-8")


#: First characters that make a spreadsheet read a cell as a formula (OWASP, "CSV Injection").
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\Z")


def _neutralise(text: str, decimal: str = ".") -> str:
    """A text cell that would start a formula gets a leading ``'``; a plain number is left alone."""
    number = text.replace(decimal, ".", 1) if decimal != "." else text
    if text.startswith(_FORMULA_START) and not _PLAIN_NUMBER.match(number):
        return "'" + text
    return text


def _csv_cell(value: Any, decimal: str = ".") -> str:
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        return format_float(float(value)).replace(".", decimal)
    return _neutralise(escape_text(str(value)), decimal)


def csv_bytes(rows: Iterable[Mapping[str, Any]], columns: Sequence[str], *, delimiter: str = ",",
              decimal: str = ".") -> bytes:
    """An RFC 4180 CSV document (CRLF line ends, header row, minimal quoting), UTF-8.

    Parameters
    ----------
    rows : iterable of mapping
        One mapping per row; missing keys and None give empty cells, booleans
        ``true``/``false``, floats :func:`format_float`. A text cell starting with
        ``=``, ``+``, ``-``, ``@``, a tab or a carriage return, which a spreadsheet would
        run as a formula, gets a leading ``'`` (OWASP "CSV Injection"); numbers, and text
        that is a plain number such as ``-0.62``, are written as they are.
    columns : sequence of str
        Column names, in order (the header).
    delimiter, decimal : str
        Cell separator and decimal mark: ``","`` and ``"."`` (RFC 4180, the default), or ``";"``
        and ``","`` for spreadsheets set to a decimal-comma locale. Text that is a plain number
        with the given decimal mark is not neutralised.

    Returns
    -------
    bytes
    """
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL, delimiter=delimiter)
    writer.writerow(list(columns))
    for row in rows:
        writer.writerow([_csv_cell(row.get(c), decimal) for c in columns])
    return buffer.getvalue().encode("utf-8")


def encode_png(image: np.ndarray) -> bytes:
    """Encode a uint8 RGB ``(M, N, 3)``, or a uint8/uint16 ``(M, N)`` array, as PNG bytes.

    Colour images are given in RGB order (converted to OpenCV's BGR here). The
    compression settings are fixed (zlib level 1, no row filter: on the 590x736 overlay of
    a 640x480 benchmark frame, measured with OpenCV 5.0, about as fast as OpenCV's default
    and 0.55x its size), so the same array always gives the same bytes with the same
    OpenCV version.

    Raises
    ------
    OutputError
        If the array has another shape or dtype, or encoding fails.
    """
    import cv2

    array = np.asarray(image)
    if array.dtype not in (np.uint8, np.uint16):
        raise OutputError(f"PNG output needs uint8 or uint16 data, got {array.dtype}")
    if array.ndim == 3 and array.shape[2] == 3:
        array = cv2.cvtColor(np.ascontiguousarray(array), cv2.COLOR_RGB2BGR)
    elif array.ndim != 2:
        raise OutputError(f"PNG output needs an (M, N) or (M, N, 3) array, got shape {array.shape}")
    params = [cv2.IMWRITE_PNG_COMPRESSION, 1]
    if hasattr(cv2, "IMWRITE_PNG_FILTER"):  # OpenCV >= 4.10: no per-row filter search
        params += [cv2.IMWRITE_PNG_FILTER, cv2.IMWRITE_PNG_FILTER_NONE]
    ok, encoded = cv2.imencode(".png", np.ascontiguousarray(array), params)
    if not ok:
        raise OutputError(f"OpenCV could not encode a {array.shape} {array.dtype} array as PNG")
    return encoded.tobytes()


# --------------------------------------------------------------------------- atomic files


def _describe_os_error(exc: OSError) -> str:
    if exc.errno == errno.ENOSPC:
        return "the disk is full; free some space or choose another output folder"
    if exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        return "the folder is not writable; choose a writable output folder"
    return f"{exc.strerror or exc}; check the output folder"


def write_bytes(path: str | os.PathLike[str], data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temp file in the same folder, fsync, rename).

    Parameters
    ----------
    path : path-like
        Final file name; its folder is created if needed.
    data : bytes
        The complete content.

    Returns
    -------
    Path
        ``path``.

    Raises
    ------
    OutputError
        If the folder cannot be created or the file cannot be written; the
        temporary file is removed and any previous file at ``path`` is untouched.
    """
    target = Path(path)
    tmp: Path | None = None
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        fd, name = _mkstemp(target)
        tmp = Path(name)
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(tmp, target)
        tmp = None
    except OSError as exc:
        raise OutputError(f"{target}: could not write: {_describe_os_error(exc)}") from exc
    finally:
        if tmp is not None:
            try:
                tmp.unlink()
            except OSError:
                pass
    return target


def _mkstemp(target: Path) -> tuple[int, str]:
    """Create a new temporary file beside ``target`` (mode 0666 minus the umask, like any new file)."""
    import secrets

    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0) | getattr(os, "O_CLOEXEC", 0)
    for _ in range(100):
        name = str(target.parent / f"{TEMP_PREFIX}{secrets.token_hex(8)}.part")
        try:
            return os.open(name, flags, 0o666), name
        except FileExistsError:
            continue
    raise FileExistsError(errno.EEXIST, "no free temporary name", str(target.parent))


def write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Write UTF-8 text atomically (see :func:`write_bytes`; undecodable name bytes escaped, :func:`escape_text`)."""
    return write_bytes(path, escape_text(text).encode("utf-8"))


def write_json(path: str | os.PathLike[str], value: Any) -> Path:
    """Write deterministic JSON atomically (see :func:`dumps_json`, :func:`write_bytes`)."""
    return write_bytes(path, dumps_json(value))


def write_csv(path: str | os.PathLike[str], rows: Iterable[Mapping[str, Any]], columns: Sequence[str]) -> Path:
    """Write an RFC 4180 CSV file atomically (see :func:`csv_bytes`, :func:`write_bytes`)."""
    return write_bytes(path, csv_bytes(rows, columns))


def remove_file(path: str | os.PathLike[str], *, hint: str = "") -> bool:
    """Remove one output file if it exists.

    Returns True when a file was removed. A missing file is not an error.

    Raises
    ------
    OutputError
        The file exists but cannot be removed; the message names it and adds ``hint``.
    """
    target = Path(path)
    try:
        target.unlink()
    except FileNotFoundError:
        return False
    except OSError as exc:
        suffix = f"; {hint}" if hint else ""
        raise OutputError(f"{target}: cannot remove it ({exc.strerror}){suffix}") from exc
    return True


def remove_temp_files(folder: str | os.PathLike[str], *, recursive: bool = True) -> int:
    """Delete temporary files left by an interrupted run under ``folder``.

    Only names starting with :data:`TEMP_PREFIX` are touched. Returns how many
    were removed; a missing folder gives 0.
    """
    root = Path(folder)
    if not root.is_dir():
        return 0
    pattern = f"**/{TEMP_PREFIX}*" if recursive else f"{TEMP_PREFIX}*"
    removed = 0
    for leftover in root.glob(pattern):
        try:
            if leftover.is_file() and not leftover.is_symlink():
                leftover.unlink()
                removed += 1
        except OSError:
            pass
    return removed


# --------------------------------------------------------------------------- names


def safe_component(name: str, *, reserved: Iterable[str] = ()) -> str:
    """Turn any text into one safe file-name component (never empty, ``.``/``..`` or hidden).

    Letters and digits of any script, ``-``, ``_`` and ``.`` are kept; every other
    run of characters (separators, spaces, control and shell characters, bytes that
    are not valid in the filesystem encoding) becomes a single ``_``. Names that are
    empty, start with a dot, are Windows device names or are in ``reserved``
    (compared case-insensitively) are altered so they stay a plain child of their
    folder. A name longer than :data:`MAX_NAME_BYTES` *bytes* in the filesystem
    encoding (file systems count bytes, and a CJK character takes three in UTF-8) is
    cut at a character boundary and ends with ``-`` and 8 hex digits of a hash of the
    whole name, so long names that share their beginning stay distinct.

    Parameters
    ----------
    name : str
        The raw name (e.g. an image stem or a relative path joined with ``__``).
    reserved : iterable of str
        Names that must not be produced (e.g. the survey-level files).

    Returns
    -------
    str
    """
    text = unicodedata.normalize("NFC", name)
    text = re.sub(r"[^\w.-]+", "_", text)  # \w: letters, digits (any script) and "_"
    text = re.sub(r"\.{2,}", ".", text)
    text = text.strip(" ")
    if not text or text.startswith("."):
        text = "_" + text.lstrip(".")
    if text.endswith("."):  # Windows drops trailing dots
        text = text[:-1] + "_"
    if text.split(".")[0].lower() in _WINDOWS_RESERVED:
        text = "_" + text
    if _name_bytes(text) > MAX_NAME_BYTES:
        digest = hashlib.sha256(name.encode("utf-8", "surrogatepass")).hexdigest()[:8]
        text = _cut_to_bytes(text, MAX_NAME_BYTES - 9).rstrip(".") + "-" + digest
    if text.lower() in {r.lower() for r in reserved}:
        text = text + "_"
    return text


def _name_bytes(text: str) -> int:
    """Length of a name in the filesystem encoding (UTF-8 where the encoding cannot say)."""
    try:
        return len(os.fsencode(text))
    except UnicodeError:
        return len(text.encode("utf-8", "surrogatepass"))


def _cut_to_bytes(text: str, limit: int) -> str:
    """The longest prefix of ``text`` (whole characters) of at most ``limit`` bytes."""
    while _name_bytes(text) > limit:
        over = _name_bytes(text) - limit
        text = text[: len(text) - max(1, over // 4)]
    return text


def resolve_inside(root: str | os.PathLike[str], *parts: str) -> Path:
    """Join ``parts`` under ``root`` and make sure the result stays inside it.

    Raises
    ------
    OutputError
        If the joined path would leave ``root`` (absolute parts, ``..``, symlinks).
    """
    base = Path(root).resolve()
    candidate = base.joinpath(*parts)
    resolved = candidate.resolve()
    if resolved != base and base not in resolved.parents:
        raise OutputError(
            f"output name {'/'.join(parts)!r} would escape the output folder {root}; "
            "this is a bug in irseg's naming, please report it"
        )
    return candidate
