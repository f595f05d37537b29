"""What the command line prints: names escaped, settings as flags, bounded --set values.

Issue 15 items 13, 17 and 19. Check values:
- Python's ``repr`` escapes of control characters (``\\n``, ``\\r``, ``\\t``, ``\\xNN``) and
  ``str.isprintable`` (Python Language Reference, "String and Bytes literals"; Library
  Reference, ``str.isprintable``) [CP].
- ESC (0x1B) introduces the terminal control sequences of ECMA-48, 5th edition (1991),
  clause 5.3; U+202E is the RIGHT-TO-LEFT OVERRIDE of Unicode UAX #9 [M].
- ``os.fsdecode`` maps an undecodable byte 0xNN of a file name to U+DCNN (PEP 383) [CP].
"""

from __future__ import annotations

import os
import signal
import sys

import pytest
from click.testing import CliRunner
from tests.support.survey import make_survey

from irseg._shared import escape_name
from irseg.cli._exit import describe
from irseg.cli.main import cli
from irseg.cli.options import MAX_SET_NESTING, parse_set


def _invoke(*args: str):
    return CliRunner().invoke(cli, ["segment", *args], catch_exceptions=False)


@pytest.mark.parametrize(
    "name, shown",
    [
        ("wall.npy", "wall.npy"),  # printable text is unchanged
        ("a\nb.npy", "a\\nb.npy"),
        ("a\rb\tc", "a\\rb\\tc"),
        ("\x1b[32mok\x1b[0m", "\\x1b[32mok\\x1b[0m"),  # ECMA-48 ESC sequences
        ("x\u202eypt.exe", "x\\u202eypt.exe"),  # UAX #9 bidi override
        ("café 漢字.npy", "café 漢字.npy"),  # printable non-ASCII stays readable
        (os.fsdecode(b"caf\xe9.npy"), "caf\\xe9.npy"),  # PEP 383: the original byte
        ("C:\\surveys\\a.npy", "C:\\surveys\\a.npy"),  # backslashes of Windows paths stay
    ],
)
def test_escape_name(name, shown):
    assert escape_name(name) == shown
    assert escape_name(name).isprintable()


@pytest.mark.skipif(sys.platform == "win32", reason="newlines in file names are a POSIX matter")
def test_a_failing_name_with_control_characters_cannot_forge_a_line(tmp_path):
    # Issue 15 item 13: a name holding a newline printed raw starts a new line that can
    # look like irseg's own "<name>: ok" or an error of another file.
    survey = tmp_path / "s"
    make_survey(survey, 1)
    forged = "x.npy\nwall_00.npy: ok\x1b[2K"
    (survey / f"{forged}.csv").write_text("not,a,thermogram\n", encoding="utf-8")
    result = _invoke(str(survey), "-o", str(tmp_path / "out"), "-j", "1")
    assert result.exit_code == 3, result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("x.npy\\nwall_00.npy: ok\\x1b[2K.csv: failed at read")
    assert "\x1b" not in result.stderr and "\r" not in result.stderr


def test_describe_maps_settings_to_flags_and_escapes():
    # "the X setting" -> the option; a bare underscored setting name -> the flag (the CSV
    # reader's "raise max_pixels"); words that are also plain English are left alone.
    assert describe("raise the max_pixels setting if genuine") == "raise the option --max-pixels if genuine"
    assert describe("too large; raise max_pixels if the matrix is genuine") == (
        "too large; raise --max-pixels if the matrix is genuine")
    assert describe("the reader failed; jobs done") == "the reader failed; jobs done"
    assert describe("bad\nname.tif: corrupt") == "bad\\nname.tif: corrupt"


def test_an_unexpected_error_message_is_one_escaped_line(tmp_path, monkeypatch):
    import irseg.batch

    def broken(*args, **kwargs):
        raise RuntimeError("line one\nline two " + "x" * 1000)

    monkeypatch.setattr(irseg.batch, "run_survey", broken)
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"))
    assert result.exit_code == 1
    (line,) = result.stderr.splitlines()
    assert "line one\\nline two" in line and len(line) < 500


def test_deeply_nested_set_value_is_a_usage_error_of_one_line(tmp_path):
    # Issue 15 item 17: "--set camera.band_um=[[[..." must not reach the TOML parser's
    # recursion limit nor print the whole value.
    make_survey(tmp_path / "s", 1)
    for value in ("[" * 100_000, "[" * 400 + "]" * 400, "[8.0, 14"):
        result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "--set", f"camera.band_um={value}")
        assert result.exit_code == 2, result.output
        assert "Traceback" not in result.stderr
        error = [line for line in result.stderr.splitlines() if line.startswith("Error:")]
        assert len(error) == 1 and len(error[0]) < 300 and "camera.band_um" in error[0]


def test_parse_set_bounds_structured_values():
    assert parse_set("camera.band_um=[8.0, 14.0]") == ("camera", "band_um", [8.0, 14.0])
    nested = "[" * MAX_SET_NESTING + "1" + "]" * MAX_SET_NESTING
    assert parse_set(f"a.b={nested}")[2] is not None  # the limit itself is accepted
    assert parse_set('surface.view="[[[["') == ("surface", "view", "[[[[")  # brackets inside a string
    assert parse_set("surface.view=exterior") == ("surface", "view", "exterior")  # bare text stays text


def test_in_process_runs_leave_the_callers_signal_handlers_alone(tmp_path):
    # An embedding program or a test runner keeps its Ctrl-C and SIGTERM handling after the
    # command line ran in its process (the CLI only ignores late signals as its own program).
    before = (signal.getsignal(signal.SIGINT), signal.getsignal(signal.SIGTERM))
    make_survey(tmp_path / "s", 1)
    assert _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-j", "1").exit_code == 0
    assert CliRunner().invoke(cli, ["segment", "--help"]).exit_code == 0
    assert (signal.getsignal(signal.SIGINT), signal.getsignal(signal.SIGTERM)) == before


def test_the_reader_names_of_the_command_line_match_irseg_io():
    # cli/segment.py keeps a copy so that the command line starts without NumPy
    from irseg.cli.segment import READERS
    from irseg.io import list_readers

    assert list(READERS) == list_readers()


def test_the_command_line_starts_without_numpy():
    import subprocess

    code = "import sys, irseg.cli.main; print('numpy' in sys.modules)"
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.stdout.strip() == "False", proc.stderr


def test_a_400_digit_integer_is_a_one_line_error_not_an_unexpected_one(tmp_path):
    # Issue 15 item 17: float() of a 400-digit TOML integer raised OverflowError, printed as
    # "unexpected OverflowError"; the metadata stage now names the key (its message, any wording).
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "--set", "segment.min_step_k=" + "1" * 400)
    assert result.exit_code == 1, result.output
    (line,) = result.stderr.splitlines()
    assert line.startswith("Error: ") and "min_step_k" in line
    assert "unexpected" not in line and "Traceback" not in result.stderr and len(line) < 400
