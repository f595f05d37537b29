"""Package-level contract: version, error hierarchy, lazy public names, import hygiene."""

from __future__ import annotations

import ast
import subprocess
import sys
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


def test_every_lazy_public_name_resolves_to_its_module_object():
    import irseg.batch

    for name in irseg.__all__:
        assert getattr(irseg, name) is not None, name
    assert irseg.anomaly_table is irseg.batch.anomaly_table
    assert irseg.SurveyAnomaly is irseg.batch.SurveyAnomaly and irseg.ImageRecord is irseg.batch.ImageRecord


def test_unknown_public_name_raises_attribute_error():
    with pytest.raises(AttributeError, match="no_such_thing"):
        irseg.no_such_thing  # noqa: B018


# --------------------------------------------------------------------------- import hygiene

PACKAGE = Path(irseg.__file__).parent


def _modules() -> dict[str, tuple[Path, bool]]:
    """Every module of irseg: dotted name -> (file, is a package)."""
    found = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
        is_package = parts[-1] == "__init__"
        found[".".join(parts[:-1] if is_package else parts)] = (path, is_package)
    return found


def _imported(name: str, is_package: bool, node: ast.Import | ast.ImportFrom, modules) -> list[str]:
    """The irseg modules an import statement loads (relative imports resolved as Python does)."""
    if isinstance(node, ast.Import):
        targets = [alias.name for alias in node.names]
    else:
        if node.level:
            base = name.split(".") if is_package else name.split(".")[:-1]
            base = base[: len(base) - (node.level - 1)]
            module = ".".join([*base, node.module] if node.module else base)
        else:
            module = node.module or ""
        # ``from pkg import sub`` loads the submodule pkg.sub when there is one
        targets = [f"{module}.{a.name}" if f"{module}.{a.name}" in modules else module for a in node.names]
    return [t for t in targets if t == "irseg" or t.startswith("irseg.")]


def import_graph() -> dict[str, set[str]]:
    """Module -> the irseg modules it imports, at module level or inside functions.

    Importing ``a.b.c`` runs ``a/__init__`` and ``a/b/__init__`` first, so the packages
    above the target count too, except those the importer itself sits in (already loading).
    """
    modules = _modules()
    graph: dict[str, set[str]] = {}
    for name, (path, is_package) in modules.items():
        edges: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"), filename=str(path))):
            if not isinstance(node, (ast.Import, ast.ImportFrom)):
                continue
            for target in _imported(name, is_package, node, modules):
                while target not in modules:  # an attribute, not a module: its module
                    target = target.rpartition(".")[0]
                parts = target.split(".")
                for k in range(1, len(parts) + 1):
                    loaded = ".".join(parts[:k])
                    if not (name == loaded or name.startswith(loaded + ".")):
                        edges.add(loaded)
        graph[name] = edges
    return graph


def find_cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """One cycle per back edge found by a depth-first search (each as a closed path)."""
    state: dict[str, int] = {}
    stack: list[str] = []
    cycles: list[list[str]] = []

    def visit(node: str) -> None:
        state[node] = 1
        stack.append(node)
        for succ in sorted(graph.get(node, ())):
            if state.get(succ) == 1:
                cycles.append([*stack[stack.index(succ):], succ])
            elif succ not in state:
                visit(succ)
        stack.pop()
        state[node] = 2

    for node in sorted(graph):
        if node not in state:
            visit(node)
    return cycles


def test_the_cycle_finder_finds_a_planted_cycle():
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert find_cycles(graph) == [["a", "b", "c", "a"]]
    assert find_cycles({"a": {"b"}, "b": set()}) == []


def test_import_graph_resolves_relative_and_function_level_imports():
    graph = import_graph()
    assert "irseg.batch._records" in graph["irseg.batch._worker"]  # from ._records import ... (module level)
    assert "irseg.pipeline" in graph["irseg.batch._worker"]  # from ..pipeline import ... (inside run_task)
    assert "irseg.report" in graph["irseg.batch._records"]  # from ..report._table: the package loads first


def test_no_import_cycles_between_irseg_modules():
    cycles = find_cycles(import_graph())
    assert not cycles, "import cycles: " + "; ".join(" -> ".join(c) for c in cycles)


def test_importing_the_report_loads_neither_opencv_nor_the_stages():
    code = (
        "import irseg.report, sys; "
        "print('cv2' in sys.modules, "
        "any(m.startswith(('irseg.analysis', 'irseg.segmentation', 'irseg.render')) for m in sys.modules))"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True)
    assert proc.stdout.split() == ["False", "False"]


def test_no_module_is_over_500_lines():
    # the project's size limit (issue 10: aim for 400 lines, never over 500)
    long = {
        path.relative_to(PACKAGE.parent).as_posix(): n
        for path, _ in _modules().values()
        if (n := len(path.read_text(encoding="utf-8").splitlines())) > 500
    }
    assert long == {}


def test_no_function_is_over_150_lines():
    # the project's size limit for one function (issue 10); counted from `def` to its last line
    long = {}
    for path, _ in _modules().values():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                n = node.end_lineno - node.lineno + 1
                if n > 150:
                    long[f"{path.relative_to(PACKAGE.parent).as_posix()}:{node.name}"] = n
    assert long == {}


def test_the_top_of_the_package_holds_only_the_agreed_names():
    allowed_modules = {"__init__", "__main__", "_version", "errors", "types", "vocabulary", "_shared",
                       "_defaults", "metadata", "pipeline"}
    allowed_packages = {"metadata", "io", "radiometry", "segmentation", "analysis", "render", "report",
                        "batch", "cli", "scenes", "controls", "repairs", "pairs"}
    modules = {p.stem for p in PACKAGE.glob("*.py")}
    packages = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").is_file()}
    assert modules <= allowed_modules, sorted(modules - allowed_modules)
    assert packages <= allowed_packages, sorted(packages - allowed_packages)
    assert not [p.name for p in PACKAGE.iterdir() if p.is_dir() and p.name != "__pycache__"
                and not (p / "__init__.py").is_file()]
