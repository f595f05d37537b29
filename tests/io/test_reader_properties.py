"""Property-based checks: whatever the bytes, readers and the metadata parser raise only irseg errors."""

from __future__ import annotations

import io
import json
import math

import numpy as np
import pytest
import tifffile
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from irseg.errors import IrsegError, MetadataError
from irseg.io import read_thermogram
from irseg.metadata import check_overrides, parse_metadata_text

SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
SUFFIXES = [".tif", ".tiff", ".png", ".npy", ".csv", ".txt", ".dat", ""]
MAGIC = {".tif": b"II*\x00", ".png": b"\x89PNG\r\n\x1a\n", ".npy": b"\x93NUMPY\x01\x00", ".csv": b""}


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


def _seeds() -> dict[str, bytes]:
    rng = np.random.default_rng(7)
    arr = rng.normal(20, 2, (6, 7)).astype(np.float32)
    tif = io.BytesIO()
    tifffile.imwrite(tif, arr)
    npy = io.BytesIO()
    np.save(npy, arr)
    import imageio.v3 as iio

    png = iio.imwrite("<bytes>", (arr * 100).astype(np.uint16), extension=".png")
    csv = "\n".join(";".join(f"{v:.2f}".replace(".", ",") for v in r) for r in arr).encode()
    return {".tif": tif.getvalue(), ".npy": npy.getvalue(), ".png": png, ".csv": csv}


SEEDS = _seeds()


def _check(path, **kw):
    """Read; the only allowed outcomes are a 2-D RawFrame or an IrsegError naming the file."""
    try:
        frame = read_thermogram(path, max_pixels=1_000_000, **kw)
    except IrsegError as exc:
        assert str(path) in str(exc), str(exc)
        return None
    assert frame.data.ndim == 2 and frame.data.size > 0
    return frame


@SETTINGS
@given(blob=st.binary(max_size=2048), suffix=st.sampled_from(SUFFIXES))
def test_arbitrary_bytes_any_suffix(folder, blob, suffix):
    path = folder / f"blob{suffix}"
    path.write_bytes(blob)
    _check(path)


@SETTINGS
@given(body=st.binary(max_size=1024), suffix=st.sampled_from(sorted(MAGIC)))
def test_signature_then_garbage(folder, body, suffix):
    path = folder / f"magic{suffix}"
    path.write_bytes(MAGIC[suffix] + body)
    _check(path)


@SETTINGS
@given(
    suffix=st.sampled_from(sorted(SEEDS)),
    cut=st.floats(0.0, 1.0),
    flips=st.lists(st.tuples(st.floats(0.0, 1.0, exclude_max=True), st.integers(0, 7)), max_size=8),
)
def test_mutated_valid_files(folder, suffix, cut, flips):
    blob = bytearray(SEEDS[suffix])
    for where, bit in flips:
        blob[int(where * len(blob))] ^= 1 << bit
    blob = bytes(blob[: max(0, int(math.ceil(cut * len(blob))))])
    path = folder / f"mut{suffix}"
    path.write_bytes(blob)
    _check(path)


@SETTINGS
@given(text=st.text(alphabet=st.sampled_from(list("0123456789.,;\t -+eEnaif\r\nxyz#")), max_size=400))
def test_arbitrary_text_matrix(folder, text):
    path = folder / "text.csv"
    path.write_text(text, encoding="utf-8", newline="")
    frame = _check(path)
    if frame is not None:
        assert frame.data.dtype in (np.float64, np.int64)


@SETTINGS
@given(
    rows=st.integers(1, 6).flatmap(
        lambda n: st.lists(
            st.lists(st.floats(-1e6, 1e6, allow_nan=False, width=64), min_size=n, max_size=n), min_size=1, max_size=6
        )
    ),
    layout=st.sampled_from([(";", ","), (";", "."), ("\t", "."), ("\t", ","), (",", "."), (" ", ".")]),
)
def test_csv_round_trip_any_layout(folder, rows, layout):
    delim, decimal = layout
    data = np.array(rows, dtype=np.float64)
    if decimal == "," and data.shape[1] == 1:
        # documented ambiguity: a lone "12,5" per line reads as two comma-separated integers
        data = np.hstack([data, data])
    text = "\n".join(delim.join(repr(float(v)).replace(".", decimal) for v in r) for r in data)
    path = folder / "round.csv"
    path.write_text("exported matrix\n" + text + "\n", encoding="utf-8")
    frame = read_thermogram(path)
    np.testing.assert_array_equal(frame.data.astype(np.float64), data)


# ----------------------------------------------------------------------------- metadata parser

KEYS = {
    "camera": ["hfov_deg", "distance_m", "units", "band_um", "scale", "export_emissivity", "tilt_deg"],
    "surface": ["emissivity", "reflected_c", "view", "heat_flow"],
    "air": ["inside_c", "outside_c", "wind_m_s"],
    "analysis": ["seed", "frsi_limit", "degree_days"],
    "segment": ["noise_k", "min_feature_px"],
}
SCALARS = st.one_of(
    st.booleans(),
    st.integers(-(2**70), 2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=12),
    st.lists(st.one_of(st.integers(-50, 50), st.floats(-50, 50), st.text(max_size=3)), max_size=3),
)


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return "nan" if math.isnan(v) else ("inf" if v == math.inf else "-inf" if v == -math.inf else repr(v))
    if isinstance(v, str):
        return json.dumps(v)
    return "[" + ", ".join(_toml_value(x) for x in v) + "]"


@SETTINGS
@given(text=st.text(max_size=300))
def test_arbitrary_text_metadata(text):
    try:
        parse_metadata_text(text, source="survey.toml")
    except MetadataError as exc:
        assert str(exc).startswith("survey.toml: ")


@SETTINGS
@given(
    tree=st.dictionaries(
        st.one_of(st.sampled_from(sorted(KEYS)), st.text(alphabet="abcdefghijklmnopqrstuvwxyz_", min_size=1, max_size=8)),
        st.dictionaries(
            st.one_of(st.sampled_from(sorted(k for ks in KEYS.values() for k in ks)),
                      st.text(alphabet="abcdefghijklmnopqrstuvwxyz_", min_size=1, max_size=8)),
            SCALARS,
            max_size=4,
        ),
        max_size=4,
    )
)
def test_structured_toml_metadata(tree):
    text = "\n".join(
        f"[{sec}]\n" + "\n".join(f"{key} = {_toml_value(val)}" for key, val in table.items())
        for sec, table in tree.items()
    )
    try:
        parsed = parse_metadata_text(text, source="s.toml")
    except MetadataError as exc:
        assert str(exc).startswith("s.toml: ")
        return
    # accepted values are converted and in range
    surface = parsed.get("surface", {})
    if "emissivity" in surface:
        assert 0 < surface["emissivity"] <= 1


@SETTINGS
@given(value=st.one_of(SCALARS, st.none(), st.dictionaries(st.text(max_size=3), st.integers(), max_size=2)))
def test_overrides_any_value(value):
    for sec, keys in KEYS.items():
        try:
            check_overrides({sec: {keys[0]: value}})
        except MetadataError as exc:
            assert str(exc).startswith("command line: ")


@SETTINGS
@given(blob=st.binary(max_size=1024), fmt=st.sampled_from(["csv", "npy", "png", "tiff"]))
def test_forced_reader_on_arbitrary_bytes(folder, blob, fmt):
    # format= bypasses detection: each reader alone must still refuse garbage with its own errors
    path = folder / "forced.bin"
    path.write_bytes(blob)
    _check(path, format=fmt)
