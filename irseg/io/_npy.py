"""NPY reader: one 2-D integer or float array, never pickled objects."""

from __future__ import annotations

import os

import numpy as np

from ..errors import InputError, IrsegError, UnsupportedFormatError
from ..types import RawFrame
from ._common import (
    _io_check_budget,
    _io_check_dtype,
    _io_display,
    _io_file_size,
    _io_os_error,
    _io_squeeze_2d,
)

__all__ = ["read_npy", "NPY_MAGIC", "NPY_SUFFIXES"]

NPY_MAGIC = b"\x93NUMPY"
NPY_SUFFIXES = (".npy",)

_NPY_MAX_HEADER = 10_000


def read_npy(path: str | os.PathLike[str], *, max_pixels: int) -> RawFrame:
    """Read a ``.npy`` file holding one 2-D numeric array (``allow_pickle=False``).

    Parameters
    ----------
    path : path-like
        The NPY file (opened read-only).
    max_pixels : int
        Pixel budget, checked against the header's shape before the data are read.

    Returns
    -------
    RawFrame
        ``format="npy"``; ``data`` keeps the stored dtype (native byte order).

    Raises
    ------
    InputError
        Empty, truncated or corrupt file; wrong number of dimensions; over the pixel budget.
    UnsupportedFormatError
        Object, structured, complex or boolean arrays; colour (M, N, 3|4) arrays.
    """
    fmt = np.lib.format
    name = _io_display(path)
    size = _io_file_size(path)
    if size == 0:
        raise InputError(f"{name}: empty file (0 bytes); re-copy it")
    try:
        with open(path, "rb") as fh:
            if fh.read(6) != NPY_MAGIC:
                raise InputError(f"{name}: does not start with the NPY signature; the file is corrupt or not NPY")
            fh.seek(0)
            try:
                major, minor = fmt.read_magic(fh)
                if (major, minor) == (1, 0):
                    shape, fortran, dtype = fmt.read_array_header_1_0(fh, max_header_size=_NPY_MAX_HEADER)
                elif (major, minor) == (2, 0):
                    shape, fortran, dtype = fmt.read_array_header_2_0(fh, max_header_size=_NPY_MAX_HEADER)
                elif (major, minor) == (3, 0) and hasattr(fmt, "_read_array_header"):
                    shape, fortran, dtype = fmt._read_array_header(fh, (3, 0), max_header_size=_NPY_MAX_HEADER)
                else:
                    raise InputError(f"{name}: NPY format version {major}.{minor} is not supported")
            except IrsegError:
                raise
            except Exception as exc:  # noqa: BLE001 - numpy raises ValueError/SyntaxError/... on bad headers
                detail = str(exc).splitlines()[0][:160] if str(exc) else type(exc).__name__
                raise InputError(f"{name}: corrupt NPY header ({detail}); re-save with numpy.save") from None
            if not isinstance(shape, tuple) or not all(isinstance(s, int) and s >= 0 for s in shape):
                raise InputError(f"{name}: corrupt NPY header (shape {shape!r})")
            dtype = np.dtype(dtype)
            if dtype.hasobject:
                raise UnsupportedFormatError(
                    f"{name}: NPY holds Python objects (pickled data), which irseg never loads; "
                    "save a plain numeric array instead"
                )
            _io_check_budget(name, shape, max_pixels)
            m, n = _io_squeeze_2d(name, shape, fmt="NPY")
            native = _io_check_dtype(name, dtype, fmt="NPY")
            nbytes = m * n * dtype.itemsize
            blob = fh.read(nbytes)
    except IrsegError:
        raise
    except OSError as exc:
        raise _io_os_error(name, exc) from None
    if len(blob) < nbytes:
        raise InputError(
            f"{name}: truncated NPY: {m} x {n} {dtype} values need {nbytes} bytes, the file holds {len(blob)}"
        )
    data = np.frombuffer(blob, dtype=dtype, count=m * n)
    data = data.reshape((m, n), order="F" if fortran else "C")
    data = np.ascontiguousarray(data, dtype=native)
    meta = {"dtype": str(dtype), "shape": tuple(shape), "fortran_order": bool(fortran)}
    return RawFrame(path=name, data=data, format="npy", metadata=meta)
