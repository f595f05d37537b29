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

import math
import os
from pathlib import Path

import cv2
import numpy as np
import tifffile

from irseg.errors import ConfigError, OutputError
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


def _atomic_bytes(path: Path, data: bytes) -> None:
    tmp = path.with_name(path.name + ".part")
    try:
        tmp.write_bytes(data)
        os.replace(tmp, path)
    except OSError as exc:
        raise OutputError(f"{path}: cannot write ({exc.strerror}); check the folder is writable") from exc


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
        import io

        buf = io.BytesIO()
        tifffile.imwrite(buf, values.astype(np.float32), photometric="minisblack", software=None, metadata=None)
        _atomic_bytes(path, buf.getvalue())
    elif fmt == "tiff-u16":
        import io

        buf = io.BytesIO()
        tifffile.imwrite(buf, _to_raw(values, scale, offset), photometric="minisblack", software=None, metadata=None)
        _atomic_bytes(path, buf.getvalue())
    elif fmt == "png16":
        ok, enc = cv2.imencode(".png", _to_raw(values, scale, offset), [cv2.IMWRITE_PNG_COMPRESSION, 9])
        if not ok:
            raise OutputError(f"{path}: PNG encoding failed")
        _atomic_bytes(path, enc.tobytes())
    elif fmt == "csv":
        if delimiter == decimal:
            raise ConfigError(f"CSV delimiter {delimiter!r} equals the decimal mark; use ';' with decimal ','")
        lines = []
        for row in np.asarray(values, float):
            cells = [f"{v:.{digits}f}" for v in row]
            if decimal != ".":
                cells = [c.replace(".", decimal) for c in cells]
            lines.append(delimiter.join(cells))
        _atomic_bytes(path, ("\n".join(lines) + "\n").encode("ascii"))
    else:
        import io

        buf = io.BytesIO()
        np.save(buf, values.astype(np.float32), allow_pickle=False)
        _atomic_bytes(path, buf.getvalue())
    return path


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
    """Write a metadata TOML file atomically; returns its path."""
    p = Path(path)
    _atomic_bytes(p, toml_text(sections, header=header).encode("utf-8"))
    return p
