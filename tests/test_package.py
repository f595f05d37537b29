"""Package-level contract: version, error hierarchy, lazy public names."""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

import irseg
from irseg import errors


def test_version_is_pep440_and_matches_pyproject_dynamic_attr():
    pyproject = tomllib.loads((Path(__file__).parents[1] / "pyproject.toml").read_text())
    assert pyproject["tool"]["setuptools"]["dynamic"]["version"]["attr"] == "irseg._version.__version__"
    parts = irseg.__version__.split(".")
    assert len(parts) == 3 and all(p.isdigit() for p in parts)


@pytest.mark.parametrize(
    "cls, builtin",
    [
        (errors.ConfigError, ValueError),
        (errors.MetadataError, ValueError),
        (errors.InputError, OSError),
        (errors.UnsupportedFormatError, OSError),
        (errors.CalibrationError, ValueError),
        (errors.SolverError, RuntimeError),
        (errors.OutputError, OSError),
    ],
)
def test_every_error_has_one_root_and_its_builtin(cls, builtin):
    assert issubclass(cls, errors.IrsegError)
    assert issubclass(cls, builtin)


def test_unknown_public_name_raises_attribute_error():
    with pytest.raises(AttributeError, match="no_such_thing"):
        irseg.no_such_thing  # noqa: B018
