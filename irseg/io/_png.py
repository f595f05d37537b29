"""PNG reader: single-channel 16-bit greyscale raw values.

Before the decoder sees the file, its chunk structure is walked (lengths, checksums, the
end chunk) and the image data are inflated once, in bounded pieces, only to count them:
the inflated data must hold exactly the rows the header declares. A decoder given short
image data with valid checksums would fill the missing rows with zeros (−50 °C with the
usual scale and offset), so a short file is refused as truncated. Greyscale PNGs of 8 bits
or fewer are refused: 256 grey levels are a picture's shades, not temperatures at a
camera's resolution.
"""

from __future__ import annotations

import io
import os
import struct
import zlib

import numpy as np

from ..errors import InputError, IrsegError, UnsupportedFormatError
from ..types import RawFrame
from ._common import _io_article, _io_check_budget, _io_corrupt, _io_display, _io_open_bytes, _io_quiet

__all__ = ["read_png", "PNG_MAGIC", "PNG_SUFFIXES"]

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
PNG_SUFFIXES = (".png",)

# the end chunk: zero length, type IEND, then its 4-byte CRC (PNG specification, 11.2.5)
_PNG_IEND = b"\x00\x00\x00\x00IEND"

_PNG_COLOUR_TYPES = {0: "greyscale", 2: "RGB colour", 3: "palette colour", 4: "greyscale + alpha", 6: "RGBA colour"}
_PNG_DEPTHS = {0: (1, 2, 4, 8, 16), 2: (8, 16), 3: (1, 2, 4, 8), 4: (8, 16), 6: (8, 16)}

# Adam7 passes: (first row, first column, row step, column step) (PNG specification, 8.2)
_PNG_ADAM7 = ((0, 0, 8, 8), (0, 4, 8, 8), (4, 0, 8, 4), (0, 2, 4, 4), (2, 0, 4, 2), (0, 1, 2, 2), (1, 0, 2, 1))
# inflate in pieces of at most this many bytes in and out: counting never holds the image data at once
_PNG_PIECE = 1 << 18


def _png_header(name: str, blob: bytes) -> tuple[int, int, int, int, int]:
    """Width, height, bit depth, colour type and interlace method from the IHDR chunk (CRC checked)."""
    if len(blob) == 0:
        raise InputError(f"{name}: empty file (0 bytes); re-copy it from the camera export")
    if not blob.startswith(PNG_MAGIC):
        raise InputError(f"{name}: does not start with the PNG signature; the file is corrupt or not a PNG")
    if len(blob) < 33:
        raise InputError(f"{name}: truncated PNG ({len(blob)} bytes, no complete header); re-copy the file")
    length, ctype = struct.unpack(">I4s", blob[8:16])
    if ctype != b"IHDR" or length != 13:
        raise InputError(f"{name}: PNG header chunk is missing or malformed; the file is corrupt")
    width, height, depth, colour, comp, filt, interlace = struct.unpack(">IIBBBBB", blob[16:29])
    (crc,) = struct.unpack(">I", blob[29:33])
    if zlib.crc32(blob[12:29]) & 0xFFFFFFFF != crc:
        raise InputError(f"{name}: PNG header checksum mismatch; the file is corrupt")
    if colour not in _PNG_COLOUR_TYPES or depth not in _PNG_DEPTHS[colour]:
        raise InputError(f"{name}: PNG header declares an invalid colour type {colour} / bit depth {depth}")
    if width == 0 or height == 0 or comp != 0 or filt != 0 or interlace > 1:
        raise InputError(f"{name}: PNG header is invalid (size {width} x {height}); the file is corrupt")
    return width, height, depth, colour, interlace


def _png_row_bytes(width: int, depth: int) -> int:
    """Bytes of one filtered greyscale row: the filter-type byte and the packed samples."""
    return 1 + (width * depth + 7) // 8


def _png_data_bytes(width: int, height: int, depth: int, interlace: int) -> int:
    """Bytes the inflated image data of a greyscale PNG must hold (PNG specification, 7.2 and 8.2)."""
    if not interlace:
        return height * _png_row_bytes(width, depth)
    total = 0
    for r0, c0, dr, dc in _PNG_ADAM7:
        rows = (height - r0 + dr - 1) // dr if height > r0 else 0
        cols = (width - c0 + dc - 1) // dc if width > c0 else 0
        if rows and cols:  # an empty pass has no rows at all, not even filter bytes
            total += rows * _png_row_bytes(cols, depth)
    return total


def _png_image_data(name: str, blob: bytes) -> list[memoryview]:
    """The IDAT chunks' data, after every chunk up to IEND is checked (length, checksum)."""
    view = memoryview(blob)
    pos, parts = 8, []
    while True:
        if pos + 12 > len(blob):
            raise InputError(f"{name}: truncated PNG: the file ends inside a chunk at byte {pos}; re-copy the file")
        length, ctype = struct.unpack(">I4s", blob[pos : pos + 8])
        end = pos + 12 + length
        if length > 0x7FFFFFFF or end > len(blob):
            raise InputError(
                f"{name}: truncated PNG: chunk {ctype!r} at byte {pos} declares {length} bytes, beyond the end of "
                "the file; re-copy the file"
            )
        (crc,) = struct.unpack(">I", blob[end - 4 : end])
        if zlib.crc32(view[pos + 4 : end - 4]) & 0xFFFFFFFF != crc:
            raise InputError(f"{name}: PNG chunk {ctype!r} at byte {pos}: checksum mismatch; the file is corrupt")
        if ctype == b"IDAT":
            parts.append(view[pos + 8 : end - 4])
        elif ctype == b"IEND":
            return parts
        pos = end


def _png_check_rows(name: str, blob: bytes, width: int, height: int, depth: int, interlace: int) -> None:
    """Refuse image data that inflate to fewer (or more) bytes than the declared rows need."""
    parts = _png_image_data(name, blob)
    if not parts:
        raise InputError(f"{name}: PNG holds no image data (no IDAT chunk); the file is corrupt")
    need = _png_data_bytes(width, height, depth, interlace)
    inflater = zlib.decompressobj()
    got = 0
    try:
        for part in parts:
            for start in range(0, len(part), _PNG_PIECE):
                data = bytes(part[start : start + _PNG_PIECE])  # bounded input: the tail copies stay small
                while data and got <= need:
                    got += len(inflater.decompress(data, _PNG_PIECE))
                    data = inflater.unconsumed_tail
                if got > need:
                    break
            if got > need:
                break
        while got <= need and not inflater.eof:
            piece = inflater.decompress(b"", _PNG_PIECE)
            if not piece:
                break
            got += len(piece)
    except zlib.error as exc:
        raise InputError(f"{name}: corrupt PNG image data ({exc}); re-export or re-copy it") from None
    row = _png_row_bytes(width, depth)
    if got < need:
        held = f"{got // row} of its {height} rows" if not interlace else f"{got} of its {need} bytes"
        raise InputError(
            f"{name}: truncated PNG: the image data end after {held} (valid checksums, but the rest of the image "
            "is missing); re-export or re-copy the file"
        )
    if got > need:
        raise InputError(
            f"{name}: PNG image data hold more than the declared {width} x {height} pixels; the file is corrupt"
        )
    if not inflater.eof:
        raise InputError(
            f"{name}: truncated PNG: the compressed image data stop before their end marker; re-copy the file"
        )


def read_png(path: str | os.PathLike[str], *, max_pixels: int) -> RawFrame:
    """Read a single-channel 16-bit greyscale PNG.

    Parameters
    ----------
    path : path-like
        The PNG file (opened read-only).
    max_pixels : int
        Pixel budget, checked against the IHDR chunk before decoding.

    Returns
    -------
    RawFrame
        ``format="png"``; ``data`` is ``uint16``.

    Raises
    ------
    InputError
        Empty, truncated or corrupt file (a chunk cut or with a wrong checksum, image data
        holding fewer or more rows than the header declares); image over the pixel budget.
    UnsupportedFormatError
        Colour (RGB, RGBA, palette) or grey + alpha pictures, and greyscale of 1, 2, 4 or
        8 bits: they are not radiometric.
    """
    import imageio.v3 as iio

    name = _io_display(path)
    # signature + IHDR only (33 bytes): colour type and pixel budget are checked before the rest is read
    width, height, depth, colour, interlace = _png_header(name, _io_open_bytes(path, limit=33))
    if colour != 0:
        raise UnsupportedFormatError(
            f"{name}: {_io_article(_PNG_COLOUR_TYPES[colour])} PNG, not a radiometric thermogram (a colour picture "
            "holds no temperatures); export the temperature matrix as a 16-bit greyscale PNG, TIFF, CSV "
            "or NPY instead"
        )
    if depth != 16:
        raise UnsupportedFormatError(
            f"{name}: {_io_article(f'{depth}-bit')} greyscale PNG, a picture rather than a radiometric thermogram "
            f"({2**depth} grey levels are shades, not temperatures); export the temperature matrix as a 16-bit "
            "greyscale PNG with [camera] scale and offset, or as TIFF, CSV or NPY instead"
        )
    _io_check_budget(name, (height, width), max_pixels)
    blob = _io_open_bytes(path)
    end = blob.rfind(_PNG_IEND)
    if end < 0 or len(blob) < end + len(_PNG_IEND) + 4:
        # a cut copy; bytes after the end chunk (some exporters append their own) are allowed
        raise InputError(f"{name}: truncated PNG: the end chunk (IEND) is missing or cut; re-copy the file")
    _png_check_rows(name, blob, width, height, depth, interlace)
    try:
        with _io_quiet():
            data = iio.imread(io.BytesIO(blob), extension=".png", plugin="pillow")
    except IrsegError:
        raise
    except MemoryError:
        raise InputError(f"{name}: not enough memory to decode this PNG") from None
    except Exception as exc:  # noqa: BLE001 - any decoder failure is a corrupt file
        raise _io_corrupt(name, "PNG", exc) from None
    data = np.asarray(data)
    if data.shape != (height, width):
        raise InputError(
            f"{name}: PNG decoded to shape {data.shape}, not the declared {height} x {width}; the file is corrupt"
        )
    data = np.ascontiguousarray(data, dtype=np.uint16)
    meta = {"bit_depth": depth, "colour_type": colour, "width": width, "height": height}
    return RawFrame(path=name, data=data, format="png", metadata=meta)
