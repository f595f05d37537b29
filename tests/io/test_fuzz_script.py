"""Smoke run of benchmarks/fuzz_readers.py: a few hundred generated inputs, none may escape irseg's errors."""

from __future__ import annotations

import importlib.util
from pathlib import Path


SCRIPT = Path(__file__).resolve().parents[2] / "benchmarks" / "fuzz_readers.py"


def test_fuzz_script_small_run(capsys):
    assert SCRIPT.is_file(), f"{SCRIPT} is missing: the fuzz script is part of the repository"
    spec = importlib.util.spec_from_file_location("fuzz_readers", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    status = module.main(["--n", "60", "--seed", "5"])
    out = capsys.readouterr().out
    assert status == 0, out
    assert "unexpected exceptions: 0" in out
    for reader in ("tiff", "png", "npy", "csv"):
        line = next(s for s in out.splitlines() if s.startswith(reader))
        assert int(line.split()[1]) == 60
