"""Hostile folders: bad names, unreadable folders, pipes, outputs mixed with inputs, two runs at once.

Each test builds the hostile case in a temporary folder and checks that the run goes on, that
every bad input fails alone or is named as skipped, and that no input and no file irseg did
not write is ever touched. External references: POSIX ``flock(2)`` and ``mkfifo(3)`` semantics,
the Linux NAME_MAX of 255 bytes per path component, UTF-8 (RFC 3629), Python's
``surrogateescape`` file-name decoding (PEP 383), RFC 4180 CSV, and the OWASP "CSV Injection"
guidance (common practice) for cells starting with ``= + - @``, tab or carriage return.
"""

from __future__ import annotations

import contextlib
import csv
import errno
import hashlib
import io
import json
import os
import signal
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import pytest
from tests.support.survey import SURVEY_TOML, data_files, hash_tree, make_survey, wall_image

from irseg.batch import run_survey, scan_inputs
from irseg.errors import ConfigError, InputError, OutputError
from irseg.io import _writers
from irseg.io._outfolder import LOCK_NAME, MANIFEST_NAME
from irseg.io._writers import TEMP_PREFIX

SURVEY_FILES = ("anomalies.csv", "summary.json", "report.html", "run.log")


def _csv(path: Path) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(path.read_bytes().decode("utf-8"), newline="")))


def _summary(out: Path) -> dict:
    return json.loads((out / "summary.json").read_bytes().decode("utf-8"))


def _manifest(out: Path) -> dict:
    return json.loads((out / MANIFEST_NAME).read_text(encoding="utf-8"))


def _set_is_consistent(out: Path) -> bool:
    """True when every survey-level file on disk has the sha256 the manifest recorded for the set."""
    recorded = _manifest(out)["survey_files"]
    return all(
        "sha256:" + hashlib.sha256((out / name).read_bytes()).hexdigest() == digest
        for name, digest in recorded.items()
    )


@contextlib.contextmanager
def _hang_guard(seconds: int = 60):
    """Turn a blocked call (a read on a FIFO) into a test failure instead of a hung test run."""

    def expire(signum, frame):
        raise TimeoutError("the run blocked (a read on a pipe?)")

    previous = signal.signal(signal.SIGALRM, expire)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


# --------------------------------------------------------------------------- 1. outputs never overwrite inputs


def test_out_holding_named_inputs_is_refused_and_nothing_is_touched(tmp_path):
    # `irseg segment s/anomalies.csv s/failures.csv -o s`: the inputs live where the outputs would go.
    s = tmp_path / "s"
    s.mkdir()
    (s / "anomalies.csv").write_text("20.1,20.2\n20.3,20.4\n", encoding="utf-8")
    (s / "failures.csv").write_text("19.0,19.5\n19.2,19.1\n", encoding="utf-8")
    (s / "run.log").write_text("my own notes\n", encoding="utf-8")
    before = hash_tree(s)
    with pytest.raises(ConfigError, match=r"holds the input anomalies\.csv.*separate output folder"):
        run_survey([s / "anomalies.csv", s / "failures.csv"], s, jobs=1)
    with pytest.raises(ConfigError, match="separate output folder"):  # the same through a link to OUT
        (tmp_path / "link").symlink_to(s)
        run_survey([s / "anomalies.csv"], tmp_path / "link", jobs=1)
    assert hash_tree(s) == before and sorted(p.name for p in s.iterdir()) == sorted(before)


def test_files_irseg_did_not_write_are_never_replaced_or_removed(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 2, tiff=False)
    out = tmp_path / "out"
    out.mkdir()
    (out / "run.log").write_text("the user's own log\n", encoding="utf-8")
    with pytest.raises(OutputError, match=r"run\.log: irseg did not write this file"):
        run_survey([survey], out, jobs=1)
    assert (out / "run.log").read_text(encoding="utf-8") == "the user's own log\n"
    assert sorted(p.name for p in out.iterdir()) == ["run.log"]  # refused before anything is made

    # A failures.csv irseg did not make must not be deleted by a run without failures.
    (out / "run.log").unlink()
    (out / "failures.csv").write_text("kept\n", encoding="utf-8")
    with pytest.raises(OutputError, match=r"failures\.csv: irseg did not write"):
        run_survey([survey], out, jobs=1)
    assert (out / "failures.csv").read_text(encoding="utf-8") == "kept\n"

    # A foreign file where an image's output goes fails that image alone, at write, untouched.
    (out / "failures.csv").unlink()
    stem = paths[1].stem
    (out / stem).mkdir()
    (out / stem / "labels.png").write_bytes(b"someone else's picture")
    result = run_survey([survey], out, jobs=1)
    assert result.n_ok == 1 and [(f.image, f.stage) for f in result.failures] == [(paths[1].name, "write")]
    assert f"{stem}/labels.png: irseg did not write this file" in result.failures[0].message
    assert (out / stem / "labels.png").read_bytes() == b"someone else's picture"
    assert not (out / stem / "result.json").exists()


def test_the_manifest_lists_every_file_written_and_stale_outputs_go(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 2, tiff=False)
    (survey / "broken.npy").write_bytes(b"not an array")
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    assert (out / "failures.csv").is_file()
    written = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file() and
                     p.name not in (MANIFEST_NAME, LOCK_NAME))
    assert _manifest(out)["files"] == written
    assert _set_is_consistent(out)

    (survey / "broken.npy").unlink()  # the bad input is gone: irseg removes its own failures.csv
    run_survey([survey], out, jobs=1, resume=True)
    assert not (out / "failures.csv").exists()
    assert "failures.csv" not in _manifest(out)["files"]
    assert {f"{p.stem}/result.json" for p in paths} <= set(_manifest(out)["files"])

    (out / MANIFEST_NAME).write_text("not json", encoding="utf-8")  # unreadable: nothing is irseg's
    before = hash_tree(out)
    with pytest.raises(OutputError, match=r"anomalies\.csv: irseg did not write this file \(its list"):
        run_survey([survey], out, jobs=1)
    assert hash_tree(out) == before


# --------------------------------------------------------------------------- 2, 3. file names


def test_a_latin1_file_name_is_processed_and_named_escaped(tmp_path):
    # b"caf\xe9" is Latin-1 for "café": not valid UTF-8 (RFC 3629), so Python hands the name back
    # with a lone surrogate U+DCE9 (PEP 383, surrogateescape), which no UTF-8 file can hold.
    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    raw = os.fsencode(survey)
    with open(raw + b"/caf\xe9.npy", "wb") as handle:
        np.save(handle, wall_image(3))
    with open(raw + b"/caf\xe9.toml", "wb") as handle:
        handle.write(b"[surface]\nemissivity = 0.9\n")
    with open(raw + b"/bad\xff.npy", "wb") as handle:
        handle.write(b"not an array")
    out = tmp_path / "out"
    result = run_survey([survey], out, jobs=1)
    assert result.n_ok == 2 and [(f.image, f.stage) for f in result.failures] == [("bad\\xff.npy", "read")]
    names = {r["image"] for r in _csv(out / "anomalies.csv")}
    assert "caf\\xe9.npy" in names  # escaped, readable as UTF-8
    record = json.loads((out / "caf_xe9" / "result.json").read_bytes().decode("utf-8"))
    assert record["image"] == "caf\\xe9.npy" and record["metadata"]["surface"]["emissivity"] == 0.9
    assert _csv(out / "failures.csv")[0]["file"] == "bad\\xff.npy"
    for name in (*SURVEY_FILES, "failures.csv"):
        (out / name).read_bytes().decode("utf-8")  # every survey file is valid UTF-8
    assert "bad\\xff.npy" in (out / "run.log").read_text(encoding="utf-8")
    again = run_survey([survey], out, jobs=1, resume=True)  # fingerprints and names are stable
    assert again.n_skipped == 2


def test_long_non_ascii_names_give_unique_folders_within_255_bytes(tmp_path):
    # Linux file systems cap one path component at 255 bytes (NAME_MAX); a CJK character takes
    # 3 bytes in UTF-8 (RFC 3629), so 120 characters are 360 bytes.
    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    folder_a = survey / ("北側外壁の調査記録" * 3)
    folder_b = survey / ("北側外壁の調査記録" * 3 + "二")
    stem = "断熱欠損の疑いがある外壁部分の熱画像" * 4 + "です" * 4  # 80 characters, 240 bytes
    assert len(os.fsencode(stem + "x.npy")) <= 255
    for k, folder in enumerate((folder_a, folder_b)):
        folder.mkdir()
        np.save(folder / f"{stem}.npy", wall_image(10 + k))
        np.save(folder / f"{stem}x.npy", wall_image(20 + k))
    result = run_survey([survey], tmp_path / "out", jobs=1)
    assert result.n_ok == 5 and result.n_failed == 0
    stems = [o.stem for o in result.outcomes]
    assert len({s.lower() for s in stems}) == len(stems)
    for s in stems:
        assert len(os.fsencode(s)) <= _writers.MAX_NAME_BYTES <= 255
        assert (tmp_path / "out" / s / "result.json").is_file()


# --------------------------------------------------------------------------- 4. folders and special files


def test_unreadable_subfolders_are_skipped_with_a_note(tmp_path, monkeypatch):
    survey = tmp_path / "survey"
    make_survey(survey, 2, tiff=False)
    locked, noexec = survey / "locked", survey / "noexec"
    for folder in (locked, noexec):
        folder.mkdir()
        np.save(folder / "hidden_wall.npy", wall_image(5))
    real_access, real_scandir = os.access, os.scandir
    locked.chmod(0o000)
    noexec.chmod(0o600)  # read but no search permission: listing works, opening entries does not
    try:
        if real_access(locked, os.R_OK):  # root ignores permissions: refuse as the kernel would
            def access(path, mode, **kwargs):
                if Path(path) in (locked, noexec):
                    return False
                return real_access(path, mode, **kwargs)

            def scandir(path="."):
                if Path(path) == locked:
                    raise PermissionError(errno.EACCES, "Permission denied", str(path))
                return real_scandir(path)

            monkeypatch.setattr(os, "access", access)
            monkeypatch.setattr(os, "scandir", scandir)
        result = run_survey([survey], tmp_path / "out", jobs=1)
    finally:
        monkeypatch.undo()
        locked.chmod(0o700)
        noexec.chmod(0o700)
    assert result.n_ok == 2 and result.n_failed == 0
    skipped = {s.file: s.reason for s in result.skipped}
    assert set(skipped) == {"locked/", "noexec/"}
    assert all(r.startswith("cannot read folder") for r in skipped.values())
    out = tmp_path / "out"
    log = (out / "run.log").read_text(encoding="utf-8")
    assert "skipped locked/: cannot read folder" in log and "skipped noexec/: cannot read folder" in log
    assert {s["file"] for s in _summary(out)["skipped"]} == {"locked/", "noexec/"}
    report = (out / "report.html").read_text(encoding="utf-8")
    assert "skipped: cannot read folder" in report and "noexec/" in report


def test_pipes_and_devices_never_block_the_run_and_are_named(tmp_path):
    # mkfifo(3): opening a FIFO for reading blocks until a writer opens it; /dev/zero never ends.
    survey = tmp_path / "survey"
    make_survey(survey, 2, tiff=False)
    np.save(survey / "piped.npy", wall_image(7))
    os.mkfifo(survey / "piped.toml")  # a sidecar that is a pipe
    os.mkfifo(survey / "pipe_image.npy")  # an image name that is a pipe (folder scan)
    os.mkfifo(tmp_path / "named_pipe.npy")  # ... and one named explicitly
    zero = survey / "roof"
    zero.mkdir()
    np.save(zero / "roof_01.npy", wall_image(8))
    (zero / "survey.toml").symlink_to("/dev/zero")
    out = tmp_path / "out"
    with _hang_guard():
        result = run_survey([survey, tmp_path / "named_pipe.npy"], out, jobs=1)
    failures = {f.image: f for f in result.failures}
    assert result.n_ok == 2 and set(failures) == {"piped.npy", "roof_01.npy", "named_pipe.npy"}
    assert failures["piped.npy"].stage == "metadata" and "piped.toml" in failures["piped.npy"].message
    assert "not a regular file" in failures["piped.npy"].message
    assert failures["roof_01.npy"].stage == "metadata" and "survey.toml" in failures["roof_01.npy"].message
    assert failures["named_pipe.npy"].stage == "read" and "not a regular file" in failures["named_pipe.npy"].message
    assert {s.file: s.reason for s in result.skipped} == {
        "survey/pipe_image.npy": "not a regular file (a pipe, device or socket)"
    }
    assert "survey/pipe_image.npy: not a regular file" in (out / "run.log").read_text(encoding="utf-8")


# --------------------------------------------------------------------------- 5. two runs at once


def test_a_second_run_on_a_locked_out_is_refused(tmp_path):
    import fcntl

    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    out = tmp_path / "out"
    out.mkdir()
    # flock(2): a lock taken through one open file description excludes every other one,
    # in this process or another.
    with open(out / LOCK_NAME, "a+b") as held:
        fcntl.flock(held.fileno(), fcntl.LOCK_EX)
        with pytest.raises(OutputError, match=r"another irseg run is writing to this output folder"):
            run_survey([survey], out, jobs=1)
    assert sorted(p.name for p in out.iterdir()) == [LOCK_NAME]  # nothing written, nothing removed
    assert run_survey([survey], out, jobs=1).n_ok == 1  # released: the next run proceeds


def test_a_run_in_another_process_holds_the_lock(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    out = tmp_path / "out"
    out.mkdir()
    holder = subprocess.Popen(
        [sys.executable, "-c",
         "import sys; from irseg.io._outfolder import lock_folder\n"
         "with lock_folder(sys.argv[1]):\n    print('locked', flush=True); sys.stdin.read()\n",
         str(out)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True,
        env={**os.environ, "PYTHONPATH": os.pathsep.join(sys.path)},
    )
    try:
        assert holder.stdout.readline().strip() == "locked"
        with pytest.raises(OutputError, match=rf"{out.name}: another irseg run"):
            run_survey([survey], out, jobs=1)
    finally:
        holder.communicate("")
    assert holder.returncode == 0
    assert run_survey([survey], out, jobs=1).n_ok == 1


# --------------------------------------------------------------------------- 6. one consistent set


def test_a_full_disk_at_the_report_keeps_the_previous_set_whole(tmp_path, monkeypatch):
    survey = tmp_path / "survey"
    make_survey(survey, 2, tiff=False)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    old = {name: (out / name).read_bytes() for name in SURVEY_FILES}
    np.save(survey / "wall_09.npy", wall_image(9))  # the next run has one image more

    real = _writers._mkstemp

    def full_disk(target):
        if target.name == "report.html":
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(target)

    monkeypatch.setattr(_writers, "_mkstemp", full_disk)
    with pytest.raises(OutputError, match=r"disk is full.*none of .*anomalies\.csv.* was replaced"):
        run_survey([survey], out, jobs=1, resume=True)
    monkeypatch.undo()
    assert {name: (out / name).read_bytes() for name in SURVEY_FILES} == old
    assert not [p for p in out.rglob(f"{TEMP_PREFIX}*")]
    assert _set_is_consistent(out)
    assert (out / "wall_09" / "result.json").is_file()  # the image itself was kept

    again = run_survey([survey], out, jobs=1, resume=True)
    assert again.n_skipped == 3 and len(_summary(out)["images"]) == 3
    assert _set_is_consistent(out)


def test_a_set_broken_off_mid_rename_is_detectable(tmp_path, monkeypatch):
    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    np.save(survey / "wall_05.npy", wall_image(5))
    real = os.replace

    def stop_after_the_table(src, dst):
        if Path(dst).name == "report.html":
            raise OSError(errno.EIO, "Input/output error")
        return real(src, dst)

    monkeypatch.setattr(os, "replace", stop_after_the_table)
    with pytest.raises(OutputError, match="could not put the new files in place"):
        run_survey([survey], out, jobs=1, resume=True)
    monkeypatch.undo()
    assert not _set_is_consistent(out)  # the new anomalies.csv does not match the recorded set
    run_survey([survey], out, jobs=1, resume=True)
    assert _set_is_consistent(out)


# --------------------------------------------------------------------------- 10, 11. skipped files


def test_every_skipped_file_is_named_with_its_reason(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 1, tiff=False)
    (survey / "photo.jpg").write_bytes(b"\xff\xd8\xff\xe0" + bytes(100))
    (survey / "matrix.mat").write_bytes(b"MATLAB 5.0 MAT-file" + bytes(100))  # a closed format
    (survey / "notes").write_text("wind picked up at 22:10\n", encoding="utf-8")
    np.save(survey / ".hidden.npy", wall_image(3))  # hidden: silent
    (survey / "orphan.toml").write_text("[surface]\nemissivity = 0.9\n", encoding="utf-8")  # metadata: silent
    (survey / "gone.npy").symlink_to(survey / "nowhere.npy")
    other = tmp_path / "elsewhere"
    other.mkdir()
    (survey / "linked").symlink_to(other, target_is_directory=True)
    out = tmp_path / "out"
    result = run_survey([survey], out, jobs=1)
    expected = {
        "gone.npy": "broken link",
        "linked/": "link to a folder (not followed; name the folder itself to include it)",
        "matrix.mat": "not a thermogram (no reader for .mat files)",
        "notes": "not a thermogram (no suffix)",
        "photo.jpg": "not a thermogram (no reader for .jpg files)",
    }
    assert {s.file: s.reason for s in result.skipped} == expected
    assert _summary(out)["skipped"] == [{"file": f, "reason": r} for f, r in sorted(expected.items())]
    log = (out / "run.log").read_text(encoding="utf-8")
    report = (out / "report.html").read_text(encoding="utf-8")
    for name, reason in expected.items():
        assert f"skipped {name}: {reason}" in log
        assert name in report and f"skipped: {reason}" in report
    assert ".hidden.npy" not in log and "orphan.toml" not in log


def test_earlier_output_folders_inside_the_survey_are_skipped(tmp_path):
    survey = tmp_path / "survey"
    make_survey(survey, 2)
    first = run_survey([survey], survey / "results_a", jobs=1)
    second = run_survey([survey], survey / "results_b", jobs=1)
    assert len(first.outcomes) == len(second.outcomes) == 2  # no labels.png read as a thermogram
    assert [(s.file, s.reason) for s in second.skipped] == [
        ("results_a/", "holds irseg outputs (the output folder of an earlier run)")
    ]
    # An image folder of an earlier version (no manifest beside it) is known by its result.json.
    old = survey / "old_run" / "wall_00"
    old.mkdir(parents=True)
    (old / "result.json").write_text(json.dumps({"irseg_version": "0.0.9", "status": "ok"}), encoding="utf-8")
    np.save(old / "labels.npy", np.zeros((4, 4), np.uint16))
    found = scan_inputs([survey], exclude=survey / "results_c")
    assert [i.rel for i in found.images] == ["wall_00.npy", "wall_01.tif"]
    assert {s.file for s in found.skipped} == {"old_run/wall_00/", "results_a/", "results_b/"}
    with pytest.raises(InputError, match="holds irseg outputs"):
        run_survey([survey / "results_a"], tmp_path / "out", jobs=1)


# --------------------------------------------------------------------------- 12. formula injection


def test_csv_cells_that_would_run_as_formulas_are_neutralised(tmp_path):
    # OWASP "CSV Injection" (common practice): a cell starting with = + - @ tab or CR is prefixed
    # with a single quote so a spreadsheet shows it as text; numbers stay numbers.
    survey = tmp_path / "survey"
    survey.mkdir()
    (survey / "survey.toml").write_text(SURVEY_TOML, encoding="utf-8")
    good = ["=HYPERLINK(1+2).npy", "+1+2.npy", "@SUM(A1).npy", "-2+3.npy"]
    for k, name in enumerate(good):
        np.save(survey / name, wall_image(k))
    (survey / "=cmd calc.npy").write_bytes(b"not an array")
    out = tmp_path / "out"
    result = run_survey([survey], out, jobs=1)
    assert result.n_ok == 4 and result.n_failed == 1
    rows = _csv(out / "anomalies.csv")
    assert {r["image"] for r in rows} == {"'" + n for n in good}
    for row in rows:
        assert float(row["delta_k"]) < 0 and not row["delta_k"].startswith("'")  # -2.9 stays a number
        for value in row.values():
            assert not value.startswith(("=", "+", "@", "\t", "\r")), value
    (failure,) = _csv(out / "failures.csv")
    assert failure["file"] == "'=cmd calc.npy" and failure["message"].startswith("'=cmd calc.npy")
    assert {i["image"] for i in _summary(out)["images"]} == {*good, "=cmd calc.npy"}  # JSON keeps them


# --------------------------------------------------------------------------- 16. no absolute paths


def _other_tree(tmp_path: Path) -> Path | None:
    """A writable folder whose top-level directory differs from tmp_path's (inputs sharing no root)."""
    top = Path(tmp_path).resolve().parts[1]
    for candidate in ("/dev/shm", "/var/tmp", "/tmp"):
        if os.path.isdir(candidate) and os.access(candidate, os.W_OK) and Path(candidate).parts[1] != top:
            return Path(tempfile.mkdtemp(dir=candidate, prefix="irseg-test-"))
    return None


@pytest.mark.parametrize("apart", [False, True], ids=["same-tree", "no-common-folder"])
def test_inputs_from_two_folders_are_named_relative(tmp_path, apart):
    elsewhere = _other_tree(tmp_path) if apart else tmp_path
    if elsewhere is None:
        pytest.skip("no writable folder outside tmp_path's top-level directory")
    try:
        folders = [tmp_path / "north", elsewhere / "south"]
        named = []
        for folder in folders:
            make_survey(folder, 1, tiff=False)
            np.save(folder / f"bad_{folder.name}.npy", wall_image(1))
            (folder / f"bad_{folder.name}.toml").write_text("[surface]\nemissivity = 0.0\n", encoding="utf-8")
            (folder / f"trunc_{folder.name}.npy").write_bytes(b"\x93NUMPY\x01\x00")
            named += [folder / "wall_00.npy", folder / f"bad_{folder.name}.npy", folder / f"trunc_{folder.name}.npy"]
        out = tmp_path / "out"
        result = run_survey(named, out, jobs=1)
        assert result.n_ok == 2 and result.n_failed == 4
        failures = {f.image: f.message for f in result.failures}
        assert failures["bad_north.npy"].startswith("north/bad_north.toml:")
        assert failures["bad_south.npy"].startswith("south/bad_south.toml:")
        blobs = {**data_files(out), "report.html": (out / "report.html").read_bytes()}
        for name, blob in blobs.items():
            for folder in folders:
                assert str(folder.parent).encode() not in blob, name
    finally:
        if apart:
            import shutil

            shutil.rmtree(elsewhere, ignore_errors=True)


# --------------------------------------------------------------------------- 19. the image's own folder


def test_a_link_in_place_of_an_image_folder_fails_that_image_alone(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 2, tiff=False)
    outside = tmp_path / "outside"
    outside.mkdir()
    out = tmp_path / "out"
    out.mkdir()
    (out / paths[0].stem).symlink_to(outside, target_is_directory=True)
    result = run_survey([survey], out, jobs=1)
    assert result.n_ok == 1 and [(f.image, f.stage) for f in result.failures] == [(paths[0].name, "write")]
    message = result.failures[0].message
    assert "is a link" in message and "bug" not in message and "remove the link" in message
    assert list(outside.iterdir()) == []


def test_a_read_only_image_folder_fails_that_image_alone(tmp_path, monkeypatch):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 3, tiff=False)
    out = tmp_path / "out"
    run_survey([survey], out, jobs=1)
    folder = out / paths[1].stem
    folder.chmod(0o555)
    try:
        if os.access(folder, os.W_OK):  # root ignores permissions: refuse as the kernel would
            real = _writers._mkstemp

            def refuse(target):
                if target.parent == folder:
                    raise PermissionError(errno.EACCES, "Permission denied")
                return real(target)

            monkeypatch.setattr(_writers, "_mkstemp", refuse)
        result = run_survey([survey], out, jobs=1)  # no resume: every image is written again
    finally:
        monkeypatch.undo()
        folder.chmod(0o755)
    assert result.n_ok == 2 and [(f.image, f.stage) for f in result.failures] == [(paths[1].name, "write")]
    assert "make the folder writable" in result.failures[0].message
    assert _csv(out / "failures.csv")[0]["stage"] == "write"


# --------------------------------------------------------------------------- run.log lines


def test_a_file_name_cannot_forge_a_run_log_line(tmp_path):
    survey = tmp_path / "survey"
    paths = make_survey(survey, 1, tiff=False)
    forged = "x\n2026-01-01T00:00:00Z wall_99.npy: ok\x1b[2K.npy"
    (survey / forged).write_bytes(b"not an array")
    out = tmp_path / "out"
    result = run_survey([survey], out, jobs=1)
    assert [f.image for f in result.failures] == [forged]  # the data keep the name as it is
    lines = (out / "run.log").read_text(encoding="utf-8").splitlines()
    assert not any(line.split(" ", 1)[1].startswith("wall_99.npy") for line in lines)
    assert any("x\\n2026-01-01T00:00:00Z wall_99.npy: ok\\x1b[2K.npy: failed at read" in line for line in lines)
    assert len(lines) == 4  # start, two images, done
    found = scan_inputs([paths[0], survey / "survey.toml"])
    assert [(s.file, s.reason) for s in found.skipped] == [
        ("survey.toml", "metadata file, not an image (read with the images of its folder)")
    ]
