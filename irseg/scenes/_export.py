"""Write simulated thermograms in the open formats irseg reads, with their TOML metadata.

Formats (``fmt``):

- ``tiff-float``: float32 TIFF, values in ``units`` (°C or K);
- ``tiff-u16``: uint16 TIFF, ``value = raw·scale + offset``;
- ``png16``: 16-bit greyscale PNG, same encoding;
- ``csv``: text matrix, ``delimiter`` and ``decimal`` mark chosen per file;
- ``npy``: float32 NumPy array.

Dead pixels keep their stuck value. Writers are deterministic (no time stamps),
so a seeded survey is byte-identical when remade.
"""

from __future__ import annotations

import io
import math
import os
from pathlib import Path

import cv2
import numpy as np
import tifffile

from irseg.errors import ConfigError, OutputError
from irseg.metadata import parse_metadata_text
from irseg.io import write_bytes
from irseg.radiometry import apparent_to_object

__all__ = ["FORMATS", "encode_values", "write_image", "write_toml", "toml_text"]

FORMATS = ("tiff-float", "tiff-u16", "png16", "csv", "npy")
_SUFFIX = {"tiff-float": ".tiff", "tiff-u16": ".tif", "png16": ".png", "csv": ".csv", "npy": ".npy"}


def encode_values(
    apparent_c: np.ndarray,
    *,
    units: str = "celsius",
    export_emissivity: float = 1.0,
    export_reflected_c: float | None = None,
    band_um: tuple[float, float] = (7.5, 14.0),
) -> np.ndarray:
    """The temperatures a camera export holds: apparent, or corrected with its own ε setting."""
    vals = np.asarray(apparent_c, float)
    if export_emissivity != 1.0:
        if export_reflected_c is None:
            raise ConfigError("export_emissivity != 1 needs export_reflected_c")
        vals = apparent_to_object(vals, emissivity=export_emissivity, reflected_c=export_reflected_c, band_um=band_um)
    if units == "kelvin":
        vals = vals + 273.15
    elif units != "celsius":
        raise ConfigError(f"units={units!r}; use celsius or kelvin")
    return vals


def _tiff_bytes(array: np.ndarray) -> bytes:
    buf = io.BytesIO()
    tifffile.imwrite(buf, array, photometric="minisblack", software=None, metadata=None)
    return buf.getvalue()


def _to_raw(vals: np.ndarray, scale: float, offset: float) -> np.ndarray:
    raw = np.rint((vals - offset) / scale)
    if raw.min() < 0 or raw.max() > 65535:
        raise ConfigError(
            f"scale={scale}, offset={offset} cannot hold values {vals.min():.2f}..{vals.max():.2f} in 16 bits; "
            "lower the offset or raise the scale"
        )
    return raw.astype(np.uint16)


def write_image(
    directory: str | os.PathLike[str],
    stem: str,
    values: np.ndarray,
    *,
    fmt: str,
    scale: float = 1.0,
    offset: float = 0.0,
    delimiter: str = ",",
    decimal: str = ".",
    digits: int = 2,
) -> Path:
    """Write one image; returns its path (``stem`` + the format's suffix).

    Parameters
    ----------
    directory : path-like
    stem : str
    values : (M, N) ndarray
        Temperatures in the export's units (see :func:`encode_values`).
    fmt : str
        One of :data:`FORMATS`.
    scale, offset : float
        Integer formats: ``value = raw·scale + offset``.
    delimiter, decimal : str
        CSV cell delimiter and decimal mark.
    digits : int
        CSV decimals.

    Raises
    ------
    ConfigError
        Unknown format, values that do not fit 16 bits, ``decimal`` equal to ``delimiter``.
    OutputError
        The file cannot be written.
    """
    if fmt not in FORMATS:
        raise ConfigError(f"fmt={fmt!r} is not one of {FORMATS}")
    path = Path(directory) / (stem + _SUFFIX[fmt])
    if fmt == "tiff-float":
        data = _tiff_bytes(values.astype(np.float32))
    elif fmt == "tiff-u16":
        data = _tiff_bytes(_to_raw(values, scale, offset))
    elif fmt == "png16":
        ok, enc = cv2.imencode(".png", _to_raw(values, scale, offset), [cv2.IMWRITE_PNG_COMPRESSION, 9])
        if not ok:
            raise OutputError(f"{path}: PNG encoding failed")
        data = enc.tobytes()
    elif fmt == "csv":
        if delimiter == decimal:
            raise ConfigError(f"CSV delimiter {delimiter!r} equals the decimal mark; use ';' with decimal ','")
        lines = []
        for row in np.asarray(values, float):
            cells = [f"{v:.{digits}f}" for v in row]
            if decimal != ".":
                cells = [c.replace(".", decimal) for c in cells]
            lines.append(delimiter.join(cells))
        data = ("\n".join(lines) + "\n").encode("ascii")
    else:
        buf = io.BytesIO()
        np.save(buf, values.astype(np.float32), allow_pickle=False)
        data = buf.getvalue()
    return write_bytes(path, data)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ConfigError(f"cannot write non-finite value {v!r} to TOML")
        return repr(round(v, 6))
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, (tuple, list)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    raise ConfigError(f"cannot write {type(v).__name__} value {v!r} to TOML")


def toml_text(sections: dict, *, header: str = "") -> str:
    """TOML text of ``{"section": {"key": value}}`` (None values are left out)."""
    out = [f"# {line}" for line in header.splitlines()] if header else []
    for name, keys in sections.items():
        items = [(k, v) for k, v in keys.items() if v is not None]
        if not items:
            continue
        if out:
            out.append("")
        out.append(f"[{name}]")
        out += [f"{k} = {_toml_value(v)}" for k, v in items]
    return "\n".join(out) + "\n"


def write_toml(path: str | os.PathLike[str], sections: dict, *, header: str = "") -> Path:
    """Write a metadata TOML file atomically; returns its path.

    The text is first checked against the metadata schema (``irseg.types`` sections, via
    :func:`irseg.metadata.parse_metadata_text`), so a file irseg would refuse is never written.

    Raises
    ------
    MetadataError
        Unknown section or key, or a value out of range.
    OutputError
        The file cannot be written.
    """
    text = toml_text(sections, header=header)
    parse_metadata_text(text, source=Path(path).name)
    return write_bytes(path, text.encode("utf-8"))
