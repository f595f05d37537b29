"""Fuzz the thermogram readers with mutated and random inputs; count each outcome.

Every generated input must end either in a RawFrame ("ok") or in one of irseg's own
errors (an IrsegError subclass). Anything else is counted as "UNEXPECTED" and the first
few are printed with their traceback; the script then exits with status 1.

Inputs are mutations of small valid files written by the reference writers (tifffile,
imageio, numpy) and by irseg's own image writers (``irseg.io``, which make
the sample survey): truncation, bit flips, header corruption, inserted/deleted chunks,
random bytes (with and without the format's signature) and huge declared dimensions.

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
    return out


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
    return [s.encode() for s in (comma, semi, tab, ws, own)]


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


def _mutate(reader: str, seed: bytes, rng: np.random.Generator, huge: Callable) -> tuple[str, bytes]:
    kind = rng.choice(["truncate", "bitflip", "header", "chunk", "random", "huge", "splice", "seed"],
                      p=[0.2, 0.25, 0.15, 0.1, 0.1, 0.1, 0.05, 0.05])
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
    "tiff": (_tiff_seeds, _huge_tiff, (".tif", ".tiff")),
    "png": (_png_seeds, _huge_png, (".png",)),
    "npy": (_npy_seeds, _huge_npy, (".npy",)),
    "csv": (_csv_seeds, _huge_csv, (".csv", ".txt")),
}


def fuzz_reader(reader: str, n: int, rng: np.random.Generator, folder: str, budget_s: float | None):
    """Run ``n`` generated inputs through read_thermogram; return (counts, unexpected, elapsed)."""
    seeds_fn, huge, suffixes = READERS[reader]
    seeds = seeds_fn(rng)
    counts: collections.Counter[str] = collections.Counter()
    unexpected: list[tuple[str, str, bytes]] = []
    t0 = time.perf_counter()
    path = os.path.join(folder, f"input{suffixes[0]}")
    for k in range(n):
        if budget_s is not None and time.perf_counter() - t0 > budget_s:
            break
        kind, blob = _mutate(reader, seeds[int(rng.integers(0, len(seeds)))], rng, huge)
        suffix = suffixes[int(rng.integers(0, len(suffixes)))]
        path = os.path.join(folder, f"input_{k % 8}{suffix}")
        with open(path, "wb") as fh:
            fh.write(blob)
        try:
            frame = read_thermogram(path, max_pixels=MAX_PIXELS)
            if frame.data.ndim != 2 or frame.data.size == 0:
                raise AssertionError(f"reader returned shape {frame.data.shape}")
            counts["ok"] += 1
        except IrsegError as exc:
            counts[type(exc).__name__] += 1
        except Exception as exc:  # noqa: BLE001 - the point of the fuzzer
            counts["UNEXPECTED"] += 1
            if len(unexpected) < 5:
                unexpected.append((kind, "".join(traceback.format_exception(exc)), blob))
    return counts, unexpected, time.perf_counter() - t0


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
            counts, unexpected, elapsed = fuzz_reader(reader, args.n, rng, folder, args.time_budget)
            total = sum(counts.values())
            outcome = ", ".join(f"{k} {v}" for k, v in sorted(counts.items()))
            print(f"{reader:8s} {total:7d} {elapsed:8.1f}  {outcome}", flush=True)
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
