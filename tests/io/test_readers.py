"""Format-specific reading: detection, TIFF pages and codecs, PNG headers, NPY headers, bad inputs.

What every reader must do (round trips, empty, truncated, pixel budget, bad pixel types) is the
reader contract, test_reader_contract.py.
"""

from __future__ import annotations

import io
import os
import struct
import tracemalloc
import zlib
from pathlib import Path

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


# ----------------------------------------------------------------------------- crafted PNGs (issue 15)
# PNG layout from the PNG specification (W3C, 2nd edition, 2003): signature, chunks of length, type,
# data and CRC-32 over type + data (5.3); IHDR fields (11.2.2); image data = zlib stream of filtered
# rows, each row a filter-type byte then the packed samples, 16-bit samples big-endian (7.2); Adam7
# passes (8.2). The checksums are recomputed with zlib.crc32, so only the image data are wrong.

SAMPLES = Path(__file__).resolve().parents[2] / "sample_images"


def _chunk(ctype: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + ctype + data + struct.pack(">I", zlib.crc32(ctype + data) & 0xFFFFFFFF)


def _grey_png(width: int, height: int, depth: int, stream: bytes, *, interlace: int = 0) -> bytes:
    """A greyscale PNG with the given (already compressed) image data and valid checksums."""
    ihdr = struct.pack(">IIBBBBB", width, height, depth, 0, 0, 0, interlace)
    return b"\x89PNG\r\n\x1a\n" + _chunk(b"IHDR", ihdr) + _chunk(b"IDAT", stream) + _chunk(b"IEND", b"")


def _rows16(values: np.ndarray) -> bytes:
    """Filtered rows (filter type 0, none) of 16-bit big-endian samples."""
    return b"".join(b"\x00" + row.astype(">u2").tobytes() for row in values)


def test_crafted_png_helper_makes_a_readable_file(tmp_path, rng):
    # the crafting helper itself, checked against the reference decoder (imageio/pillow) and irseg's reader
    values = rng.integers(0, 65535, (10, 20), endpoint=True).astype(np.uint16)
    path = tmp_path / "whole.png"
    path.write_bytes(_grey_png(20, 10, 16, zlib.compress(_rows16(values))))
    np.testing.assert_array_equal(iio.imread(path), values)
    np.testing.assert_array_equal(read_thermogram(path).data, values)


@pytest.mark.parametrize(
    ("what", "rows_kept", "finish"),
    [("6 of 10 rows", 6.0, True), ("half a row missing", 9.5, True), ("first row only", 1.0, True),
     ("no end marker", 10.0, False)],
)
def test_png_whose_image_data_end_early_is_truncated(tmp_path, rng, what, rows_kept, finish):
    # issue 15 item 7: valid checksums, but the image data hold fewer rows than IHDR declares; a decoder
    # that fills the rest with zeros turns them into -50 °C with the usual scale and offset
    values = rng.integers(1000, 65535, (10, 20)).astype(np.uint16)
    rows = _rows16(values)
    kept = rows[: int(rows_kept * (1 + 2 * 20))]
    if finish:
        stream = zlib.compress(kept)
    else:  # every row, but the zlib stream stops before its end marker (a sync flush, no final block)
        comp = zlib.compressobj()
        stream = comp.compress(kept) + comp.flush(zlib.Z_SYNC_FLUSH)
    path = tmp_path / "short.png"
    path.write_bytes(_grey_png(20, 10, 16, stream))
    with pytest.raises(InputError, match="truncated PNG") as info:
        read_thermogram(path)
    assert str(path) in str(info.value), what


def test_png_short_interlaced_data_is_truncated(tmp_path):
    # Adam7 (PNG specification 8.2): a 9 x 9 16-bit image has 7 passes; drop the last pass's bytes
    width = height = 9
    passes = ((0, 0, 8, 8), (0, 4, 8, 8), (4, 0, 8, 4), (0, 2, 4, 4), (2, 0, 4, 2), (0, 1, 2, 2), (1, 0, 2, 1))
    values = (np.arange(81, dtype=np.uint16).reshape(9, 9) * 700).astype(np.uint16)
    parts = [_rows16(values[r0::dr, c0::dc]) for r0, c0, dr, dc in passes]
    full = tmp_path / "adam7.png"
    full.write_bytes(_grey_png(width, height, 16, zlib.compress(b"".join(parts)), interlace=1))
    np.testing.assert_array_equal(read_thermogram(full).data, values)  # the helper's passes are right
    cut = tmp_path / "adam7_cut.png"
    cut.write_bytes(_grey_png(width, height, 16, zlib.compress(b"".join(parts[:-1])), interlace=1))
    with pytest.raises(InputError, match="truncated PNG"):
        read_thermogram(cut)


def test_png_with_more_image_data_than_declared_is_corrupt(tmp_path, rng):
    values = rng.integers(0, 65535, (11, 20)).astype(np.uint16)
    path = tmp_path / "long.png"
    path.write_bytes(_grey_png(20, 10, 16, zlib.compress(_rows16(values))))  # 11 rows for a 10-row header
    with pytest.raises(InputError, match="more than the declared 20 x 10 pixels"):
        read_thermogram(path)


def test_png_chunk_checksum_is_checked(tmp_path, rng):
    values = rng.integers(0, 65535, (10, 20)).astype(np.uint16)
    blob = bytearray(_grey_png(20, 10, 16, zlib.compress(_rows16(values))))
    blob[45] ^= 0x01  # a byte inside the IDAT data (after the 33-byte signature + IHDR and the IDAT head)
    path = tmp_path / "flipped.png"
    path.write_bytes(bytes(blob))
    with pytest.raises(InputError, match="checksum mismatch"):
        read_thermogram(path)


@pytest.mark.parametrize("depth", [1, 2, 4, 8])
def test_low_depth_grey_png_is_refused_saying_what_to_export(tmp_path, depth):
    # issue 15 item 8: 1/2/4/8-bit grey (PNG specification 11.2.2 allows them) holds at most 256 shades
    width, height = 16, 4
    row = b"\x00" + bytes((width * depth + 7) // 8)
    path = tmp_path / f"grey{depth}.png"
    path.write_bytes(_grey_png(width, height, depth, zlib.compress(row * height)))
    with pytest.raises(UnsupportedFormatError) as info:
        read_thermogram(path)
    msg = str(info.value)
    assert str(path) in msg and f"{depth}-bit greyscale PNG" in msg
    assert "16-bit greyscale PNG with [camera] scale and offset" in msg and "TIFF, CSV or NPY" in msg


def test_pillow_grey_pictures_are_refused(tmp_path, rng):
    # a greyscale screenshot as a picture program saves it: 8-bit (mode "L") and 1-bit (mode "1"), pillow
    from PIL import Image

    Image.fromarray(rng.integers(0, 255, (12, 9), dtype=np.uint8)).save(tmp_path / "shot.png")
    Image.fromarray(rng.integers(0, 2, (12, 9)).astype(bool)).save(tmp_path / "bw.png")
    for name in ("shot.png", "bw.png"):
        with pytest.raises(UnsupportedFormatError, match="greyscale PNG, a picture rather than a radiometric"):
            read_thermogram(tmp_path / name)


def test_bundled_sample_pngs_still_read():
    # the sample survey's PNGs are 16-bit greyscale raw values (sample_images/README.md)
    pngs = sorted(SAMPLES.glob("*.png"))
    assert len(pngs) == 2
    for path in pngs:
        frame = read_thermogram(path)
        assert frame.data.dtype == np.uint16 and frame.data.shape == (240, 320)
        assert frame.metadata["bit_depth"] == 16


# ----------------------------------------------------------------------------- crafted TIFFs (issue 15)
# TIFF 6.0 specification: tiles (section 15: TileWidth 322, TileLength 323, TileOffsets 324,
# TileByteCounts 325; tile sizes multiples of 16, and a tile may extend beyond the image).


def _tiled_tiff(path: Path, *, tile: int, payload: bytes | None = None, byte_count: int | None = None) -> None:
    """A 16 x 16 float32 image in one 16 x 16 zlib tile (tifffile), its tags then rewritten in place."""
    buf = io.BytesIO()
    tifffile.imwrite(buf, np.full((16, 16), 20.0, np.float32), tile=(16, 16), compression="zlib")
    blob = bytearray(buf.getvalue())
    with tifffile.TiffFile(io.BytesIO(bytes(blob))) as tif:
        tags = {t: tif.pages[0].tags[t] for t in ("TileWidth", "TileLength", "TileOffsets", "TileByteCounts")}
        offset = tags["TileOffsets"].value[0]
        count = tags["TileByteCounts"].value[0]
    if payload is not None:
        offset, count = len(blob), len(payload)
        blob += payload
    values = {"TileWidth": tile, "TileLength": tile, "TileOffsets": offset,
              "TileByteCounts": count if byte_count is None else byte_count}
    for name, value in values.items():
        code = {3: "H", 4: "I", 16: "Q"}[int(tags[name].dtype)]
        struct.pack_into("<" + code, blob, tags[name].valueoffset, value)
    path.write_bytes(bytes(blob))


def _peak_bytes(func) -> tuple[BaseException | None, int]:
    """Run ``func``; return the exception it raised (or None) and the peak of traced Python memory."""
    tracemalloc.start()
    try:
        func()
    except BaseException as exc:  # noqa: BLE001 - returned to the test
        return exc, tracemalloc.get_traced_memory()[1]
    finally:
        peak = tracemalloc.get_traced_memory()[1]
        tracemalloc.stop()
    return None, peak


def test_tile_declared_far_larger_than_the_image_fails_before_decoding(tmp_path):
    # issue 15 item 14: a 16 x 16 image whose one tile is declared 4096 x 4096 and holds a zlib stream of
    # 64 MiB of zeros (64 KiB on disk); decoding allocates the declared tile before cropping it
    path = tmp_path / "tile_bomb.tif"
    _tiled_tiff(path, tile=4096, payload=zlib.compress(bytes(4096 * 4096 * 4), 9))
    assert path.stat().st_size < 200_000
    exc, peak = _peak_bytes(lambda: read_thermogram(path))
    assert isinstance(exc, InputError), exc
    assert str(path) in str(exc) and "tile of 4096 x 4096 pixels" in str(exc)
    assert peak < 50 * 2**20, f"peak {peak / 2**20:.0f} MiB"


def test_tile_byte_count_beyond_any_compression_fails(tmp_path):
    # a 16 x 16 float32 tile decodes to 1024 bytes; 2 MiB of stored bytes is no TIFF codec's output
    path = tmp_path / "counts.tif"
    _tiled_tiff(path, tile=16, payload=zlib.compress(bytes(2 << 20)) + bytes(2 << 20))
    with pytest.raises(InputError, match="stored bytes for 1024 decoded bytes") as info:
        read_thermogram(path)
    assert str(path) in str(info.value)


def test_tile_beyond_the_end_of_the_file_is_truncated(tmp_path):
    path = tmp_path / "cut_tile.tif"
    _tiled_tiff(path, tile=16, byte_count=900)  # the real tile is shorter; 900 bytes run past the end
    size = path.stat().st_size
    path.write_bytes(path.read_bytes()[: size - 40])
    with pytest.raises(InputError, match="truncated TIFF") as info:
        read_thermogram(path)
    assert str(path) in str(info.value)


def test_legal_tiles_larger_than_a_small_image_still_read(tmp_path, rng):
    # tiles extend beyond the image edge (TIFF 6.0 section 15): a 20 x 30 image in 256 x 256 tiles
    data = rng.normal(18.0, 2.0, (20, 30)).astype(np.float32)
    tifffile.imwrite(tmp_path / "big_tiles.tif", data, tile=(256, 256), compression="zlib")
    np.testing.assert_array_equal(read_thermogram(tmp_path / "big_tiles.tif").data, data)


def test_page_count_is_bounded(tmp_path, monkeypatch):
    from irseg.io import _tiff

    pages = np.stack([np.full((4, 5), float(k), np.float32) for k in range(5)])
    tifffile.imwrite(tmp_path / "seq.tif", pages)
    frame = read_thermogram(tmp_path / "seq.tif")
    assert frame.metadata["n_pages"] == 5 and np.all(frame.data == 0.0)
    monkeypatch.setattr(_tiff, "_TIFF_MAX_PAGES", 3)
    frame = read_thermogram(tmp_path / "seq.tif")
    assert frame.metadata["n_pages"] is None and frame.metadata["note"] == "first of more than 3 pages read"
