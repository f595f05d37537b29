"""Text matrices: delimiters, decimal comma, headers, and errors that name line and column."""

from __future__ import annotations

import numpy as np
import pytest

from irseg.errors import InputError, UnsupportedFormatError
from irseg.io import read_thermogram

EXPECTED = np.array([[12.5, 13.0, -1.25], [14.75, 15.0, 2.0]])


def _read(tmp_path, text: str, name: str = "m.csv", **kw):
    path = tmp_path / name
    path.write_text(text, encoding="utf-8", newline="")
    return read_thermogram(path, **kw)


@pytest.mark.parametrize(
    ("text", "delim", "decimal"),
    [
        ("12.5,13.0,-1.25\n14.75,15,2\n", "comma", "."),
        ("12.5, 13.0, -1.25\n14.75, 15, 2\n", "comma", "."),
        ("12,5;13,0;-1,25\n14,75;15;2\n", "semicolon", ","),
        ("12.5;13.0;-1.25\n14.75;15;2\n", "semicolon", "."),
        ("12.5\t13.0\t-1.25\n14.75\t15\t2\n", "tab", "."),
        ("12,5\t13,0\t-1,25\n14,75\t15\t2\n", "tab", ","),
        ("12.5  13.0   -1.25\n 14.75 15 2\n", "whitespace", "."),
        ("12,5 13,0 -1,25\n14,75 15 2\n", "whitespace", ","),
        ("12.5;13.0;-1.25;\r\n14.75;15;2;\r\n", "semicolon", "."),  # trailing delimiter, CRLF
    ],
)
def test_delimiters_and_decimal_marks(tmp_path, text, delim, decimal):
    frame = _read(tmp_path, text)
    np.testing.assert_array_equal(frame.data, EXPECTED)
    assert frame.metadata["delimiter"] == delim and frame.metadata["decimal"] == decimal


def test_header_lines_skipped(tmp_path):
    text = "Survey export\nUnits: degC; emissivity 0,95\n\nx;y;z\n12,5;13,0;-1,25\n14,75;15;2\n\n\n"
    frame = _read(tmp_path, text, name="m.txt")
    np.testing.assert_array_equal(frame.data, EXPECTED)
    assert frame.metadata["header_lines"] == 4


def test_scientific_nan_and_integers(tmp_path):
    frame = _read(tmp_path, "1e1,-2.5E-1,nan\nInf,+3,.5\n")
    assert frame.data[0, 0] == 10.0 and frame.data[0, 1] == -0.25 and np.isnan(frame.data[0, 2])
    assert np.isinf(frame.data[1, 0]) and frame.data[1, 2] == 0.5
    ints = _read(tmp_path, "1 2 3\n4 5 6\n", name="i.txt")
    assert ints.data.dtype == np.int64
    np.testing.assert_array_equal(ints.data, [[1, 2, 3], [4, 5, 6]])


def test_utf8_bom_and_latin1_header(tmp_path):
    (tmp_path / "b.csv").write_bytes("\ufeff1;2\n3;4\n".encode())
    np.testing.assert_array_equal(read_thermogram(tmp_path / "b.csv").data, [[1, 2], [3, 4]])
    (tmp_path / "l.csv").write_bytes("Temp \xb0C\n1;2\n3;4\n".encode("latin-1"))
    np.testing.assert_array_equal(read_thermogram(tmp_path / "l.csv").data, [[1, 2], [3, 4]])


def test_ragged_row_names_line(tmp_path):
    with pytest.raises(InputError, match=r"line 4 has 2 values but line 2 \(the first row\) has 3") as info:
        _read(tmp_path, "header\n1;2;3\n4;5;6\n7;8\n")
    assert "m.csv" in str(info.value)


def test_non_numeric_cell_names_line_and_column(tmp_path):
    with pytest.raises(InputError, match=r"line 3, column 2: 'abc' is not a number"):
        _read(tmp_path, "1;2;3\n4;5;6\n7;abc;9\n")


def test_empty_cell_named(tmp_path):
    with pytest.raises(InputError, match=r"line 2, column 2: an empty cell"):
        _read(tmp_path, "1,2,3\n4,,6\n")


def test_thousands_separator_is_not_a_number(tmp_path):
    with pytest.raises(InputError, match="line 2, column 1"):
        _read(tmp_path, "1,5;2,5\n1.234,5;3,0\n")


def test_blank_line_inside_matrix(tmp_path):
    with pytest.raises(InputError, match="line 3 is blank inside the matrix"):
        _read(tmp_path, "1 2\n3 4\n\n5 6\n", name="m.txt")


def test_no_numbers_at_all(tmp_path):
    with pytest.raises(InputError, match="no numeric row"):
        _read(tmp_path, "just some notes\nabout the survey\n", name="notes.txt")


def test_only_blank_lines(tmp_path):
    with pytest.raises(InputError, match="only blank lines"):
        _read(tmp_path, "\n\n   \n")


def test_binary_content_refused(tmp_path):
    (tmp_path / "bin.csv").write_bytes(b"1,2\x00\x01\x02")
    with pytest.raises(UnsupportedFormatError, match="binary"):
        read_thermogram(tmp_path / "bin.csv")


def test_budget_from_line_count(tmp_path):
    rows = "\n".join(";".join(["1"] * 50) for _ in range(50))
    with pytest.raises(InputError, match="50 x 50 = 2500 pixels exceeds the pixel budget of 2000"):
        _read(tmp_path, rows, max_pixels=2000)


# ----------------------------------------------------------------------------- Unicode text (issue 15)
# Byte-order marks from the Unicode Standard (chapter 23.8, U+FEFF): UTF-8 EF BB BF, UTF-16 LE FF FE,
# UTF-16 BE FE FF, UTF-32 LE FF FE 00 00. A spreadsheet's "Unicode text" export is tab-separated
# UTF-16 with a mark (common practice).

UNICODE_TEXT = "Temperatur °C\n12,5\t13,0\t-1,25\n14,75\t15\t2\n"


@pytest.mark.parametrize(
    ("bom", "codec", "label"),
    [
        (b"\xff\xfe", "utf-16-le", "UTF-16"),
        (b"\xfe\xff", "utf-16-be", "UTF-16"),
        (b"\xef\xbb\xbf", "utf-8", "UTF-8"),
        (b"\xff\xfe\x00\x00", "utf-32-le", "UTF-32"),
    ],
)
def test_text_with_a_byte_order_mark_is_decoded(tmp_path, bom, codec, label):
    path = tmp_path / "unicode.txt"
    path.write_bytes(bom + UNICODE_TEXT.replace("\n", "\r\n").encode(codec))
    frame = read_thermogram(path)
    np.testing.assert_array_equal(frame.data, EXPECTED)
    assert frame.metadata["encoding"] == label and frame.metadata["header"] == ["Temperatur °C"]
    assert frame.metadata["delimiter"] == "tab" and frame.metadata["decimal"] == ","


def test_python_utf16_writer_output_is_read(tmp_path):
    # reference writer: Python's "utf-16" codec writes a byte-order mark, then native-order text
    path = tmp_path / "py16.csv"
    path.write_text("12.5;13.0;-1.25\n14.75;15;2\n", encoding="utf-16")
    np.testing.assert_array_equal(read_thermogram(path).data, EXPECTED)


def test_utf16_without_a_mark_is_named(tmp_path):
    path = tmp_path / "nomark.csv"
    path.write_bytes(("12.5;13.0;-1.25\n14.75;15;2\n" * 5).encode("utf-16-le"))
    with pytest.raises(UnsupportedFormatError, match="UTF-16 text without a byte-order mark") as info:
        read_thermogram(path)
    assert str(path) in str(info.value) and "UTF-8" in str(info.value)


def test_binary_data_is_still_refused_as_binary(tmp_path, rng):
    path = tmp_path / "blob.csv"
    path.write_bytes(rng.integers(0, 256, 3000, dtype=np.uint8).tobytes() + b"\x00")
    with pytest.raises(UnsupportedFormatError, match="holds binary data"):
        read_thermogram(path)


def test_damaged_utf16_text_names_the_byte(tmp_path):
    path = tmp_path / "odd.csv"
    path.write_bytes(b"\xff\xfe" + "1;2\n".encode("utf-16-le") + b"\x00\xd8")  # a lone high surrogate
    with pytest.raises(InputError, match="UTF-16 byte-order mark but byte 10 is not UTF-16"):
        read_thermogram(path)


def test_every_suffix_the_guide_lists_for_text_matrices_is_read(tmp_path):
    # docs/guide.md §2 lists .csv .txt .tsv .asc .dat for delimited text; a .dat matrix was once
    # skipped in silence (issue 15 item 10)
    import re
    from pathlib import Path

    from irseg.io import is_candidate

    guide = (Path(__file__).resolve().parents[2] / "docs" / "guide.md").read_text(encoding="utf-8")
    row = next(line for line in guide.splitlines() if line.startswith("| delimited text"))
    suffixes = re.findall(r"`(\.\w+)`", row)
    assert ".dat" in suffixes
    for suffix in suffixes:
        path = tmp_path / f"wall{suffix}"
        path.write_text("20.5 20.6\n20.7 20.8\n", encoding="utf-8")
        assert is_candidate(path)
        assert read_thermogram(path).data.shape == (2, 2)
