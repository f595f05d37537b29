"""PNG reader: single-channel greyscale, 16-bit (or 8-bit/low-depth) raw values."""

from __future__ import annotations

import io
import os
import struct
import zlib

import numpy as np

from ..errors import InputError, IrsegError, UnsupportedFormatError
from ..types import RawFrame
from ._common import _io_check_budget, _io_corrupt, _io_display, _io_open_bytes, _io_quiet

__all__ = ["read_png", "PNG_MAGIC", "PNG_SUFFIXES"]

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
PNG_SUFFIXES = (".png",)

# the end chunk: zero length, type IEND, then its 4-byte CRC (PNG specification, 11.2.5)
_PNG_IEND = b"\x00\x00\x00\x00IEND"

_PNG_COLOUR_TYPES = {0: "greyscale", 2: "RGB colour", 3: "palette colour", 4: "greyscale + alpha", 6: "RGBA colour"}
_PNG_DEPTHS = {0: (1, 2, 4, 8, 16), 2: (8, 16), 3: (1, 2, 4, 8), 4: (8, 16), 6: (8, 16)}


def _png_header(name: str, blob: bytes) -> tuple[int, int, int, int]:
    """Width, height, bit depth and colour type from the IHDR chunk (validated, CRC checked)."""
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
    return width, height, depth, colour


def read_png(path: str | os.PathLike[str], *, max_pixels: int) -> RawFrame:
    """Read a single-channel greyscale PNG keeping its bit depth.

    Parameters
    ----------
    path : path-like
        The PNG file (opened read-only).
    max_pixels : int
        Pixel budget, checked against the IHDR chunk before decoding.

    Returns
    -------
    RawFrame
        ``format="png"``; ``data`` is ``uint16`` for 16-bit files and ``uint8`` otherwise.

    Raises
    ------
    InputError
        Empty, truncated or corrupt file; image over the pixel budget.
    UnsupportedFormatError
        Colour (RGB, RGBA, palette) or grey + alpha pictures: they are not radiometric.
    """
    import imageio.v3 as iio

    name = _io_display(path)
    # signature + IHDR only (33 bytes): colour type and pixel budget are checked before the rest is read
    width, height, depth, colour = _png_header(name, _io_open_bytes(path, limit=33))
    if colour != 0:
        raise UnsupportedFormatError(
            f"{name}: a {_PNG_COLOUR_TYPES[colour]} PNG, not a radiometric thermogram (a colour picture "
            "holds no temperatures); export the temperature matrix as a 16-bit greyscale PNG, TIFF, CSV "
            "or NPY instead"
        )
    _io_check_budget(name, (height, width), max_pixels)
    blob = _io_open_bytes(path)
    end = blob.rfind(_PNG_IEND)
    if end < 0 or len(blob) < end + len(_PNG_IEND) + 4:
        # a cut copy; bytes after the end chunk (some exporters append their own) are allowed
        raise InputError(f"{name}: truncated PNG: the end chunk (IEND) is missing or cut; re-copy the file")
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
    want = np.uint16 if depth == 16 else np.uint8
    data = np.ascontiguousarray(data, dtype=want)
    meta = {"bit_depth": depth, "colour_type": colour, "width": width, "height": height}
    return RawFrame(path=name, data=data, format="png", metadata=meta)
