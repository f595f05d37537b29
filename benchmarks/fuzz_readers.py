"""Fuzz the thermogram readers with mutated and random inputs; count each outcome.

Every generated input must end either in a RawFrame ("ok") or in one of irseg's own
errors (an IrsegError subclass). Anything else is counted as "UNEXPECTED" and the first
few are printed with their traceback; the script then exits with status 1.

Inputs are mutations of small valid files written by the reference writers (tifffile,
imageio, numpy) and by irseg's own image writers (``irseg.io``, which make
the sample survey): truncation, bit flips, header corruption, inserted/deleted chunks,
random bytes (with and without the format's signature) and huge declared dimensions.
Structure-aware mutations keep the container valid so that the damage reaches the
decoder: for PNG the image data are inflated, mutated (rows cut, added, flipped, filter
bytes changed) and deflated again, the header fields are changed, and every chunk gets a
valid CRC; for TIFF (strips, tiles, several pages, compressed) the tags that size the
decode (tile and strip sizes and byte counts, offsets, image size, sample format,
compression) are rewritten in place.

Usage::

    python benchmarks/fuzz_readers.py                   # 10 000 inputs per reader
    python benchmarks/fuzz_readers.py --n 500 --time-budget 20
"""

from __future__ import annotations

import argparse
import collections
import io
import logging
import os
import resource
import struct
import sys
import tempfile
import time
import traceback
import zlib
from collections.abc import Callable

import numpy as np

from irseg.errors import IrsegError
from irseg.io import read_thermogram
from irseg.io import csv_matrix_text, npy_bytes, png16_bytes, quantise_u16, tiff_bytes

MAX_PIXELS = 4_000_000


# ----------------------------------------------------------------------------- seeds


def _tiff_seeds(rng: np.random.Generator) -> list[bytes]:
    import tifffile

    out = []
    base = rng.normal(18.0, 2.0, (16, 20))
    for kwargs, arr in [
        ({}, base.astype(np.float32)),
        ({}, (base * 100).astype(np.uint16)),
        ({"compression": "zlib"}, base.astype(np.float64)),
        ({"byteorder": ">"}, base.astype(np.float32)),
        ({"tile": (16, 16)}, np.tile(base, (2, 2)).astype(np.float32)),
        ({"tile": (16, 16), "compression": "zlib"}, base.astype(np.float32)),  # tiles beyond the image edge
        ({"tile": (32, 16), "compression": "zlib", "predictor": True}, (base * 100).astype(np.uint16)),
        ({"tile": (256, 256), "compression": "zlib"}, base.astype(np.float32)),
        ({"compression": "zlib", "rowsperstrip": 3}, base.astype(np.float32)),
        ({"compression": "lzw"}, (base * 100).astype(np.uint16)),
        ({"tile": (16, 16), "photometric": "minisblack"},
         np.stack([base, base + 1, base + 2]).astype(np.float32)),  # tiled, three pages
        ({"bigtiff": True}, (base * 10).astype(np.int16)),
        ({}, np.stack([base, base]).astype(np.float32)),
        ({"photometric": "rgb"}, rng.integers(0, 255, (8, 8, 3), dtype=np.uint8)),
    ]:
        buf = io.BytesIO()
        tifffile.imwrite(buf, arr, **kwargs)
        out.append(buf.getvalue())
    # irseg's own writers, as the sample survey uses them (float32 °C, uint16 counts)
    out.append(tiff_bytes(base.astype(np.float32)))
    out.append(tiff_bytes(quantise_u16(base, scale=0.01, offset=-50.0)))
    return out


def _png_seeds(rng: np.random.Generator) -> list[bytes]:
    import imageio.v3 as iio

    arrs = [
        rng.integers(0, 65535, (16, 20), dtype=np.uint16),
        rng.integers(0, 255, (12, 9), dtype=np.uint8),
        rng.integers(0, 255, (8, 8, 3), dtype=np.uint8),
        rng.integers(0, 255, (8, 8, 4), dtype=np.uint8),
    ]
    out = [iio.imwrite("<bytes>", a, extension=".png") for a in arrs]
    out.append(png16_bytes(quantise_u16(rng.normal(18.0, 2.0, (16, 20)), scale=0.01, offset=-50.0)))  # irseg's
    values = rng.integers(0, 65535, (11, 13), dtype=np.uint16)
    out.append(_png_build(13, 11, 16, 0, _png_filtered(values, interlace=True), interlace=1))  # Adam7
    out.append(_png_build(13, 11, 16, 0, _png_filtered(values, interlace=False), n_idat=3))  # split image data
    return out


# ----------------------------------------------------------------------------- PNG structure
# PNG specification (W3C, 2nd edition): chunks (5.3), IHDR (11.2.2), filtered rows (7.2), Adam7 (8.2).

_ADAM7 = ((0, 0, 8, 8), (0, 4, 8, 8), (4, 0, 8, 4), (0, 2, 4, 4), (2, 0, 4, 2), (0, 1, 2, 2), (1, 0, 2, 1))


def _png_chunk(ctype: bytes, data: bytes) -> bytes:
    return struct.pack(">I", len(data)) + ctype + data + struct.pack(">I", zlib.crc32(ctype + data) & 0xFFFFFFFF)


def _png_filtered(values: np.ndarray, *, interlace: bool) -> bytes:
    """Rows of 16-bit grey samples with filter type 0 (none), in Adam7 pass order when interlaced."""
    grids = [values[r0::dr, c0::dc] for r0, c0, dr, dc in _ADAM7] if interlace else [values]
    return b"".join(b"\x00" + row.astype(">u2").tobytes() for g in grids if g.size for row in g)


def _png_build(width: int, height: int, depth: int, colour: int, raw: bytes, *, interlace: int = 0,
               n_idat: int = 1, level: int = 6, finish: bool = True, extra: bytes = b"") -> bytes:
    """A PNG with valid CRCs around ``raw`` (filtered rows), deflated and split into ``n_idat`` chunks."""
    comp = zlib.compressobj(level)
    stream = comp.compress(raw) + comp.flush(zlib.Z_FINISH if finish else zlib.Z_SYNC_FLUSH)
    step = max(1, -(-len(stream) // max(1, n_idat)))
    idat = b"".join(_png_chunk(b"IDAT", stream[i : i + step]) for i in range(0, max(len(stream), 1), step))
    ihdr = struct.pack(">IIBBBBB", width, height, depth, colour, 0, 0, interlace)
    return b"\x89PNG\r\n\x1a\n" + _png_chunk(b"IHDR", ihdr) + extra + idat + _png_chunk(b"IEND", b"")


def _png_parse(blob: bytes) -> tuple[tuple[int, ...], bytes] | None:
    """(IHDR fields, inflated image data) of a well-formed PNG, or None."""
    pos, ihdr, idat = 8, None, b""
    while pos + 12 <= len(blob):
        length, ctype = struct.unpack(">I4s", blob[pos : pos + 8])
        data = blob[pos + 8 : pos + 8 + length]
        if ctype == b"IHDR" and length == 13:
            ihdr = struct.unpack(">IIBBBBB", data)
        elif ctype == b"IDAT":
            idat += data
        elif ctype == b"IEND":
            break
        pos += 12 + length
    if ihdr is None:
        return None
    try:
        return ihdr, zlib.decompress(idat)
    except zlib.error:
        return None


def _png_struct(seed: bytes, rng: np.random.Generator) -> bytes:
    """Inflate the image data, mutate them or the header, deflate again; every CRC valid."""
    parsed = _png_parse(seed)
    if parsed is None:
        return seed
    (width, height, depth, colour, _, _, interlace), raw = parsed
    data = bytearray(raw)
    row = 1 + (width * depth * {0: 1, 2: 3, 3: 1, 4: 2, 6: 4}.get(colour, 1) + 7) // 8
    what = rng.choice(["cut_rows", "cut_bytes", "add_rows", "flip", "filters", "ihdr", "empty", "unfinished",
                       "ancillary", "duplicate"])
    if what == "cut_rows" and height > 1:
        data = data[: row * int(rng.integers(0, height))]
    elif what == "cut_bytes" and data:
        del data[int(rng.integers(0, len(data))) :]
    elif what == "add_rows":
        data += rng.integers(0, 256, row * int(rng.integers(1, 4)), dtype=np.uint8).tobytes()
    elif what == "flip" and data:
        for _ in range(int(rng.integers(1, 16))):
            data[int(rng.integers(0, len(data)))] ^= 1 << int(rng.integers(0, 8))
    elif what == "filters" and data:
        for r in range(0, len(data), row):
            if rng.random() < 0.5:
                data[r] = int(rng.integers(0, 8))  # 0-4 are the defined filter types, 5-7 invalid
    elif what == "ihdr":
        field = rng.choice(["width", "height", "depth", "colour", "interlace"])
        if field == "width":
            width = int(rng.choice([1, width - 1, width + 1, 2 * width, 2**31 - 1]))
        elif field == "height":
            height = int(rng.choice([1, height - 1, height + 1, 2 * height, 2**31 - 1]))
        elif field == "depth":
            depth = int(rng.choice([1, 2, 4, 8, 16, 3, 32]))
        elif field == "colour":
            colour = int(rng.choice([0, 2, 3, 4, 6, 5]))
        else:
            interlace = 1 - interlace if rng.random() < 0.8 else 2
        width, height = max(width, 0), max(height, 0)
    elif what == "empty":
        data = bytearray()
    elif what == "duplicate" and data:
        i = int(rng.integers(0, len(data)))
        data[i:i] = data[i : i + row]
    extra = b""
    if what == "ancillary":
        extra = _png_chunk(b"tEXt", b"Comment\x00" + bytes(int(rng.integers(0, 2000))))
        if rng.random() < 0.5:  # a chunk whose length field runs past the end of the file
            extra += struct.pack(">I", 2**31 - 1) + b"zTXt" + b"\x00" * 8
    return _png_build(width, height, depth, colour, bytes(data), interlace=interlace,
                      n_idat=int(rng.integers(1, 5)), level=int(rng.integers(0, 10)),
                      finish=what != "unfinished", extra=extra)


def _npy_seeds(rng: np.random.Generator) -> list[bytes]:
    out = []
    for arr, version in [
        (rng.normal(0, 1, (16, 20)).astype(np.float32), None),
        (np.asfortranarray(rng.integers(-500, 500, (9, 7)).astype(np.int16)), None),
        (rng.normal(0, 1, (5, 6)).astype(">f8"), (2, 0)),
        (rng.normal(0, 1, (4, 4, 3)), None),
    ]:
        buf = io.BytesIO()
        np.lib.format.write_array(buf, arr, version=version, allow_pickle=False)
        out.append(buf.getvalue())
    out.append(npy_bytes(rng.normal(18.0, 2.0, (16, 20)).astype(np.float32)))  # irseg's own writer
    return out


def _csv_seeds(rng: np.random.Generator) -> list[bytes]:
    m = np.round(rng.normal(15, 3, (8, 6)), 2)
    comma = "\n".join(",".join(f"{v:.2f}" for v in r) for r in m)
    semi = "Export\nx;y\n" + "\n".join(";".join(f"{v:.2f}".replace(".", ",") for v in r) for r in m)
    tab = "\r\n".join("\t".join(f"{v:g}" for v in r) for r in m)
    ws = "# title\n" + "\n".join("  ".join(f"{int(v * 10)}" for v in r) for r in m)
    own = csv_matrix_text(m, delimiter=";", decimal=",")  # irseg's own writer, decimal comma
    out = [s.encode() for s in (comma, semi, tab, ws, own)]
    # a spreadsheet's "Unicode text" (UTF-16 with a byte-order mark) and UTF-8 with a mark
    out += [tab.encode("utf-16"), b"\xef\xbb\xbf" + semi.encode()]
    return out


# ----------------------------------------------------------------------------- huge dimensions


def _huge_tiff(seed: bytes, rng: np.random.Generator) -> bytes:
    import tifffile

    blob = bytearray(seed)
    with tifffile.TiffFile(io.BytesIO(seed)) as tif:
        page = tif.pages[0]
        order = tif.byteorder
        for tag_name in ("ImageWidth", "ImageLength"):
            tag = page.tags.get(tag_name)
            if tag is None:
                continue
            code = {3: "H", 4: "I", 16: "Q"}.get(int(tag.dtype), "I")
            big = {"H": 65535, "I": int(rng.integers(100_000, 2**32 - 1)), "Q": 2**40}[code]
            struct.pack_into(order + code, blob, tag.valueoffset, big)
    return bytes(blob)


#: TIFF tags that size the decode (TIFF 6.0 specification): image size, strips, tiles, samples, codec.
_TIFF_SIZING_TAGS = ("ImageWidth", "ImageLength", "RowsPerStrip", "StripByteCounts", "StripOffsets", "TileWidth",
                     "TileLength", "TileByteCounts", "TileOffsets", "BitsPerSample", "SampleFormat", "Compression",
                     "SamplesPerPixel", "Predictor", "PlanarConfiguration")


def _tiff_struct(seed: bytes, rng: np.random.Generator) -> bytes:
    """Rewrite one or more of the tags that size the decode, in place (the container stays valid)."""
    import tifffile

    blob = bytearray(seed)
    try:
        with tifffile.TiffFile(io.BytesIO(seed)) as tif:
            page = tif.pages[0]
            order = tif.byteorder
            tags = [page.tags[t] for t in _TIFF_SIZING_TAGS if t in page.tags]
            size = len(seed)
            for tag in rng.choice(tags, size=min(len(tags), int(rng.integers(1, 4))), replace=False):
                code = {3: "H", 4: "I", 16: "Q", 8: "h", 9: "i"}.get(int(tag.dtype))
                if code is None:
                    continue
                limit = {"H": 65535, "h": 32767, "I": 2**32 - 1, "i": 2**31 - 1, "Q": 2**40}[code]
                item = struct.calcsize(code)
                value = int(rng.choice([0, 1, 16, 4096, 65535, size, size + 1, 2 * size, limit,
                                        int(rng.integers(0, 1 << 20))]))
                value = min(value, limit)
                # every value of the tag (offsets/counts of all strips or tiles), or one of them
                count = tag.count if rng.random() < 0.5 else 1
                start = tag.valueoffset
                for k in range(count):
                    if start + (k + 1) * item <= len(blob):
                        struct.pack_into(order + code, blob, start + k * item, value)
    except Exception:  # noqa: BLE001 - a seed tifffile cannot parse: mutate nothing
        return seed
    return bytes(blob)


def _huge_png(seed: bytes, rng: np.random.Generator) -> bytes:
    w, h = (int(x) for x in rng.integers(10_000, 2**31 - 1, 2))
    ihdr = struct.pack(">II", w, h) + seed[24:29]
    crc = struct.pack(">I", zlib.crc32(b"IHDR" + ihdr) & 0xFFFFFFFF)
    return seed[:16] + ihdr + crc + seed[33:]


def _huge_npy(seed: bytes, rng: np.random.Generator) -> bytes:
    major = seed[6]
    hlen_size = 2 if major == 1 else 4
    hlen = int.from_bytes(seed[8 : 8 + hlen_size], "little")
    header = seed[8 + hlen_size : 8 + hlen_size + hlen].decode("latin-1")
    start, end = header.index("'shape': (") + 10, header.index(")", header.index("'shape'"))
    dims = ", ".join(str(int(d)) for d in rng.integers(10_000, 10**9, 2))
    new = (header[:start] + dims + header[end:]).rstrip("\n ")
    new = new + " " * (hlen - 1 - len(new)) + "\n" if len(new) < hlen else new
    if len(new) != hlen:
        return seed
    return seed[: 8 + hlen_size] + new.encode("latin-1") + seed[8 + hlen_size + hlen :]


def _huge_csv(seed: bytes, rng: np.random.Generator) -> bytes:
    cols = int(rng.integers(3000, 20000))
    rows = int(rng.integers(300, 2000))
    line = ";".join(["1"] * cols)
    return ("\n".join([line] * 3) + "\n" * rows).encode() + b"1\n" * rows


# ----------------------------------------------------------------------------- mutations

MAGIC = {"tiff": b"II*\x00", "png": b"\x89PNG\r\n\x1a\n", "npy": b"\x93NUMPY", "csv": b""}


def _mutate(reader: str, seed: bytes, rng: np.random.Generator, huge: Callable,
            struct_fn: Callable | None = None) -> tuple[str, bytes]:
    kinds = ["truncate", "bitflip", "header", "chunk", "random", "huge", "splice", "seed"]
    p = [0.2, 0.25, 0.15, 0.1, 0.1, 0.1, 0.05, 0.05]
    if struct_fn is not None:  # structure-aware mutations: a third of the inputs
        kinds.append("struct")
        p = [x * 2 / 3 for x in p] + [1 / 3]
    kind = rng.choice(kinds, p=p)
    if kind == "struct":
        return kind, struct_fn(seed, rng)
    b = bytearray(seed)
    if kind == "truncate":
        return kind, bytes(b[: int(rng.integers(0, len(b)))])
    if kind == "bitflip":
        for _ in range(int(rng.integers(1, 9))):
            i = int(rng.integers(0, len(b)))
            b[i] ^= 1 << int(rng.integers(0, 8))
        return kind, bytes(b)
    if kind == "header":
        n = min(len(b), 96)
        for _ in range(int(rng.integers(1, 6))):
            i = int(rng.integers(0, n))
            b[i] = int(rng.integers(0, 256))
        return kind, bytes(b)
    if kind == "chunk":
        i = int(rng.integers(0, len(b)))
        j = min(len(b), i + int(rng.integers(1, 64)))
        if rng.random() < 0.5:
            del b[i:j]
        else:
            b[i:i] = rng.integers(0, 256, j - i, dtype=np.uint8).tobytes()
        return kind, bytes(b)
    if kind == "random":
        body = rng.integers(0, 256, int(rng.integers(0, 4096)), dtype=np.uint8).tobytes()
        return kind, (MAGIC[reader] + body) if rng.random() < 0.5 else body
    if kind == "huge":
        try:
            return kind, huge(seed, rng)
        except Exception:  # noqa: BLE001 - a seed without the tags: fall back to the seed itself
            return kind, seed
    if kind == "splice":
        i = int(rng.integers(0, len(b)))
        return kind, bytes(b[:i] + b[: len(b) - i])
    return kind, seed


READERS = {
    "tiff": (_tiff_seeds, _huge_tiff, (".tif", ".tiff"), _tiff_struct),
    "png": (_png_seeds, _huge_png, (".png",), _png_struct),
    "npy": (_npy_seeds, _huge_npy, (".npy",), None),
    "csv": (_csv_seeds, _huge_csv, (".csv", ".txt"), None),
}


def fuzz_reader(reader: str, n: int, rng: np.random.Generator, folder: str, budget_s: float | None):
    """Run ``n`` generated inputs through read_thermogram.

    Returns ``(counts, struct_counts, unexpected, elapsed)``: outcome counts of all inputs and of the
    structure-aware mutations alone.
    """
    seeds_fn, huge, suffixes, struct_fn = READERS[reader]
    seeds = seeds_fn(rng)
    counts: collections.Counter[str] = collections.Counter()
    struct_counts: collections.Counter[str] = collections.Counter()
    unexpected: list[tuple[str, str, bytes]] = []
    t0 = time.perf_counter()
    path = os.path.join(folder, f"input{suffixes[0]}")
    for k in range(n):
        if budget_s is not None and time.perf_counter() - t0 > budget_s:
            break
        kind, blob = _mutate(reader, seeds[int(rng.integers(0, len(seeds)))], rng, huge, struct_fn)
        suffix = suffixes[int(rng.integers(0, len(suffixes)))]
        path = os.path.join(folder, f"input_{k % 8}{suffix}")
        with open(path, "wb") as fh:
            fh.write(blob)
        try:
            frame = read_thermogram(path, max_pixels=MAX_PIXELS)
            if frame.data.ndim != 2 or frame.data.size == 0:
                raise AssertionError(f"reader returned shape {frame.data.shape}")
            outcome = "ok"
        except IrsegError as exc:
            outcome = type(exc).__name__
        except Exception as exc:  # noqa: BLE001 - the point of the fuzzer
            outcome = "UNEXPECTED"
            if len(unexpected) < 5:
                unexpected.append((kind, "".join(traceback.format_exception(exc)), blob))
        counts[outcome] += 1
        if kind == "struct":
            struct_counts[outcome] += 1
    return counts, struct_counts, unexpected, time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10_000, help="inputs per reader (default 10000)")
    parser.add_argument("--time-budget", type=float, default=None, help="seconds per reader (default: none)")
    parser.add_argument("--seed", type=int, default=20261201)
    parser.add_argument("--readers", default=",".join(READERS), help="comma-separated subset")
    parser.add_argument("--save-failures", default=None, help="folder to write unexpected inputs to")
    args = parser.parse_args(argv)
    logging.getLogger("tifffile").setLevel(logging.CRITICAL)  # corrupt files make tifffile log a lot
    rng = np.random.default_rng(args.seed)
    total_unexpected = 0
    print(f"{'reader':8s} {'inputs':>7s} {'seconds':>8s}  outcomes")
    with tempfile.TemporaryDirectory(prefix="irseg-fuzz-") as folder:
        for reader in args.readers.split(","):
            counts, struct_counts, unexpected, elapsed = fuzz_reader(reader, args.n, rng, folder, args.time_budget)
            total = sum(counts.values())
            outcome = ", ".join(f"{k} {v}" for k, v in sorted(counts.items()))
            rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
            print(f"{reader:8s} {total:7d} {elapsed:8.1f}  {outcome}  (peak RSS so far {rss_mb:.0f} MB)", flush=True)
            if struct_counts:
                detail = ", ".join(f"{k} {v}" for k, v in sorted(struct_counts.items()))
                print(f"{'':8s} {sum(struct_counts.values()):7d} {'':8s}  of which structure-aware: {detail}")
            total_unexpected += counts["UNEXPECTED"]
            for i, (kind, tb, blob) in enumerate(unexpected):
                print(f"--- unexpected #{i + 1} ({reader}, mutation {kind}, {len(blob)} bytes)\n{tb}", file=sys.stderr)
                if args.save_failures:
                    os.makedirs(args.save_failures, exist_ok=True)
                    with open(os.path.join(args.save_failures, f"{reader}_{i}.bin"), "wb") as fh:
                        fh.write(blob)
    print(f"unexpected exceptions: {total_unexpected}")
    return 1 if total_unexpected else 0


if __name__ == "__main__":
    sys.exit(main())
