"""One contract for every reader: a base class of checks, one subclass per reader.

Each subclass says how its format is written (the scene maker's writers,
``irseg.scenes.write_image``, where they write the format; otherwise the reference
library: tifffile, imageio/pillow, numpy) and which bad files it can hold. The checks:

- float and integer data read back equal (values and dtype), the file untouched;
- an empty file is refused, naming it;
- the pixel budget is checked from the header, before the pixel data are decoded;
- a truncated file raises InputError naming it, the file untouched;
- a bad pixel type (complex, bool, Python objects, RGB colour) is refused with
  UnsupportedFormatError or InputError naming the file.

Format-specific behaviour (CSV delimiters, TIFF compression, PNG headers ...) is tested
beside this file (test_readers.py, test_csv_reader.py).
"""

from __future__ import annotations

import hashlib
import os
from collections.abc import Callable
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest
import tifffile

from irseg.errors import InputError
from irseg.io import is_candidate, list_readers, read_thermogram
from irseg.scenes import write_image

SHAPE = (24, 31)
BUDGET_SHAPE = (50, 40)  # 2000 pixels


def pytest_generate_tests(metafunc: pytest.Metafunc) -> None:
    """Each subclass's ``float_dtypes`` / ``int_dtypes`` become the parameters of the round trips."""
    cls = metafunc.cls
    for name, attr in (("float_dtype", "float_dtypes"), ("int_dtype", "int_dtypes")):
        if cls is not None and name in metafunc.fixturenames:
            dtypes = getattr(cls, attr)
            metafunc.parametrize(name, dtypes, ids=[np.dtype(d).str for d in dtypes])


def _state(path: Path) -> tuple[str, int, int]:
    """The file's content hash, modification time and size."""
    info = os.stat(path)
    return hashlib.sha256(path.read_bytes()).hexdigest(), info.st_mtime_ns, info.st_size


def _read_untouched(path: Path, **kw):
    """read_thermogram, checking that the file did not change (bytes, time, size) whatever the outcome."""
    before = _state(path)
    try:
        return read_thermogram(path, **kw)
    finally:
        assert _state(path) == before, f"{path} was modified by reading it"


class ReaderContract:
    """The checks every reader passes. Subclasses set the class attributes and ``write``."""

    reader: str = ""
    suffix: str = ""
    float_dtypes: tuple = ()
    int_dtypes: tuple = ()

    # ------------------------------------------------------------------ what a subclass provides

    def write(self, folder: Path, stem: str, data: np.ndarray) -> Path:
        """Write ``data`` (its dtype as stored) in this format; return the path."""
        raise NotImplementedError

    def bad_files(self, folder: Path, rng: np.random.Generator) -> dict[str, Path]:
        """Files of this format holding a pixel type a thermogram cannot have: {what: path}."""
        raise NotImplementedError

    def sample(self, dtype, rng: np.random.Generator, shape=SHAPE) -> np.ndarray:
        """Test data of ``dtype``: building temperatures for floats, the full range for integers."""
        dtype = np.dtype(dtype)
        if dtype.kind == "f":
            return rng.normal(18.0, 2.0, shape).astype(dtype)
        info = np.iinfo(dtype)
        return rng.integers(info.min, info.max, shape, endpoint=True).astype(dtype)

    def spoil_pixels(self, path: Path) -> None:
        """Damage the pixel data, keeping the header that declares the size: cut the file in half."""
        blob = path.read_bytes()
        path.write_bytes(blob[: len(blob) // 2])

    def truncations(self, blob: bytes) -> dict[str, bytes]:
        """Cut copies of a valid file: {where: bytes}."""
        return {"half": blob[: len(blob) // 2], "last 2 bytes": blob[:-2]}

    # ------------------------------------------------------------------ the contract

    def _round_trip(self, tmp_path: Path, data: np.ndarray) -> None:
        path = self.write(tmp_path, "round", data)
        frame = _read_untouched(path)
        assert frame.format == self.reader and frame.path == str(path)
        assert frame.data.dtype == data.dtype.newbyteorder("=") and frame.data.dtype.isnative
        assert frame.data.shape == data.shape and frame.data.flags.c_contiguous
        np.testing.assert_array_equal(frame.data, data)

    def test_registered_under_its_suffix(self):
        assert self.reader in list_readers()
        assert is_candidate(f"wall{self.suffix}") and is_candidate(f"WALL{self.suffix.upper()}")

    def test_float_round_trip(self, tmp_path, rng, float_dtype):
        self._round_trip(tmp_path, self.sample(float_dtype, rng))

    def test_integer_round_trip(self, tmp_path, rng, int_dtype):
        self._round_trip(tmp_path, self.sample(int_dtype, rng))

    def test_empty_file_is_refused(self, tmp_path):
        path = tmp_path / f"empty{self.suffix}"
        path.write_bytes(b"")
        with pytest.raises(InputError, match="empty") as info:
            read_thermogram(path)
        assert str(path) in str(info.value)

    def test_pixel_budget_checked_before_decoding(self, tmp_path, rng):
        dtype = (self.float_dtypes or self.int_dtypes)[0]
        data = self.sample(dtype, rng, BUDGET_SHAPE)
        path = self.write(tmp_path, "budget", data)
        with pytest.raises(InputError, match="50 x 40 = 2000 pixels exceeds the pixel budget of 1999") as info:
            _read_untouched(path, max_pixels=1999)
        assert "raise the max_pixels setting" in str(info.value)  # names the setting that fixes it
        assert read_thermogram(path, max_pixels=2000).data.shape == BUDGET_SHAPE
        # with the pixel data spoiled, the budget still speaks first: it is read from the header
        self.spoil_pixels(path)
        with pytest.raises(InputError, match="exceeds the pixel budget of 1999"):
            read_thermogram(path, max_pixels=1999)

    def test_truncated_file_is_refused_naming_it(self, tmp_path, rng):
        dtype = (self.float_dtypes or self.int_dtypes)[0]
        blob = self.write(tmp_path, "whole", self.sample(dtype, rng, (64, 64))).read_bytes()
        for where, cut_blob in self.truncations(blob).items():
            cut = tmp_path / f"cut_{where.replace(' ', '_')}{self.suffix}"
            cut.write_bytes(cut_blob)
            with pytest.raises(InputError) as info:
                _read_untouched(cut)
            assert str(cut) in str(info.value), where

    def test_bad_pixel_types_are_refused(self, tmp_path, rng):
        bad = self.bad_files(tmp_path, rng)
        assert bad
        for what, path in bad.items():
            with pytest.raises(InputError) as info:  # UnsupportedFormatError is an InputError
                _read_untouched(path)
            assert str(path) in str(info.value), what


def _scene_writer(fmt: str, **kw) -> Callable[[Path, str, np.ndarray], Path]:
    """The scene maker's writer for one of its formats (values passed as floats, as it takes them)."""

    def write(folder: Path, stem: str, data: np.ndarray) -> Path:
        return write_image(folder, stem, np.asarray(data, dtype=np.float64), fmt=fmt, **kw)

    return write


# ---------------------------------------------------------------------------------------- readers


class TestTiffReader(ReaderContract):
    reader, suffix = "tiff", ".tif"
    float_dtypes = (np.float32, np.float64)
    int_dtypes = (np.uint16, np.int16, np.uint8, np.int32)

    def write(self, folder, stem, data):
        if data.dtype == np.float32:
            return _scene_writer("tiff-float")(folder, stem, data)
        if data.dtype == np.uint16:
            return _scene_writer("tiff-u16")(folder, stem, data)
        path = folder / f"{stem}.tif"
        tifffile.imwrite(path, data)  # reference writer: tifffile
        return path

    def bad_files(self, folder, rng):
        paths = {}
        for what, data, kw in (
            ("complex", np.zeros((4, 4), np.complex64), {}),
            ("bool", np.zeros((4, 4), bool), {}),
            ("RGB", rng.integers(0, 255, (8, 8, 3), dtype=np.uint8), {"photometric": "rgb"}),
        ):
            paths[what] = folder / f"{what}.tif"
            tifffile.imwrite(paths[what], data, **kw)
        return paths


class TestPngReader(ReaderContract):
    reader, suffix = "png", ".png"
    float_dtypes = ()  # PNG stores integers only; a float export is encoded as raw * scale + offset
    test_float_round_trip = None  # so no float round trip is collected for PNG
    # 16-bit greyscale only: 8-bit and lower grey PNGs are pictures (refused, see bad_files and test_readers.py)
    int_dtypes = (np.uint16,)

    def write(self, folder, stem, data):
        return _scene_writer("png16")(folder, stem, data)

    def bad_files(self, folder, rng):
        paths = {}
        for what, channels in (("grey + alpha", 2), ("RGB", 3), ("RGBA", 4)):
            paths[what] = folder / f"{channels}ch.png"
            iio.imwrite(paths[what], rng.integers(0, 255, (8, 8, channels), dtype=np.uint8))
        paths["8-bit grey"] = folder / "grey8.png"
        iio.imwrite(paths["8-bit grey"], rng.integers(0, 255, (8, 8), dtype=np.uint8))  # reference writer: pillow
        return paths


class TestNpyReader(ReaderContract):
    reader, suffix = "npy", ".npy"
    float_dtypes = (np.float32, np.float64, ">f4")
    int_dtypes = (np.int64, np.uint16)

    def write(self, folder, stem, data):
        if data.dtype == np.float32:
            return _scene_writer("npy")(folder, stem, data)
        path = folder / f"{stem}.npy"
        np.save(path, data)  # reference writer: numpy
        return path

    def bad_files(self, folder, rng):
        arrays = {
            "complex": np.zeros((4, 4), complex),
            "bool": np.zeros((4, 4), bool),
            "object": np.array([[{"a": 1}, None]], dtype=object),
            "RGB": rng.integers(0, 255, (8, 8, 3), dtype=np.uint8),
        }
        paths = {}
        for what, array in arrays.items():
            paths[what] = folder / f"{what}.npy"
            np.save(paths[what], array, allow_pickle=array.dtype.hasobject)
        return paths


class TestCsvReader(ReaderContract):
    reader, suffix = "csv", ".csv"
    float_dtypes = (np.float64,)  # a text matrix reads as float64, or int64 when every cell is an integer
    int_dtypes = (np.int64,)

    def sample(self, dtype, rng, shape=SHAPE):
        # values the text holds exactly: hundredths (floats), integers within the float mantissa
        if np.dtype(dtype).kind == "f":
            return rng.integers(-5000, 15000, shape) / 100.0
        return rng.integers(-(10**6), 10**6, shape, endpoint=True).astype(np.int64)

    def write(self, folder, stem, data):
        digits = 2 if data.dtype.kind == "f" else 0
        return _scene_writer("csv", digits=digits)(folder, stem, data)

    def spoil_pixels(self, path):
        # the budget is read from the line count and the first row, before any cell is parsed:
        # make the last row non-numeric
        lines = path.read_text(encoding="ascii").splitlines()
        lines[-1] = ",".join("x" for _ in lines[-1].split(","))
        path.write_text("\n".join(lines) + "\n", encoding="ascii")

    def bad_files(self, folder, rng):
        complex_path = folder / "complex.csv"
        np.savetxt(complex_path, np.full((3, 3), 1 + 2j), delimiter=",")  # numpy writes "(1+2j)" cells
        bool_path = folder / "bool.csv"
        bool_path.write_text("True,False\nFalse,True\n", encoding="ascii")
        return {"complex": complex_path, "bool": bool_path}

    @pytest.mark.xfail(
        strict=True,
        reason="a text matrix declares no size: cut inside its last number ('18.62' -> '18.6') it parses to "
        "a different value, and cut at a line end it is a complete smaller matrix; only a cut that leaves a "
        "short last row is detected (the half cut here; test_csv_reader.py)",
    )
    def test_truncated_file_is_refused_naming_it(self, tmp_path, rng):
        super().test_truncated_file_is_refused_naming_it(tmp_path, rng)
