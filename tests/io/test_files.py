"""Bounded reads of irseg's own small files: regular files only, size capped, never a blocking open."""

from __future__ import annotations

import os

import pytest

from irseg.errors import InputError
from irseg.io import MAX_TEXT_BYTES, metadata_candidates, read_metadata_texts, read_small_bytes, read_small_text


def test_metadata_files_in_order_folder_first(tmp_path):
    (tmp_path / "survey.toml").write_text("[surface]\nemissivity = 0.9\n", encoding="utf-8")
    (tmp_path / "a.toml").write_text("[surface]\nemissivity = 0.95\n", encoding="utf-8")
    assert metadata_candidates(tmp_path / "a.tif") == (tmp_path / "survey.toml", tmp_path / "a.toml")
    found = read_metadata_texts(tmp_path / "a.tif")
    assert [name for name, _ in found] == [str(tmp_path / "survey.toml"), str(tmp_path / "a.toml")]
    assert read_metadata_texts(tmp_path / "b.tif") == [(str(tmp_path / "survey.toml"), found[0][1])]


def test_image_named_survey_reads_the_folder_file_once(tmp_path):
    (tmp_path / "survey.toml").write_text("[surface]\nemissivity = 0.9\n", encoding="utf-8")
    assert len(read_metadata_texts(tmp_path / "survey.tif")) == 1


def test_fifo_is_refused_from_its_status_without_opening_it(tmp_path):
    if not hasattr(os, "mkfifo"):
        pytest.skip("named pipes need a POSIX system")
    os.mkfifo(tmp_path / "wall.toml")
    # os.stat does not open the pipe, so this returns even though no writer exists
    with pytest.raises(InputError, match=r"wall.toml: the metadata file is not a regular file \(a folder, pipe"):
        read_metadata_texts(tmp_path / "wall.tif")


def test_folder_named_like_a_metadata_file_is_refused(tmp_path):
    (tmp_path / "survey.toml").mkdir()
    with pytest.raises(InputError, match="survey.toml: the metadata file is not a regular file"):
        read_metadata_texts(tmp_path / "wall.tif")


def test_size_cap(tmp_path):
    assert MAX_TEXT_BYTES == 1 << 20  # 1 MiB: a sidecar is a few hundred bytes
    big = tmp_path / "survey.toml"
    big.write_bytes(b"# " + b"x" * (2 * MAX_TEXT_BYTES))
    with pytest.raises(InputError, match=rf"is {2 * MAX_TEXT_BYTES + 2} bytes, more than the {MAX_TEXT_BYTES}"):
        read_metadata_texts(tmp_path / "a.tif")
    small = tmp_path / "small.txt"
    small.write_bytes(b"12345")
    assert read_small_bytes(small, max_bytes=5) == b"12345"
    with pytest.raises(InputError, match="more than the 4 accepted"):
        read_small_bytes(small, max_bytes=4)


def test_text_must_be_utf8_and_loses_its_byte_order_mark(tmp_path):
    path = tmp_path / "a.toml"
    path.write_bytes("\ufeff[surface]\n".encode())
    assert read_small_text(path) == "[surface]\n"
    path.write_bytes(b"[surface]\n# \xff\n")
    with pytest.raises(InputError, match="line 2 is not valid UTF-8"):
        read_small_text(path, what="metadata file")


def test_missing_file_is_named(tmp_path):
    with pytest.raises(InputError, match=r"nope.toml: cannot read the file .*check it exists"):
        read_small_text(tmp_path / "nope.toml")
