"""The I/O layer: readers for open radiometric image formats (TIFF, 16-bit PNG, CSV/TXT, NPY),
bounded reads of irseg's own small files, and atomic writers for every output.

Every reader opens its file read-only, checks the declared image size against a pixel
budget before decoding, and raises only irseg's own errors (:class:`~irseg.errors.InputError`,
:class:`~irseg.errors.UnsupportedFormatError`) naming the file and the problem.
"""

from __future__ import annotations

import os
from pathlib import Path

from .._shared import DEFAULT_MAX_PIXELS
from ..errors import ConfigError
from ..types import RawFrame
from ._files import (
    MAX_TEXT_BYTES,
    SURVEY_FILE,
    metadata_candidates,
    read_json_file,
    read_metadata_texts,
    read_small_bytes,
    read_small_text,
)
from ._registry import _reg_by_name, _reg_by_suffix, _reg_detect, _reg_names
from ._outfolder import LOCK_NAME, MANIFEST_NAME, OutputManifest, lock_folder, replace_files
from ._scene_writers import (
    csv_matrix_text,
    exact_json_text,
    format_metadata_toml,
    npy_bytes,
    npz_bytes,
    png16_bytes,
    quantise_u16,
    tiff_bytes,
    write_csv_matrix,
    write_exact_json,
    write_metadata_toml,
    write_npy,
    write_npz,
    write_png16,
    write_tiff_float,
    write_tiff_u16,
)
from ._writers import (
    MAX_NAME_BYTES,
    escape_line,
    escape_text,
    SIGNIFICANT_DIGITS,
    TEMP_PREFIX,
    csv_bytes,
    dumps_json,
    encode_png,
    format_float,
    normalise_json,
    remove_file,
    remove_temp_files,
    resolve_inside,
    safe_component,
    write_bytes,
    write_csv,
    write_json,
    write_text,
)

__all__ = [
    "read_thermogram",
    "list_readers",
    "is_candidate",
    "DEFAULT_MAX_PIXELS",
    "MAX_TEXT_BYTES",
    "read_small_bytes",
    "read_small_text",
    "read_json_file",
    "SURVEY_FILE",
    "metadata_candidates",
    "read_metadata_texts",
    "TEMP_PREFIX",
    "SIGNIFICANT_DIGITS",
    "format_float",
    "normalise_json",
    "dumps_json",
    "csv_bytes",
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
    "escape_line",
    "escape_text",
    "LOCK_NAME",
    "MANIFEST_NAME",
    "OutputManifest",
    "lock_folder",
    "replace_files",
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



def read_thermogram(
    path: str | os.PathLike[str], *, format: str | None = None, max_pixels: int = DEFAULT_MAX_PIXELS
) -> RawFrame:
    """Read one thermogram as stored in its file.

    Parameters
    ----------
    path : path-like
        Image file. Opened read-only; never modified.
    format : str, optional
        Reader name (see :func:`list_readers`) to use instead of detection. Detection
        looks at the file's signature (magic bytes) first, then at its suffix.
    max_pixels : int, default 40_000_000
        Largest number of pixels accepted, checked from the file header before decoding.

    Returns
    -------
    RawFrame
        ``data`` is the (M, N) array with the stored dtype (integer raw values or float
        temperatures), ``format`` the reader's name, ``metadata`` the format's own tags.

    Raises
    ------
    InputError
        Missing, empty, truncated or corrupt file; image over the pixel budget.
    UnsupportedFormatError
        No reader recognises the file, or it is a colour picture rather than a radiometric image.
    ConfigError
        ``format`` is not a reader name, or ``max_pixels`` is not a positive integer.
    """
    if isinstance(max_pixels, bool) or not isinstance(max_pixels, int) or max_pixels < 1:
        raise ConfigError(f"max_pixels = {max_pixels!r} must be a positive integer")
    reader = _reg_by_name(format) if format is not None else _reg_detect(path)
    return reader.read(path, max_pixels=max_pixels)


def list_readers() -> list[str]:
    """Names of the available readers, sorted (``["csv", "npy", "png", "tiff"]``)."""
    return _reg_names()


def is_candidate(path: str | os.PathLike[str]) -> bool:
    """True when the file's suffix belongs to some reader (``.toml`` files never are).

    Parameters
    ----------
    path : path-like
        A file name; the file is not opened.
    """
    p = Path(path)
    if p.suffix.lower() == ".toml" or p.name.startswith("."):
        return False
    return _reg_by_suffix(p) is not None
