"""TIFF reader: float temperature or integer raw values, first page, single channel."""

from __future__ import annotations

import os
import struct
from typing import Any, BinaryIO

import numpy as np

from ..errors import InputError, IrsegError, UnsupportedFormatError
from ..types import RawFrame
from ._common import (
    _io_article,
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

#: Pages counted at most (only the first is read; a radiometric sequence may hold thousands).
_TIFF_MAX_PAGES = 10_000
#: A strip or tile may decode to at most this many times the image's own bytes (or _TIFF_MIN_SEGMENT_BYTES):
#: tiles pad the image to whole tiles, which for legal tile sizes (multiples of 16, usually 256 or 512)
#: stays within a few times the image even for small images.
_TIFF_SEGMENT_FACTOR = 4
_TIFF_MIN_SEGMENT_BYTES = 4 << 20
#: A segment's stored bytes may exceed its decoded bytes by at most this factor plus _TIFF_SEGMENT_SLACK:
#: the worst expansion of the TIFF codecs on incompressible data is LZW's 12-bit codes for 8-bit input,
#: 1.5 times; deflate and PackBits add under 1 % (common practice; from the codecs' definitions).
_TIFF_STORED_FACTOR = 2
_TIFF_SEGMENT_SLACK = 4096


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


def _tiff_count_pages(fh: BinaryIO, size: int) -> int:
    """Number of pages in the main IFD chain, counted up to ``_TIFF_MAX_PAGES`` (+1 meaning "more").

    Walks only each IFD's entry count and next-IFD offset: bounded by the cap and the file
    size, and stops at a loop or an offset beyond the file.
    """
    fh.seek(0)
    head = fh.read(16)
    order = "<" if head[:2] == b"II" else ">"
    if head[2:4] in (b"+\x00", b"\x00+"):  # BigTIFF: 8-byte counts and offsets, 20-byte entries
        fmt_n, fmt_off, entry = "Q", "Q", 20
        (offset,) = struct.unpack(order + "Q", head[8:16]) if len(head) >= 16 else (0,)
    else:
        fmt_n, fmt_off, entry = "H", "I", 12
        (offset,) = struct.unpack(order + "I", head[4:8]) if len(head) >= 8 else (0,)
    n_size, off_size = struct.calcsize(fmt_n), struct.calcsize(fmt_off)
    seen: set[int] = set()
    pages = 0
    while offset and offset not in seen and pages <= _TIFF_MAX_PAGES and offset + n_size <= size:
        seen.add(offset)
        fh.seek(offset)
        (count,) = struct.unpack(order + fmt_n, fh.read(n_size))
        pages += 1
        nxt = offset + n_size + count * entry
        if nxt + off_size > size:
            break
        fh.seek(nxt)
        (offset,) = struct.unpack(order + fmt_off, fh.read(off_size))
    return pages


def _tiff_check_segments(name: str, page: Any, *, m: int, n: int, itemsize: int, size: int) -> None:
    """Bound what decoding the page allocates, before any strip or tile is decompressed.

    Each strip or tile decodes into a buffer of its declared size: a tile declared far larger than the
    image (or a strip of absurd length) would allocate gigabytes for a few pixels. Each segment's stored
    bytes must lie inside the file and be no more than its decoded size allows for any TIFF codec.
    """
    depth = max(1, int(getattr(page, "imagedepth", 1) or 1))
    if page.is_tiled:
        dims = (max(1, int(page.tiledepth or 1)), int(page.tilelength), int(page.tilewidth))
        what = "tile"
    else:
        rows = int(page.rowsperstrip or m)
        dims = (depth, min(max(rows, 1), m), n)
        what = "strip"
    if min(dims) < 1:
        raise InputError(f"{name}: TIFF {what} size {' x '.join(map(str, dims[1:]))} is invalid; the file is corrupt")
    seg_px = dims[0] * dims[1] * dims[2]
    seg_bytes = seg_px * itemsize
    image_bytes = m * n * itemsize
    limit = max(_TIFF_SEGMENT_FACTOR * image_bytes, _TIFF_MIN_SEGMENT_BYTES)
    if seg_bytes > limit:
        raise InputError(
            f"{name}: TIFF {what} of {dims[1]} x {dims[2]} pixels ({seg_bytes} bytes when decoded) is far larger "
            f"than the {m} x {n} image; the file is corrupt or crafted, re-export it"
        )
    offsets = tuple(int(o) for o in page.dataoffsets)
    counts = tuple(int(c) for c in page.databytecounts)
    most = _TIFF_STORED_FACTOR * seg_bytes + _TIFF_SEGMENT_SLACK
    for k, (offset, count) in enumerate(zip(offsets, counts)):
        if count > most:
            raise InputError(
                f"{name}: TIFF {what} {k + 1} declares {count} stored bytes for {seg_bytes} decoded bytes, more than "
                "any TIFF compression produces; the file is corrupt or crafted, re-export it"
            )
        if count and offset + count > size:
            raise InputError(
                f"{name}: truncated TIFF: {what} {k + 1} ends at byte {offset + count} but the file has {size} "
                "bytes; re-copy the file"
            )


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
                try:
                    page = tif.pages.first  # the first page only: len(tif.pages) would walk every IFD
                except IndexError:
                    raise InputError(f"{name}: TIFF holds no image page") from None
                if not hasattr(page, "photometric"):
                    raise InputError(f"{name}: TIFF first page is unreadable")
                photometric = int(page.photometric)
                if photometric in _TIFF_COLOUR_PHOTOMETRIC:
                    raise UnsupportedFormatError(
                        f"{name}: {_io_article(_TIFF_COLOUR_PHOTOMETRIC[photometric])} colour picture, "
                        "not a radiometric thermogram (a colour picture holds no temperatures); export the "
                        "temperature matrix (single-channel float or integer TIFF) instead"
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
                _tiff_check_segments(name, page, m=m, n=n, itemsize=dtype.itemsize, size=size)
                tags = _tiff_tags(page)
                n_pages = _tiff_count_pages(fh, size)
                data = page.asarray(maxworkers=1)
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
    if n_pages > _TIFF_MAX_PAGES:
        meta["n_pages"] = None
        meta["note"] = f"first of more than {_TIFF_MAX_PAGES} pages read"
    elif n_pages > 1:
        meta["note"] = f"first of {n_pages} pages read"
    return RawFrame(path=name, data=data, format="tiff", metadata=meta)
