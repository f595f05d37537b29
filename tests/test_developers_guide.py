"""The contributor guide describes the house as built: every module of the package is listed in it."""

from __future__ import annotations

from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GUIDE = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")


def _architecture_block() -> str:
    start = GUIDE.index("## Architecture")
    return GUIDE[start:GUIDE.index("### Data flow", start)]


def test_every_module_is_listed_in_the_architecture_section():
    block = _architecture_block()
    missing = []
    for path in sorted((ROOT / "irseg").rglob("*.py")):
        rel = path.relative_to(ROOT / "irseg")
        if rel.name == "__init__.py":
            name = f"{rel.parent.as_posix()}/"  # a subpackage is listed by its folder
            if rel.parent == Path("."):
                name = "__init__.py"
        else:
            name = rel.name
        if name not in block:
            missing.append(rel.as_posix())
    assert missing == []


def test_every_listed_file_exists():
    block = _architecture_block()
    listed = {word for line in block.splitlines() for word in line.split() if word.endswith(".py")}
    existing = {p.name for p in (ROOT / "irseg").rglob("*.py")}
    assert listed - existing == set()


def test_the_commands_named_in_the_guide_exist():
    from click.testing import CliRunner

    from irseg.cli.main import cli

    for command in (["segment", "--help"], ["scene", "sample", "--help"], ["scene", "make", "--help"]):
        assert CliRunner().invoke(cli, command).exit_code == 0, command
