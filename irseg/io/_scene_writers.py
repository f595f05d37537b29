"""Writers of radiometric images in the open formats irseg reads, and of their metadata.

The readers' counterparts: float32 and uint16 TIFF, 16-bit greyscale PNG, CSV/TXT
temperature matrices, NumPy ``.npy`` arrays, plus the TOML metadata (``survey.toml``,
``<stem>.toml``) and the truth files (JSON, ``.npz``) of a synthetic survey. The scene
maker (:mod:`irseg.scenes`) writes its thermograms through them, and the reader tests use
them to make files with known content.

Each format has a pure encoder (``*_bytes`` / ``*_text``: array in, file content out) and a
``write_*`` function that writes that content atomically through
:func:`~irseg.io.write_bytes`. Encoders are deterministic (no time stamps, fixed
compression settings), so the same array gives the same bytes with the same versions of
tifffile, OpenCV and NumPy.

Integer formats store ``raw = round((value - offset) / scale)``, so that a reader's
``value = raw * scale + offset`` (the ``[camera] scale`` / ``offset`` metadata) gives the
values back to within half a step.
"""

from __future__ import annotations

import io
import json
import math
import os
import re
import zipfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from ..errors import ConfigError, OutputError
from ._writers import write_bytes, write_text

__all__ = [
    "quantise_u16",
    "tiff_bytes",
    "png16_bytes",
    "csv_matrix_text",
    "npy_bytes",
    "npz_bytes",
    "format_metadata_toml",
    "exact_json_text",
    "write_tiff_float",
    "write_tiff_u16",
    "write_png16",
    "write_csv_matrix",
    "write_npy",
    "write_npz",
    "write_metadata_toml",
    "write_exact_json",
]

#: Time stamp of every member of an ``.npz`` written by :func:`npz_bytes` (no clock in the bytes).
NPZ_DATE_TIME = (2026, 1, 1, 0, 0, 0)


# --------------------------------------------------------------------------- image encoders


def quantise_u16(values: np.ndarray, *, scale: float = 1.0, offset: float = 0.0) -> np.ndarray:
    """Raw 16-bit counts of ``values``: ``round((value - offset) / scale)`` as uint16.

    Parameters
    ----------
    values : array_like
        Values in the export's units (e.g. °C or K); raw counts with the defaults.
    scale : float
        Value of one count (> 0).
    offset : float
        Value of count 0.

    Returns
    -------
    ndarray of uint16

    Raises
    ------
    ConfigError
        ``scale`` is not a positive number, or some value is not finite or falls outside
        0..65535 counts.
    """
    try:
        scale_ok = math.isfinite(float(scale)) and float(scale) > 0
    except (TypeError, ValueError):
        scale_ok = False
    if not scale_ok:
        raise ConfigError(f"scale={scale!r} must be a positive number (the value of one raw count)")
    vals = np.asarray(values, float)
    if not np.isfinite(vals).all():
        raise ConfigError("cannot store NaN or infinite values in a 16-bit image; give finite temperatures")
    raw = np.rint((vals - offset) / scale)
    if raw.min() < 0 or raw.max() > 65535:
        raise ConfigError(
            f"scale={scale}, offset={offset} cannot hold values {vals.min():.2f}..{vals.max():.2f} in 16 bits; "
            "lower the offset or raise the scale"
        )
    return raw.astype(np.uint16)


def tiff_bytes(array: np.ndarray) -> bytes:
    """A single-page greyscale TIFF of ``array`` as stored (dtype kept), without software or date tags."""
    import tifffile

    buf = io.BytesIO()
    tifffile.imwrite(buf, np.asarray(array), photometric="minisblack", software=None, metadata=None)
    return buf.getvalue()


def png16_bytes(raw: np.ndarray) -> bytes:
    """A 16-bit greyscale PNG of a uint16 ``(M, N)`` array (zlib level 9, OpenCV's default row filter).

    Raises
    ------
    OutputError
        ``raw`` is not a 2-D uint16 array, or OpenCV cannot encode it.
    """
    import cv2

    array = np.asarray(raw)
    if array.dtype != np.uint16 or array.ndim != 2:
        raise OutputError(f"a 16-bit PNG needs an (M, N) uint16 array, got {array.dtype} of shape {array.shape}")
    ok, encoded = cv2.imencode(".png", array, [cv2.IMWRITE_PNG_COMPRESSION, 9])
    if not ok:
        raise OutputError(f"OpenCV could not encode a {array.shape} uint16 array as PNG")
    return encoded.tobytes()


def csv_matrix_text(values: np.ndarray, *, delimiter: str = ",", decimal: str = ".", digits: int = 2) -> str:
    """A temperature matrix as CSV/TXT text: one line per row, fixed decimals, ``\\n`` line ends.

    Parameters
    ----------
    values : (M, N) array_like
    delimiter : str
        Cell delimiter (e.g. ``","``, ``";"``, ``"\\t"``).
    decimal : str
        Decimal mark (``"."`` or ``","``).
    digits : int
        Decimals per cell.

    Raises
    ------
    ConfigError
        ``delimiter`` equals ``decimal``, or ``values`` is not 2-D.
    """
    if delimiter == decimal:
        raise ConfigError(f"CSV delimiter {delimiter!r} equals the decimal mark; use ';' with decimal ','")
    matrix = np.asarray(values, float)
    if matrix.ndim != 2:
        raise ConfigError(f"a CSV matrix needs (M, N) values, got shape {matrix.shape}")
    lines = []
    for row in matrix:
        cells = [f"{v:.{digits}f}" for v in row]
        if decimal != ".":
            cells = [c.replace(".", decimal) for c in cells]
        lines.append(delimiter.join(cells))
    return "\n".join(lines) + "\n"


def npy_bytes(array: np.ndarray) -> bytes:
    """A NumPy ``.npy`` file of ``array`` as given (dtype kept, no pickled objects)."""
    buf = io.BytesIO()
    np.save(buf, np.asarray(array), allow_pickle=False)
    return buf.getvalue()


def npz_bytes(arrays: Mapping[str, np.ndarray]) -> bytes:
    """A deflated NumPy ``.npz`` archive, members in sorted name order, each stamped :data:`NPZ_DATE_TIME`.

    ``numpy.load`` reads it back as ``{name: array}``.
    """
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as zf:
        for name in sorted(arrays):
            info = zipfile.ZipInfo(f"{name}.npy", date_time=NPZ_DATE_TIME)
            info.compress_type = zipfile.ZIP_DEFLATED
            zf.writestr(info, npy_bytes(arrays[name]))
    return buf.getvalue()


# --------------------------------------------------------------------------- TOML and JSON text

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")
_TOML_ESCAPES = {"\\": "\\\\", '"': '\\"', "\b": "\\b", "\t": "\\t", "\n": "\\n", "\f": "\\f", "\r": "\\r"}
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]")


def _toml_string(text: str) -> str:
    """A TOML basic string: quotes, backslashes and control characters escaped (TOML 1.0, "String")."""
    out = []
    for ch in text:
        if ch in _TOML_ESCAPES:
            out.append(_TOML_ESCAPES[ch])
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04X}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def _toml_key(key: str) -> str:
    """A bare key when it only has ``A-Za-z0-9_-``, else a quoted key."""
    key = str(key)
    return key if _BARE_KEY.fullmatch(key) else _toml_string(key)


def _toml_value(value: Any, where: str) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(value):
            raise ConfigError(f"{where} = {value!r} cannot be written to TOML; give a finite number")
        return repr(round(float(value), 6))
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, (tuple, list)):
        return "[" + ", ".join(_toml_value(v, where) for v in value) + "]"
    raise ConfigError(f"{where}: cannot write a {type(value).__name__} value ({value!r}) to TOML; "
                      "use a number, string, boolean or list")


def format_metadata_toml(sections: Mapping[str, Mapping[str, Any]], *, header: str = "") -> str:
    """TOML text of ``{"section": {"key": value}}``, as irseg's metadata files are laid out.

    Parameters
    ----------
    sections : mapping of mapping
        Tables in order; keys in order. None values are left out, and so is a table with
        nothing left. Values: bool, int, float (rounded to 6 decimals), str, and
        lists/tuples of these.
    header : str
        Comment lines put first (each line prefixed ``# ``).

    Returns
    -------
    str
        The text, ending with a newline. Strings are TOML basic strings (quotes,
        backslashes and control characters escaped); keys and table names that are not
        bare keys are quoted.

    Raises
    ------
    ConfigError
        A value of another type, a non-finite float, or a control character in ``header``.
    """
    out = []
    for line in header.splitlines() if header else ():
        if _CONTROL.search(line):
            raise ConfigError(f"metadata header line {line!r} holds a control character; remove it")
        out.append(f"# {line}")
    for name, keys in sections.items():
        items = [(k, v) for k, v in keys.items() if v is not None]
        if not items:
            continue
        if out:
            out.append("")
        out.append(f"[{_toml_key(name)}]")
        out += [f"{_toml_key(k)} = {_toml_value(v, f'[{name}] {k}')}" for k, v in items]
    return "\n".join(out) + "\n"


def exact_json_text(value: Any, *, indent: int = 1) -> str:
    """JSON as the standard library writes it (floats unrounded, ASCII), sorted keys, final newline.

    Unlike :func:`~irseg.io.dumps_json`, numbers are not normalised: a truth file keeps the
    digits its producer chose.
    """
    return json.dumps(value, indent=indent, sort_keys=True) + "\n"


# --------------------------------------------------------------------------- atomic writers


def write_tiff_float(path: str | os.PathLike[str], values: np.ndarray) -> Path:
    """Write ``values`` as a float32 TIFF (values as they are, e.g. °C or K); returns ``path``."""
    return write_bytes(path, tiff_bytes(np.asarray(values).astype(np.float32)))


def write_tiff_u16(path: str | os.PathLike[str], values: np.ndarray, *, scale: float = 1.0,
                   offset: float = 0.0) -> Path:
    """Write ``values`` as a uint16 TIFF of raw counts (see :func:`quantise_u16`); returns ``path``."""
    return write_bytes(path, tiff_bytes(quantise_u16(values, scale=scale, offset=offset)))


def write_png16(path: str | os.PathLike[str], values: np.ndarray, *, scale: float = 1.0,
                offset: float = 0.0) -> Path:
    """Write ``values`` as a 16-bit PNG of raw counts (see :func:`quantise_u16`); returns ``path``."""
    return write_bytes(path, png16_bytes(quantise_u16(values, scale=scale, offset=offset)))


def write_csv_matrix(path: str | os.PathLike[str], values: np.ndarray, *, delimiter: str = ",",
                     decimal: str = ".", digits: int = 2) -> Path:
    """Write a temperature matrix as CSV/TXT text (see :func:`csv_matrix_text`); returns ``path``."""
    return write_text(path, csv_matrix_text(values, delimiter=delimiter, decimal=decimal, digits=digits))


def write_npy(path: str | os.PathLike[str], values: np.ndarray, *, dtype: Any = np.float32) -> Path:
    """Write ``values`` converted to ``dtype`` (default float32) as a ``.npy`` file; returns ``path``."""
    return write_bytes(path, npy_bytes(np.asarray(values).astype(dtype)))


def write_npz(path: str | os.PathLike[str], arrays: Mapping[str, np.ndarray]) -> Path:
    """Write named arrays as a deterministic ``.npz`` archive (see :func:`npz_bytes`); returns ``path``."""
    return write_bytes(path, npz_bytes(arrays))


def write_metadata_toml(path: str | os.PathLike[str], sections: Mapping[str, Mapping[str, Any]], *,
                        header: str = "") -> Path:
    """Write a metadata TOML file (see :func:`format_metadata_toml`); returns ``path``.

    The content is not checked against irseg's metadata schema (the reader does that);
    :func:`irseg.scenes.write_toml` checks before writing.
    """
    return write_text(path, format_metadata_toml(sections, header=header))


def write_exact_json(path: str | os.PathLike[str], value: Any, *, indent: int = 1) -> Path:
    """Write JSON with unrounded numbers (see :func:`exact_json_text`); returns ``path``."""
    return write_text(path, exact_json_text(value, indent=indent))
