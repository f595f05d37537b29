"""TIFF reader: float temperature or integer raw values, first page, single channel."""

from __future__ import annotations

import os
from typing import Any

import numpy as np

from ..errors import InputError, IrsegError, UnsupportedFormatError
from ..types import RawFrame
from ._common import (
    _io_capture_log,
    _io_check_budget,
    _io_check_dtype,
    _io_corrupt,
    _io_display,
    _io_file_size,
    _io_os_error,
    _io_quiet,
    _io_squeeze_2d,
)

__all__ = ["read_tiff", "TIFF_MAGIC", "TIFF_SUFFIXES"]

#: Classic and BigTIFF signatures, little- and big-endian.
TIFF_MAGIC = (b"II*\x00", b"MM\x00*", b"II+\x00", b"MM\x00+")
TIFF_SUFFIXES = (".tif", ".tiff")

# TIFF photometric interpretations that are pictures, not measurements
_TIFF_COLOUR_PHOTOMETRIC = {2: "RGB", 3: "palette", 5: "CMYK", 6: "YCbCr", 8: "CIELab", 32844: "LogL", 32845: "LogLuv"}


def _tiff_tags(page: Any) -> dict[str, Any]:
    """The page's simple tags as a plain dict (numbers, strings, short number tuples)."""
    out: dict[str, Any] = {}
    for tag in page.tags.values():
        value = tag.value
        if isinstance(value, bytes):
            continue
        if isinstance(value, str):
            out[str(tag.name)] = value[:2000]
        elif isinstance(value, (int, float)):
            out[str(tag.name)] = value if not hasattr(value, "value") else int(value)
        elif isinstance(value, tuple) and len(value) <= 16 and all(isinstance(v, (int, float)) for v in value):
            out[str(tag.name)] = tuple(value)
    return out


def _tiff_compression_name(exc: BaseException) -> str:
    text = str(exc)
    start = text.find("COMPRESSION.")
    return text[start + 12 :].split(":")[0] if start >= 0 else "(unknown)"


def read_tiff(path: str | os.PathLike[str], *, max_pixels: int) -> RawFrame:
    """Read the first page of a TIFF as a 2-D array with its stored dtype.

    Parameters
    ----------
    path : path-like
        The TIFF file (opened read-only).
    max_pixels : int
        Pixel budget, checked against the page's tags before any pixel is decoded.

    Returns
    -------
    RawFrame
        ``format="tiff"``; ``metadata`` holds the page's simple tags and ``n_pages``.

    Raises
    ------
    InputError
        Missing, empty, truncated or corrupt file; image over the pixel budget.
    UnsupportedFormatError
        Colour (RGB, palette...) or multi-channel pictures, non-numeric sample types.
    """
    import tifffile

    name = _io_display(path)
    size = _io_file_size(path)
    if size == 0:
        raise InputError(f"{name}: empty file (0 bytes); re-copy it from the camera export")
    try:
        with open(path, "rb") as fh:
            head = fh.read(4)
            if head not in TIFF_MAGIC:
                raise InputError(
                    f"{name}: does not start with a TIFF signature; the file is corrupt or not a TIFF"
                )
            fh.seek(0)
            with _io_quiet(), _io_capture_log("tifffile") as decoder_log, tifffile.TiffFile(fh) as tif:
                if len(tif.pages) < 1:
                    raise InputError(f"{name}: TIFF holds no image page")
                page = tif.pages[0]
                if not hasattr(page, "photometric"):
                    raise InputError(f"{name}: TIFF first page is unreadable")
                photometric = int(page.photometric)
                if photometric in _TIFF_COLOUR_PHOTOMETRIC:
                    raise UnsupportedFormatError(
                        f"{name}: a {_TIFF_COLOUR_PHOTOMETRIC[photometric]} colour picture, not a radiometric "
                        "thermogram (a colour picture holds no temperatures); export the temperature "
                        "matrix (single-channel float or integer TIFF) instead"
                    )
                spp = int(page.samplesperpixel)
                if spp > 1:
                    raise UnsupportedFormatError(
                        f"{name}: TIFF with {spp} samples per pixel, not a single-channel radiometric "
                        "thermogram; export the temperature matrix as one channel instead"
                    )
                shape = tuple(int(s) for s in page.shape)
                _io_check_budget(name, shape, max_pixels)
                m, n = _io_squeeze_2d(name, shape, fmt="TIFF")
                if page.dtype is None:
                    raise UnsupportedFormatError(
                        f"{name}: TIFF sample format (bits {page.bitspersample}, format "
                        f"{int(page.sampleformat)}) is not supported; export float32 or uint16"
                    )
                dtype = _io_check_dtype(name, np.dtype(page.dtype), fmt="TIFF")
                # the decoded size must fit in what the file could plausibly hold
                if page.compression == 1 and m * n * dtype.itemsize > size:
                    raise InputError(
                        f"{name}: truncated TIFF: {m} x {n} {dtype} pixels need "
                        f"{m * n * dtype.itemsize} bytes but the file has {size}"
                    )
                tags = _tiff_tags(page)
                n_pages = len(tif.pages)
                data = page.asarray()
    except IrsegError:
        raise
    except MemoryError:
        raise InputError(f"{name}: not enough memory to decode this TIFF; lower its size") from None
    except (FileNotFoundError, PermissionError) as exc:
        raise _io_os_error(name, exc) from None
    except Exception as exc:  # noqa: BLE001 - any decoder failure is a corrupt file
        if "imagecodecs" in str(exc):
            raise UnsupportedFormatError(
                f"{name}: TIFF compression {_tiff_compression_name(exc)} needs the optional 'imagecodecs' "
                "package, which irseg does not install; re-export uncompressed or deflate (zlib), "
                "or install imagecodecs"
            ) from None
        raise _io_corrupt(name, "TIFF", exc) from None
    data = np.asarray(data)
    if data.size != m * n:
        raise InputError(f"{name}: TIFF decoded to {data.shape}, not the declared {m} x {n}; the file is corrupt")
    data = np.ascontiguousarray(data.reshape(m, n), dtype=dtype)
    meta: dict[str, Any] = {"tags": tags, "n_pages": n_pages, "dtype": str(data.dtype)}
    if decoder_log:
        meta["decoder_messages"] = list(decoder_log)
    if n_pages > 1:
        meta["note"] = f"first of {n_pages} pages read"
    return RawFrame(path=name, data=data, format="tiff", metadata=meta)
