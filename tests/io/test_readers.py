"""Format-specific reading: detection, TIFF pages and codecs, PNG headers, NPY headers, bad inputs.

What every reader must do (round trips, empty, truncated, pixel budget, bad pixel types) is the
reader contract, test_reader_contract.py.
"""

from __future__ import annotations

import os
import struct
import zlib

import imageio.v3 as iio
import numpy as np
import pytest
import tifffile

from irseg.errors import ConfigError, InputError, IrsegError, UnsupportedFormatError
from irseg.io import is_candidate, list_readers, read_thermogram


# ----------------------------------------------------------------------------- format specifics


def test_tiff_big_endian_and_compressed(tmp_path, rng):
    data = rng.normal(5.0, 1.0, (16, 20)).astype(np.float32)
    tifffile.imwrite(tmp_path / "be.tif", data, byteorder=">")
    tifffile.imwrite(tmp_path / "z.tif", data, compression="zlib")
    for name in ("be.tif", "z.tif"):
        frame = read_thermogram(tmp_path / name)
        np.testing.assert_array_equal(frame.data, data)
        assert frame.data.dtype == np.float32 and frame.data.dtype.isnative


def test_tiff_multipage_reads_first(tmp_path):
    pages = np.stack([np.full((5, 6), 10.0, np.float32), np.full((5, 6), 20.0, np.float32)])
    tifffile.imwrite(tmp_path / "m.tif", pages)
    frame = read_thermogram(tmp_path / "m.tif")
    assert frame.data.shape == (5, 6) and np.all(frame.data == 10.0)
    assert frame.metadata["n_pages"] == 2


def test_png16_from_pillow_keeps_its_bit_depth(tmp_path, rng):
    # the contract suite writes 16-bit PNG with OpenCV (the scene maker's writer); pillow's encoder too
    data = rng.integers(0, 65535, (21, 33), endpoint=True).astype(np.uint16)
    path = tmp_path / "a.png"
    iio.imwrite(path, data)  # reference writer: imageio (pillow)
    frame = read_thermogram(path)
    assert frame.format == "png" and frame.data.dtype == np.uint16
    np.testing.assert_array_equal(frame.data, data)
    assert frame.metadata["bit_depth"] == 16


def test_npy_fortran_order(tmp_path, rng):
    data = np.asfortranarray(rng.normal(0, 1, (7, 5)))
    np.save(tmp_path / "f.npy", data)
    np.testing.assert_array_equal(read_thermogram(tmp_path / "f.npy").data, data)


def test_npy_nan_kept(tmp_path):
    data = np.array([[1.0, np.nan], [np.inf, 2.0]])
    np.save(tmp_path / "n.npy", data)
    out = read_thermogram(tmp_path / "n.npy").data
    assert np.isnan(out[0, 1]) and np.isinf(out[1, 0])


# ----------------------------------------------------------------------------- detection


def test_magic_wins_over_suffix(tmp_path, rng):
    data = rng.normal(0, 1, (4, 4)).astype(np.float32)
    tifffile.imwrite(tmp_path / "really_tiff.png", data)
    frame = read_thermogram(tmp_path / "really_tiff.png")
    assert frame.format == "tiff"
    np.save(tmp_path / "really_npy.npy", data)
    os.replace(tmp_path / "really_npy.npy", tmp_path / "really_npy.bin")
    assert read_thermogram(tmp_path / "really_npy.bin").format == "npy"


def test_format_override(tmp_path):
    (tmp_path / "matrix.out").write_text("1 2\n3 4\n")
    frame = read_thermogram(tmp_path / "matrix.out", format="csv")
    np.testing.assert_array_equal(frame.data, [[1, 2], [3, 4]])
    with pytest.raises(UnsupportedFormatError, match="no reader"):
        read_thermogram(tmp_path / "matrix.out")


def test_bad_format_name_lists_readers(tmp_path):
    (tmp_path / "a.csv").write_text("1\n")
    with pytest.raises(ConfigError, match="csv, npy, png, tiff"):
        read_thermogram(tmp_path / "a.csv", format="jpeg")


def test_list_readers_and_candidates():
    assert list_readers() == ["csv", "npy", "png", "tiff"]
    for name in ("a.TIF", "b.tiff", "c.png", "d.csv", "e.txt", "f.npy"):
        assert is_candidate(name), name
    for name in ("survey.toml", "a.toml", "photo.jpg", "notes.md", "x"):
        assert not is_candidate(name), name


# ----------------------------------------------------------------------------- bad inputs


def test_missing_file():
    with pytest.raises(InputError, match="no such file"):
        read_thermogram("/nonexistent/dir/a.tif")


@pytest.mark.parametrize("suffix", [".tif", ".png", ".npy"])
def test_random_bytes_with_image_suffix(tmp_path, rng, suffix):
    path = tmp_path / f"noise{suffix}"
    path.write_bytes(rng.integers(0, 256, 2000, dtype=np.uint8).tobytes())
    with pytest.raises(InputError) as info:
        read_thermogram(path)
    assert str(path) in str(info.value)


@pytest.mark.parametrize("channels", [3, 4])
def test_rgb_png_is_not_radiometric(tmp_path, rng, channels):
    img = rng.integers(0, 255, (8, 8, channels), dtype=np.uint8)
    iio.imwrite(tmp_path / "photo.png", img)
    with pytest.raises(UnsupportedFormatError, match="not a radiometric thermogram") as info:
        read_thermogram(tmp_path / "photo.png")
    assert "colour picture" in str(info.value) and "export the temperature matrix" in str(info.value)


def test_rgb_tiff_and_npy_are_not_radiometric(tmp_path, rng):
    img = rng.integers(0, 255, (8, 8, 3), dtype=np.uint8)
    tifffile.imwrite(tmp_path / "photo.tif", img, photometric="rgb")
    np.save(tmp_path / "photo.npy", img)
    for name in ("photo.tif", "photo.npy"):
        with pytest.raises(UnsupportedFormatError, match="not a radiometric thermogram"):
            read_thermogram(tmp_path / name)


def test_jpeg_is_named(tmp_path, rng):
    img = rng.integers(0, 255, (8, 8, 3), dtype=np.uint8)
    iio.imwrite(tmp_path / "holiday.jpg", img)
    with pytest.raises(UnsupportedFormatError, match="JPEG"):
        read_thermogram(tmp_path / "holiday.jpg")


def _png_with_size(width: int, height: int) -> bytes:
    """A PNG header declaring a huge greyscale 16-bit image, with a valid CRC and a tiny IDAT."""
    ihdr = struct.pack(">IIBBBBB", width, height, 16, 0, 0, 0, 0)
    chunk = struct.pack(">I", 13) + b"IHDR" + ihdr + struct.pack(">I", zlib.crc32(b"IHDR" + ihdr) & 0xFFFFFFFF)
    idat = zlib.compress(b"\x00" * 10)
    idat_chunk = struct.pack(">I", len(idat)) + b"IDAT" + idat + struct.pack(">I", zlib.crc32(b"IDAT" + idat))
    return b"\x89PNG\r\n\x1a\n" + chunk + idat_chunk


def test_huge_declared_png_refused_without_decoding(tmp_path):
    path = tmp_path / "bomb.png"
    path.write_bytes(_png_with_size(100_000, 100_000))
    with pytest.raises(InputError, match="100000 x 100000"):
        read_thermogram(path)


def test_huge_declared_npy_refused(tmp_path):
    path = tmp_path / "bomb.npy"
    header = "{'descr': '<f8', 'fortran_order': False, 'shape': (100000, 100000), }"
    header = header + " " * (118 - len(header)) + "\n"
    path.write_bytes(b"\x93NUMPY\x01\x00" + struct.pack("<H", len(header)) + header.encode() + b"\0" * 64)
    with pytest.raises(InputError, match="pixel budget"):
        read_thermogram(path)


def test_npy_pickled_objects_refused(tmp_path):
    np.save(tmp_path / "obj.npy", np.array([[{"a": 1}, None]], dtype=object), allow_pickle=True)
    with pytest.raises(UnsupportedFormatError, match="pickled"):
        read_thermogram(tmp_path / "obj.npy")


def test_npy_wrong_dims(tmp_path):
    # complex and bool arrays: the reader contract (test_reader_contract.py)
    np.save(tmp_path / "v.npy", np.arange(10.0))
    np.save(tmp_path / "s.npy", np.zeros((2, 5, 5)))
    with pytest.raises(InputError, match="2-D matrix"):
        read_thermogram(tmp_path / "v.npy")
    with pytest.raises(InputError, match="2-D matrix"):
        read_thermogram(tmp_path / "s.npy")
    np.save(tmp_path / "c.npy", np.zeros((4, 4), dtype=complex))
    with pytest.raises(UnsupportedFormatError, match="integer or float"):  # the message names the need
        read_thermogram(tmp_path / "c.npy")


def test_folder_is_input_error(tmp_path):
    (tmp_path / "dir.tif").mkdir()
    with pytest.raises(InputError, match="folder"):
        read_thermogram(tmp_path / "dir.tif")


def test_all_errors_are_irseg_errors_for_garbage(tmp_path):
    path = tmp_path / "x.tif"
    path.write_bytes(b"II*\x00" + b"\xff" * 60)
    with pytest.raises(IrsegError):
        read_thermogram(path)


def test_hidden_files_are_not_candidates():
    # resource-fork copies such as "._wall.tif" are not thermograms (common practice: skip dot files)
    assert not is_candidate("._wall.tif")
    assert is_candidate("wall.tif")


def test_tiff_codec_not_installed_is_named(tmp_path, rng):
    # a TIFF whose Compression tag says LZW (5, TIFF 6.0 specification); tifffile needs imagecodecs for it
    path = tmp_path / "lzw.tif"
    tifffile.imwrite(path, rng.normal(0, 1, (8, 8)).astype(np.float32))
    with tifffile.TiffFile(path) as tif:
        offset = tif.pages[0].tags["Compression"].valueoffset
    blob = bytearray(path.read_bytes())
    struct.pack_into("<H", blob, offset, 5)
    path.write_bytes(bytes(blob))
    try:
        import imagecodecs  # noqa: F401
    except ImportError:
        with pytest.raises(UnsupportedFormatError, match="LZW needs the optional 'imagecodecs'"):
            read_thermogram(path)
    else:  # with the codec installed the data are not LZW streams: a corrupt-file error
        with pytest.raises(InputError):
            read_thermogram(path)


@pytest.mark.parametrize("compression", ["lzw", "zlib", "packbits"])
def test_compressed_tiff_round_trip(tmp_path, rng, compression):
    # compressed exports decode through imagecodecs (a dependency); reference writer: tifffile
    path = tmp_path / f"{compression}.tif"
    data = rng.integers(0, 60000, (24, 32)).astype(np.uint16)
    tifffile.imwrite(path, data, compression=compression)
    frame = read_thermogram(path)
    assert frame.data.dtype == np.uint16
    np.testing.assert_array_equal(frame.data, data)
