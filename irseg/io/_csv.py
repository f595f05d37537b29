"""CSV/TXT reader: one numeric matrix, delimiter and decimal mark detected.

Delimiters: ``;``, tab, ``,`` or runs of whitespace. Decimal mark: ``.`` or ``,``
(``,`` only with a delimiter other than ``,``). Leading text lines (titles, export
headers) are skipped; from the first numeric row on, every non-blank line must be a
row of the same length. Cells are strict decimal numbers (``12.5``, ``-3``, ``1e-3``,
``nan``, ``inf``); thousands separators and empty cells are errors that name the line
and the column. One ambiguity is resolved by rule: a file whose lines each hold a single
``a,b`` with no other separator reads as two comma-separated columns, not as one column
with a decimal comma. Text is UTF-8 (or Latin-1), or UTF-16/UTF-32 with a byte-order
mark (a spreadsheet's "Unicode text").
"""

from __future__ import annotations

import os
import re

import numpy as np

from ..errors import InputError, UnsupportedFormatError
from ..types import RawFrame
from ._common import _io_check_budget, _io_display, _io_file_size, _io_open_bytes

__all__ = ["read_csv", "CSV_SUFFIXES"]

CSV_SUFFIXES = (".csv", ".txt", ".tsv", ".asc", ".dat")

# (delimiter, decimal mark); None = runs of whitespace. Order breaks ties.
_CSV_CANDIDATES: tuple[tuple[str | None, str], ...] = (
    (";", ","),
    (";", "."),
    ("\t", ","),
    ("\t", "."),
    (",", "."),
    (None, "."),
    (None, ","),
)
_CSV_NUM = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_CSV_INT = re.compile(r"[+-]?\d+")
_CSV_SAMPLE = 40
# a cell is at most this many bytes on average before the file is judged too large to parse
_CSV_BYTES_PER_CELL = 64
_CSV_DELIM_NAMES = {";": "semicolon", "\t": "tab", ",": "comma", None: "whitespace"}


def _csv_split(line: str, delim: str | None) -> list[str]:
    """Cells of one line (a single trailing delimiter is tolerated)."""
    if delim is None:
        return line.split()
    parts = [p.strip() for p in line.split(delim)]
    if len(parts) > 1 and parts[-1] == "":
        parts.pop()
    return parts


def _csv_norm(cell: str, decimal: str) -> str | None:
    """The cell in Python float syntax, or None when it is not a strict number."""
    if decimal == ",":
        if "." in cell:
            return None
        cell = cell.replace(",", ".", 1)
    return cell if _CSV_NUM.fullmatch(cell) else None


def _csv_is_row(line: str, delim: str | None, decimal: str) -> bool:
    cells = _csv_split(line, delim)
    return bool(cells) and all(_csv_norm(c, decimal) is not None for c in cells)


def _csv_head(line: str, limit: int = 2048) -> str:
    """The start of a long line, cut after a separator so that no cell is split."""
    if len(line) <= limit:
        return line
    head = line[:limit]
    cut = max(head.rfind(c) for c in ";\t ,")
    return head[:cut] if cut > 0 else head


def _csv_detect(lines: list[str], nonblank: list[int]) -> tuple[str | None, str]:
    """Pick the (delimiter, decimal) that parses most of a sample of lines."""
    if len(nonblank) <= 3 * _CSV_SAMPLE:
        sample_idx = nonblank
    else:
        mid = len(nonblank) // 2
        sample_idx = (
            nonblank[:_CSV_SAMPLE]
            + nonblank[mid - _CSV_SAMPLE // 2 : mid + _CSV_SAMPLE // 2]
            + nonblank[-_CSV_SAMPLE:]
        )
    sample = [_csv_head(lines[i]) for i in sample_idx]
    best: tuple[int, int] = (-1, 0)
    choice: tuple[str | None, str] = (None, ".")
    for k, (delim, decimal) in enumerate(_CSV_CANDIDATES):
        if delim is not None and not any(delim in s for s in sample):
            continue
        score = sum(_csv_is_row(s, delim, decimal) for s in sample)
        if score > best[0]:
            best, choice = (score, -k), (delim, decimal)
    return choice


# byte-order marks of Unicode text, longest first (UTF-32 LE starts like UTF-16 LE)
_CSV_BOMS = (
    (b"\xff\xfe\x00\x00", "utf-32-le", "UTF-32"),
    (b"\x00\x00\xfe\xff", "utf-32-be", "UTF-32"),
    (b"\xef\xbb\xbf", "utf-8", "UTF-8"),
    (b"\xff\xfe", "utf-16-le", "UTF-16"),
    (b"\xfe\xff", "utf-16-be", "UTF-16"),
)


def _csv_decode(name: str, blob: bytes) -> tuple[str, str]:
    """The text of a matrix file and the encoding it was read with.

    Text with a byte-order mark is decoded as it says (a spreadsheet's "Unicode text" is
    UTF-16 with a mark); otherwise UTF-8, else Latin-1. Binary data, and UTF-16 text without
    a mark, are refused saying what they are.
    """
    for bom, codec, label in _CSV_BOMS:
        if blob.startswith(bom):
            try:
                return blob[len(bom) :].decode(codec), label
            except UnicodeDecodeError as exc:
                raise InputError(
                    f"{name}: starts with a {label} byte-order mark but byte {exc.start + len(bom)} is not {label} "
                    "text; the file is damaged: save the matrix again as UTF-8 text"
                ) from None
    if b"\x00" in blob:
        head = blob[:4096]
        even, odd = head[0::2].count(0), head[1::2].count(0)
        if max(even, odd) > 0.4 * (len(head) // 2) and min(even, odd) < 0.05 * (len(head) // 2):
            raise UnsupportedFormatError(
                f"{name}: looks like UTF-16 text without a byte-order mark, which cannot be read safely; "
                "save the matrix as UTF-8 text (or as Unicode text, which carries the mark)"
            )
        raise UnsupportedFormatError(
            f"{name}: holds binary data, not a text matrix; is it an image with the wrong suffix?"
        )
    try:
        return blob.decode("utf-8"), "UTF-8"
    except UnicodeDecodeError:
        return blob.decode("latin-1"), "Latin-1"


def read_csv(path: str | os.PathLike[str], *, max_pixels: int) -> RawFrame:
    """Read a text matrix of temperatures or raw values.

    Parameters
    ----------
    path : path-like
        The CSV/TXT file (opened read-only).
    max_pixels : int
        Pixel budget: checked from the file size and the line count times the first row's
        length before the rows are parsed.

    Returns
    -------
    RawFrame
        ``format="csv"``; ``data`` is ``int64`` when every cell is an integer literal,
        ``float64`` otherwise. ``metadata`` records the delimiter, decimal mark and the
        number of header lines skipped.

    Raises
    ------
    InputError
        Empty file, no numeric rows, ragged rows (naming the line), non-numeric or empty
        cells (naming line and column), blank lines inside the matrix, over the budget.
    UnsupportedFormatError
        Binary content, or UTF-16 text without a byte-order mark (said as such).

    Notes
    -----
    Text with a byte-order mark is decoded as the mark says: UTF-8, UTF-16 (a
    spreadsheet's "Unicode text" export) or UTF-32; text without one as UTF-8, else
    Latin-1. ``metadata["encoding"]`` records which.
    """
    name = _io_display(path)
    size = _io_file_size(path)
    if size == 0:
        raise InputError(f"{name}: empty file (0 bytes); export the temperature matrix again")
    if size > max_pixels * _CSV_BYTES_PER_CELL + 1_000_000:
        raise InputError(
            f"{name}: {size} bytes is too large for a text matrix within the pixel budget of {max_pixels}; "
            "raise the max_pixels setting if the matrix is genuine"
        )
    text, encoding = _csv_decode(name, _io_open_bytes(path))
    # line numbers as an editor counts them (\n, \r\n or \r; not the other Unicode breaks)
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    nonblank = [i for i, s in enumerate(lines) if s.strip()]
    if not nonblank:
        raise InputError(f"{name}: holds only blank lines; no matrix to read")
    delim, decimal = _csv_detect(lines, nonblank)
    first = next((i for i in nonblank if _csv_is_row(_csv_head(lines[i]), delim, decimal)), None)
    if first is None:
        raise InputError(
            f"{name}: no numeric row found (tried ; tab , and whitespace delimiters, decimal point and "
            "decimal comma); export the temperature matrix as plain numbers"
        )
    for i in nonblank:
        if i >= first:
            break
        head = _csv_head(lines[i])
        other = next(
            ((d, m) for d, m in _CSV_CANDIDATES if _csv_is_row(head, d, m) and len(_csv_split(head, d)) > 1), None
        )
        if other is not None:
            raise InputError(
                f"{name}: line {i + 1} is a row of numbers with a {_CSV_DELIM_NAMES[other[0]]} delimiter, but the "
                f"matrix from line {first + 1} uses {_CSV_DELIM_NAMES[delim]} delimiters (decimal {decimal!r}); "
                "use one delimiter throughout"
            )
    n_cols = len(_csv_split(lines[first], delim))
    last = nonblank[-1]
    _io_check_budget(name, (last - first + 1, n_cols), max_pixels)
    rows: list[list[str]] = []
    all_int = True
    for i in range(first, last + 1):
        line = lines[i]
        if not line.strip():
            raise InputError(
                f"{name}: line {i + 1} is blank inside the matrix (lines {first + 1}-{last + 1}); "
                "a file holds one matrix: remove the blank line or split the file"
            )
        cells = _csv_split(line, delim)
        if len(cells) != n_cols:
            raise InputError(
                f"{name}: line {i + 1} has {len(cells)} values but line {first + 1} (the first row) has "
                f"{n_cols}; every row needs the same number of values ({_CSV_DELIM_NAMES[delim]} delimiter)"
            )
        norm = []
        for j, cell in enumerate(cells):
            v = _csv_norm(cell, decimal)
            if v is None:
                shown = cell if len(cell) <= 40 else cell[:37] + "..."
                what = "an empty cell" if cell == "" else f"{shown!r} is not a number"
                raise InputError(
                    f"{name}: line {i + 1}, column {j + 1}: {what} "
                    f"({_CSV_DELIM_NAMES[delim]} delimiter, decimal {decimal!r}); fix or remove the cell"
                )
            if all_int and not _CSV_INT.fullmatch(v):
                all_int = False
            norm.append(v)
        rows.append(norm)
    data: np.ndarray | None = None
    if all_int:
        try:
            data = np.array([[int(v) for v in r] for r in rows], dtype=np.int64)
        except OverflowError:
            data = None
    if data is None:
        data = np.array(rows, dtype=np.float64)
    meta = {
        "delimiter": _CSV_DELIM_NAMES[delim],
        "decimal": decimal,
        "header_lines": first,
        "encoding": encoding,
        "header": [lines[i] for i in range(first) if lines[i].strip()][:20],
    }
    return RawFrame(path=name, data=np.ascontiguousarray(data), format="csv", metadata=meta)
