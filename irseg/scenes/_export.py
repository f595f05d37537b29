"""Simulated thermograms as a camera export holds them, written in the open formats irseg reads.

Formats (``fmt``):

- ``tiff-float``: float32 TIFF, values in ``units`` (°C or K);
- ``tiff-u16``: uint16 TIFF, ``value = raw·scale + offset``;
- ``png16``: 16-bit greyscale PNG, same encoding;
- ``csv``: text matrix, ``delimiter`` and ``decimal`` mark chosen per file;
- ``npy``: float32 NumPy array.

This module decides *what* is written (the export's temperatures, the format and file
name, metadata that irseg accepts); the encoders and atomic writers are the I/O layer's
(:mod:`irseg.io`). Dead pixels keep their stuck value. Writers are
deterministic (no time stamps), so a seeded survey is byte-identical when remade.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from irseg._shared import KELVIN_AT_0C
from irseg.errors import ConfigError
from irseg.io import write_text
from irseg.io import (
    format_metadata_toml,
    write_csv_matrix,
    write_npy,
    write_png16,
    write_tiff_float,
    write_tiff_u16,
)
from irseg.metadata import parse_metadata_text
from irseg.radiometry import apparent_to_object

__all__ = ["FORMATS", "encode_values", "write_image", "write_toml"]

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
        vals = vals + KELVIN_AT_0C
    elif units != "celsius":
        raise ConfigError(f"units={units!r}; use celsius or kelvin")
    return vals


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
        Created if missing.
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
        return write_tiff_float(path, values)
    if fmt == "tiff-u16":
        return write_tiff_u16(path, values, scale=scale, offset=offset)
    if fmt == "png16":
        return write_png16(path, values, scale=scale, offset=offset)
    if fmt == "csv":
        return write_csv_matrix(path, values, delimiter=delimiter, decimal=decimal, digits=digits)
    return write_npy(path, values)


def write_toml(path: str | os.PathLike[str], sections: dict, *, header: str = "") -> Path:
    """Write a metadata TOML file atomically; returns its path.

    The text (:func:`irseg.io.format_metadata_toml`) is first checked against
    the metadata schema (``irseg.types`` sections, via :func:`irseg.metadata.parse_metadata_text`),
    so a file irseg would refuse is never written.

    Raises
    ------
    MetadataError
        Unknown section or key, or a value out of range.
    ConfigError
        A value TOML cannot hold (see ``format_metadata_toml``).
    OutputError
        The file cannot be written.
    """
    text = format_metadata_toml(sections, header=header)
    parse_metadata_text(text, source=Path(path).name)
    return write_text(path, text)
