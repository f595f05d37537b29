"""Atomic writers, deterministic number formatting and safe output names (irseg.io)."""

from __future__ import annotations

import csv
import io
import json
import os
from pathlib import Path

import cv2
import numpy as np
import pytest

from irseg import io as outputs
from irseg.io import _outfolder as outfolder
from irseg.io import _writers as writers
from irseg.batch import collect_inputs
from irseg.errors import OutputError


def test_csv_is_rfc4180_and_read_back_by_the_csv_module():
    # RFC 4180 section 2: CRLF line breaks; fields with commas, quotes or line breaks are
    # enclosed in double quotes and inner quotes doubled.
    rows = [{"a": 'say "hi", then\nleave', "b": 1.5, "c": None, "d": True}]
    blob = outputs.csv_bytes(rows, ["a", "b", "c", "d"])
    assert blob.startswith(b"a,b,c,d\r\n")
    assert b'"say ""hi"", then\nleave"' in blob
    assert blob.endswith(b"\r\n")
    parsed = list(csv.reader(io.StringIO(blob.decode("utf-8"), newline="")))
    assert parsed == [["a", "b", "c", "d"], ['say "hi", then\nleave', "1.5", "", "true"]]


def test_float_format_is_stable_through_a_json_round_trip():
    values = [0.1 + 0.2, 1 / 3, 12345.678901234, -0.0, 6.02214076e23, 2.5e-9]
    once = outputs.normalise_json(values)
    again = outputs.normalise_json(json.loads(json.dumps(once)))
    assert once == again
    assert once[0] == 0.3 and once[3] == 0.0
    assert outputs.format_float(1 / 3) == "0.3333333"  # SIGNIFICANT_DIGITS = 7
    assert outputs.format_float(float("nan")) == "" and outputs.format_float(None) == ""
    assert outputs.normalise_json({"x": float("inf")}) == {"x": None}


def test_json_is_sorted_and_plain(tmp_path):
    path = outputs.write_json(tmp_path / "r.json", {"b": np.float32(1.25), "a": (np.int64(3), np.bool_(True))})
    text = path.read_text(encoding="utf-8")
    assert text == '{\n  "a": [\n    3,\n    true\n  ],\n  "b": 1.25\n}\n'


def test_png_round_trip_keeps_16_bit_and_rgb_order(tmp_path):
    labels = np.zeros((5, 7), np.uint16)
    labels[1, 2] = 300  # > 255: would be lost if anything went through 8 bits
    path = outputs.write_bytes(tmp_path / "labels.png", outputs.encode_png(labels))
    back = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
    assert back.dtype == np.uint16 and back.shape == (5, 7) and back[1, 2] == 300
    rgb = np.zeros((2, 3, 3), np.uint8)
    rgb[..., 0] = 200  # red
    back = cv2.imread(str(outputs.write_bytes(tmp_path / "o.png", outputs.encode_png(rgb))), cv2.IMREAD_COLOR)
    assert back[0, 0].tolist() == [0, 0, 200]  # OpenCV reads BGR
    with pytest.raises(OutputError, match="uint8 or uint16"):
        outputs.encode_png(np.zeros((2, 2), np.float32))


def test_failed_write_leaves_old_file_and_no_temp(tmp_path, monkeypatch):
    target = tmp_path / "summary.json"
    target.write_bytes(b"old")

    def boom(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "fsync", boom)
    with pytest.raises(OutputError, match="disk is full"):
        outputs.write_bytes(target, b"new content")
    assert target.read_bytes() == b"old"
    assert [p.name for p in tmp_path.iterdir()] == ["summary.json"]


def test_unwritable_folder_is_an_output_error(tmp_path, monkeypatch):
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        if os.access(folder, os.W_OK):  # root ignores permissions: refuse the open as the kernel would
            def refuse(*args, **kwargs):
                raise PermissionError(13, "Permission denied")

            monkeypatch.setattr(os, "open", refuse)
        with pytest.raises(OutputError, match="not writable"):
            outputs.write_bytes(folder / "x.csv", b"a")
    finally:
        monkeypatch.undo()
        folder.chmod(0o700)
    assert list(folder.iterdir()) == []


def test_remove_temp_files_touches_only_temp_names(tmp_path):
    (tmp_path / "img").mkdir()
    (tmp_path / "img" / f"{outputs.TEMP_PREFIX}abc.part").write_bytes(b"x")
    (tmp_path / "img" / "result.json").write_bytes(b"{}")
    assert outputs.remove_temp_files(tmp_path) == 1
    assert sorted(p.name for p in (tmp_path / "img").iterdir()) == ["result.json"]


@pytest.mark.parametrize(
    "raw",
    ["..", ".", "", "../../etc/passwd", "/abs/name", "a/b\\c", ".hidden", "CON", "nul.txt", "x" * 300,
     "rm -rf $HOME; `x`", "tab\there\nnewline", "anomalies.csv", "ÄÖÜ wall", "\x00nul"],
)
def test_safe_component_never_escapes(tmp_path, raw):
    name = outputs.safe_component(raw, reserved=["anomalies.csv"])
    assert name and name not in {".", ".."} and not name.startswith(".")
    assert "/" not in name and "\\" not in name and "\x00" not in name
    assert name.lower() != "anomalies.csv"
    assert len(name) <= 121
    resolved = outputs.resolve_inside(tmp_path, name).resolve()
    assert resolved.parent == tmp_path.resolve()


def test_resolve_inside_refuses_escapes(tmp_path):
    with pytest.raises(OutputError, match="escape"):
        outputs.resolve_inside(tmp_path, "..", "x")
    with pytest.raises(OutputError, match="escape"):
        outputs.resolve_inside(tmp_path, "/etc")


def test_colliding_stems_get_distinct_safe_folders(tmp_path):
    for rel in ["north/wall.tif", "south/wall.tif", "wall.npy", "Wall.csv", "odd name;$(x).tif", "..weird.tif"]:
        path = tmp_path / "survey" / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(b"")
    (tmp_path / "survey" / "survey.toml").write_text("")
    (tmp_path / "survey" / ".hidden.tif").write_bytes(b"")
    items, root = collect_inputs([tmp_path / "survey"])
    assert Path(root) == tmp_path / "survey"
    rels = [i.rel for i in items]
    assert rels == sorted(rels)  # deterministic order
    assert ".hidden.tif" not in rels and "survey.toml" not in rels
    stems = [i.stem for i in items]
    assert len({s.lower() for s in stems}) == len(stems)
    for stem in stems:
        assert outputs.resolve_inside(tmp_path / "out", stem).parent == tmp_path / "out"
        assert not stem.startswith(".")
    by_rel = {i.rel: i for i in items}
    assert by_rel["north/wall.tif"].stem == "north__wall"
    assert by_rel["north/wall.tif"].image == "north/wall.tif"  # file names repeat -> relative path
    assert by_rel["wall.npy"].image == "wall.npy"


def test_written_files_get_the_usual_permissions(tmp_path):
    # A new file gets mode 0666 minus the process umask (POSIX open(2) semantics), not 0600.
    mask = os.umask(0o022)
    os.umask(mask)
    path = outputs.write_bytes(tmp_path / "anomalies.csv", b"x")
    assert path.stat().st_mode & 0o777 == 0o666 & ~mask


def test_remove_file_is_quiet_for_missing_and_names_the_file_it_cannot_remove(tmp_path):
    from irseg import io as outputs
    from irseg.errors import OutputError

    present = tmp_path / "failures.csv"
    present.write_text("file,stage,message\r\n")
    assert outputs.remove_file(present) is True and not present.exists()
    assert outputs.remove_file(present) is False
    folder = tmp_path / "result.json"  # a folder where a file is expected: unlink refuses it (POSIX)
    folder.mkdir()
    with pytest.raises(OutputError, match=r"result\.json: cannot remove it .*check the folder"):
        outputs.remove_file(folder, hint="check the folder given with -o")


def test_text_cells_that_start_a_formula_are_neutralised_but_numbers_are_not():
    # OWASP "CSV Injection" (common practice): prefix a cell starting with = + - @ tab or CR with
    # a single quote; a spreadsheet then shows the text instead of running it.
    rows = [{
        "a": "=HYPERLINK(\"http://example.invalid\",\"x\")", "b": "+1+2", "c": "@SUM(A1)", "d": "-2+3",
        "e": "\tcmd", "f": "\rcmd", "g": -0.62, "h": "-0.62", "i": "+5", "j": "wall", "k": -3,
    }]
    blob = outputs.csv_bytes(rows, list("abcdefghijk"))
    (row,) = list(csv.DictReader(io.StringIO(blob.decode("utf-8"), newline=""), fieldnames=list("abcdefghijk")))[1:]
    assert row["a"] == "'=HYPERLINK(\"http://example.invalid\",\"x\")"
    assert [row[k] for k in "bcdef"] == ["'+1+2", "'@SUM(A1)", "'-2+3", "'\tcmd", "'\rcmd"]
    # numbers, and text that is a plain number, stay as they are (a spreadsheet reads them as numbers)
    assert [row[k] for k in "ghijk"] == ["-0.62", "-0.62", "+5", "wall", "-3"]


def test_undecodable_name_bytes_are_escaped_everywhere_text_is_written(tmp_path):
    # PEP 383: os.fsdecode keeps the byte 0xE9 of a Latin-1 name as the lone surrogate U+DCE9,
    # which UTF-8 (RFC 3629) cannot encode.
    name = os.fsdecode(b"caf\xe9.npy")
    assert name == "caf\udce9.npy"
    assert writers.escape_text(name) == "caf\\xe9.npy" == writers.escape_text(writers.escape_text(name))
    assert outputs.normalise_json({name: [name]}) == {"caf\\xe9.npy": ["caf\\xe9.npy"]}
    assert outputs.csv_bytes([{"f": name}], ["f"]) == b"f\r\ncaf\\xe9.npy\r\n"
    assert outputs.write_text(tmp_path / "t.txt", name).read_bytes() == b"caf\\xe9.npy"
    assert writers.escape_line("a\nb\r\x1b[32mok\u2028") == "a\\nb\\r\\x1b[32mok\\u2028"


def test_long_names_are_capped_in_bytes_and_stay_distinct():
    # NAME_MAX is 255 bytes on Linux file systems; CJK characters take 3 bytes each in UTF-8.
    a = outputs.safe_component("熱" * 200)
    b = outputs.safe_component("熱" * 199 + "橋")
    assert len(os.fsencode(a)) <= writers.MAX_NAME_BYTES and len(os.fsencode(b)) <= writers.MAX_NAME_BYTES
    assert a != b and a.startswith("熱" * 30)
    assert outputs.safe_component("short_name") == "short_name"  # short names are unchanged
    assert outputs.safe_component("é" * 100).encode("utf-8").decode("utf-8")  # cut on a character boundary


def test_replace_files_replaces_all_or_nothing(tmp_path, monkeypatch):
    for name in ("a.csv", "b.json", "c.html"):
        (tmp_path / name).write_bytes(b"old " + name.encode())
    real = writers._mkstemp

    def full_disk(target):
        if target.name == "c.html":
            raise OSError(28, "No space left on device")
        return real(target)

    monkeypatch.setattr(writers, "_mkstemp", full_disk)
    with pytest.raises(OutputError, match="disk is full"):
        outfolder.replace_files(tmp_path, {"a.csv": b"new", "b.json": b"new", "c.html": b"new"})
    monkeypatch.undo()
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == {
        "a.csv": b"old a.csv", "b.json": b"old b.json", "c.html": b"old c.html"}
    hashes = outfolder.replace_files(tmp_path, {"a.csv": b"new", "b.json": None, "c.html": b"x"})
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.csv", "c.html"]
    import hashlib

    assert hashes == {"a.csv": "sha256:" + hashlib.sha256(b"new").hexdigest(),
                      "c.html": "sha256:" + hashlib.sha256(b"x").hexdigest()}


def test_the_manifest_owns_only_what_it_lists(tmp_path):
    (tmp_path / "run.log").write_text("mine\n")
    manifest = outfolder.OutputManifest(tmp_path)
    assert manifest.in_the_way("run.log") and not manifest.in_the_way("anomalies.csv")
    assert manifest.remove("run.log") is False and (tmp_path / "run.log").exists()
    manifest.claim(["anomalies.csv", "wall/result.json"])
    again = outfolder.OutputManifest(tmp_path)  # written atomically, read back
    assert again.files == {"anomalies.csv", "wall/result.json"} and not again.damaged
    again.prune()
    assert again.files == set()  # neither file exists yet
    (tmp_path / outfolder.MANIFEST_NAME).write_text('{"format": "irseg-outputs", "files": ["../../etc/passwd"]}')
    assert outfolder.OutputManifest(tmp_path).files == set()  # never a path outside the folder
    (tmp_path / outfolder.MANIFEST_NAME).write_text("[1, 2]")
    assert outfolder.OutputManifest(tmp_path).damaged


def test_lock_folder_is_exclusive_and_released(tmp_path):
    # flock(2): a second open file description cannot take an exclusive lock that is held.
    with outfolder.lock_folder(tmp_path) as lock:
        assert lock.name == outfolder.LOCK_NAME
        with pytest.raises(OutputError, match="another irseg run is writing to this output folder"):
            with outfolder.lock_folder(tmp_path):
                pass
    with outfolder.lock_folder(tmp_path):  # released when the block ends
        pass
