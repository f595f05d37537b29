"""``irseg segment``: exit codes 0/1/2/3, messages naming the file and the fix (click.testing)."""

from __future__ import annotations

import csv
import os
import subprocess
import sys

import pytest
from click.testing import CliRunner
from tests.support.survey import make_survey

from irseg.cli.main import cli
from irseg.errors import IrsegError
from irseg.cli.options import parse_set
from irseg.vocabulary import CAUTION_LINE


def _invoke(*args: str):
    return CliRunner().invoke(cli, ["segment", *args], catch_exceptions=False)


def test_all_good_exits_0_with_summary_and_caution(tmp_path):
    make_survey(tmp_path / "s", 2)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-j", "1")
    assert result.exit_code == 0, result.output
    assert "2 of 2 images ok" in result.stdout
    assert "kWh/year" in result.stdout and "report.html" in result.stdout
    assert CAUTION_LINE in result.stdout and "estimates" in CAUTION_LINE
    quiet = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-j", "1", "-q", "--resume")
    assert quiet.exit_code == 0 and quiet.stdout == ""


def test_some_failed_exits_3_and_names_the_file(tmp_path):
    make_survey(tmp_path / "s", 2)
    (tmp_path / "s" / "broken.tif").write_bytes(b"II*\x00garbage")
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-j", "1")
    assert result.exit_code == 3
    line = next(l for l in result.stderr.splitlines() if l.startswith("broken.tif"))
    assert "failed at read" in line
    assert "Traceback" not in result.stderr
    assert "1 failed" in result.stdout and "failures.csv" in result.stdout
    with open(tmp_path / "out" / "failures.csv", newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert [(r["file"], r["stage"]) for r in rows] == [("broken.tif", "read")]
    verbose = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out2"), "-j", "1", "-v")
    assert verbose.exit_code == 3 and "Traceback" in verbose.stderr


@pytest.mark.parametrize(
    "args, needle",
    [
        ([], "Missing option '-o'"),
        (["-o", "OUT", "-j", "0"], "-j"),
        (["-o", "OUT", "--set", "emissivity0.9"], "section.key=value"),
        (["-o", "OUT", "--view", "sideways"], "--view"),
        (["-o", "OUT", "--reader", "jpeg"], "--reader"),
    ],
)
def test_usage_errors_exit_2(tmp_path, args, needle):
    make_survey(tmp_path / "s", 1)
    args = [a.replace("OUT", str(tmp_path / "out")) for a in args]
    result = _invoke(str(tmp_path / "s"), *args)
    assert result.exit_code == 2
    assert needle in result.stderr


def test_missing_input_exits_2_naming_it(tmp_path):
    result = _invoke(str(tmp_path / "nowhere"), "-o", str(tmp_path / "out"))
    assert result.exit_code == 2 and "nowhere" in result.stderr and "does not exist" in result.stderr


def test_bad_override_exits_1_with_key_and_fix(tmp_path):
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "--emissivity", "1.7")
    assert result.exit_code == 1
    (line,) = result.stderr.strip().splitlines()
    assert line.startswith("Error: ") and "emissivity" in line and "1.7" in line and "(0, 1]" in line
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "--set", "surface.emisivity=0.9")
    assert result.exit_code == 1 and "did you mean 'emissivity'" in result.stderr


def test_unwritable_out_exits_1_with_message(tmp_path):
    make_survey(tmp_path / "s", 1)
    blocker = tmp_path / "a_file"
    blocker.write_text("x")
    result = _invoke(str(tmp_path / "s"), "-o", str(blocker))
    assert result.exit_code == 1
    assert result.stderr.startswith("Error: ") and "a_file" in result.stderr and "-o" in result.stderr
    if os.geteuid() != 0:  # root ignores permissions
        ro = tmp_path / "ro"
        ro.mkdir()
        ro.chmod(0o500)
        try:
            result = _invoke(str(tmp_path / "s"), "-o", str(ro / "out"))
            assert result.exit_code == 1 and ("writable" in result.stderr or "cannot create" in result.stderr)
        finally:
            ro.chmod(0o700)


def test_unexpected_exception_is_short_and_suggests_v(tmp_path, monkeypatch):
    import irseg.batch

    def broken(*args, **kwargs):
        raise RuntimeError("something internal")

    monkeypatch.setattr(irseg.batch, "run_survey", broken)
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"))
    assert result.exit_code == 1
    assert "RuntimeError: something internal" in result.stderr and "-v" in result.stderr
    assert "Traceback" not in result.stderr
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-v")
    assert result.exit_code == 1 and "Traceback" in result.stderr


def test_options_become_overrides(tmp_path, monkeypatch):
    import irseg.batch

    seen = {}

    def capture(inputs, out_dir, **kwargs):
        seen.update(kwargs)
        raise IrsegError("stop here")

    monkeypatch.setattr(irseg.batch, "run_survey", capture)
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "--inside-c", "21", "--wind-m-s", "2",
                     "--set", "camera.band_um=[8.0, 14.0]", "--set", "surface.view=roof", "--min-step-k", "0.3",
                     "--cmap", "magma", "--max-pixels", "5000", "-j", "2")
    assert result.exit_code == 1 and "Error: stop here" in result.stderr
    assert seen["overrides"] == {
        "air": {"inside_c": 21.0, "wind_m_s": 2.0},
        "camera": {"band_um": [8.0, 14.0]},
        "surface": {"view": "roof"},
        "segment": {"min_step_k": 0.3},
    }
    assert (seen["cmap"], seen["max_pixels"], seen["jobs"]) == ("magma", 5000, 2)


def test_parse_set_reads_toml_values():
    assert parse_set("analysis.seed=3") == ("analysis", "seed", 3)
    assert parse_set("surface.reflected_c = -5.5") == ("surface", "reflected_c", -5.5)
    assert parse_set("surface.view=exterior") == ("surface", "view", "exterior")
    assert parse_set('surface.view="roof"') == ("surface", "view", "roof")


def test_help_lists_the_main_options():
    result = CliRunner().invoke(cli, ["segment", "--help"])
    assert result.exit_code == 0
    for option in ("--jobs", "--resume", "--scheduler", "--set", "--fail-fast", "--max-pixels", "--cmap",
                   "--emissivity", "--inside-c", "--outside-c", "--degree-days", "--frsi-limit", "-q", "-v"):
        assert option in result.output


def test_module_entry_point_runs(tmp_path):
    make_survey(tmp_path / "s", 1)
    proc = subprocess.run(
        [sys.executable, "-m", "irseg.cli.main", "segment", str(tmp_path / "s"), "-o", str(tmp_path / "out"),
         "-j", "1"],
        capture_output=True, text=True, timeout=120,
    )
    assert proc.returncode == 0, proc.stderr
    assert "1 of 1 images ok" in proc.stdout


def test_heat_text_says_what_is_missing_and_what_was_not_counted():
    from irseg.cli.segment import _heat_text

    # nothing found: nothing to estimate, and no advice to add geometry
    assert _heat_text(None, None, n_anomalies=0, n_unmeasured=0) == "no excess heat loss to estimate"
    # anomalies but no estimate at all: the line names the options that supply the inputs
    text = _heat_text(None, None, n_anomalies=3, n_unmeasured=3)
    assert "--distance-m" in text and "--inside-c" in text
    # partial: units on both figures and the count that the sums skip
    text = _heat_text(1234.4, 5678.9, n_anomalies=4, n_unmeasured=1)
    assert "1,234 W" in text and "5,679 kWh/year" in text and "1 of 4 anomalies" in text
    assert "kWh/year n/a" in _heat_text(10.0, None, n_anomalies=1, n_unmeasured=0)


def test_a_closed_output_pipe_stops_quietly(tmp_path):
    # `irseg segment ... | head -1`: once the reader has gone (here at once), no "unexpected BrokenPipeError"
    make_survey(tmp_path / "s", 1)
    proc = subprocess.run(
        f'"{sys.executable}" -m irseg segment "{tmp_path / "s"}" -o "{tmp_path / "out"}" -j 1 | true',
        shell=True, capture_output=True, text=True, timeout=120,
    )
    assert "BrokenPipe" not in proc.stderr and "Traceback" not in proc.stderr, proc.stderr
    assert (tmp_path / "out" / "anomalies.csv").is_file()


def test_the_summary_line_gives_the_same_defect_figures_as_the_report(tmp_path):
    # the command line and the report's first page sum the same anomalies (probable defects; framing
    # members expected in the construction and anomalies seen again under pressure left out), so a planner
    # never sees two totals
    import json
    import re
    from pathlib import Path

    sample = Path(__file__).resolve().parents[2] / "sample_images"
    result = _invoke(str(sample), "-o", str(tmp_path / "out"), "-j", "1")
    assert result.exit_code == 0, result.output
    defects = json.loads((tmp_path / "out" / "summary.json").read_text(encoding="utf-8"))["defects"]
    watts = f"{defects['excess_w']:,.0f} W"
    assert defects["n_expected"] > 0 and defects["n_repeated"] > 0  # the sample has framing and a pair
    assert (f"({defects['count']} probable defects; not counted: {defects['n_expected']} framing expected in "
            f"the construction, {defects['n_repeated']} seen again under pressure)") in result.stdout
    assert f"estimated excess heat loss {watts}" in result.stdout
    page = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert re.search(rf"<strong>{defects['count']} probable defects</strong>", page)
    assert f"<strong>{watts}</strong>" in page


@pytest.mark.parametrize("value", ["abc", "5", "5,abc", "1,2,3", "25,5", "5,5", "nan,5"])
def test_a_bad_range_c_is_a_usage_error_before_any_work(tmp_path, value):
    # issue 15: a malformed --range-c exited 1 (an error of the run) after the survey was set up;
    # it is a usage error (exit 2, as click's own option checks) and nothing is written
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-j", "1", f"--range-c={value}")
    assert result.exit_code == 2, result.output
    assert "--range-c" in result.stderr and "LO" in result.stderr
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("value", ["auto", "Survey", "5,22", "-10.5,3"])
def test_good_range_c_values_pass_the_usage_check(tmp_path, value):
    make_survey(tmp_path / "s", 1)
    result = _invoke(str(tmp_path / "s"), "-o", str(tmp_path / "out"), "-j", "1", "-q", f"--range-c={value}")
    assert result.exit_code == 0, result.output
