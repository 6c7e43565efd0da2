"""The layering rules are checked, not hoped for.

Two kinds of check live here:

* a static one: every module under ``robustff/`` is parsed with :mod:`ast` and every
  robustff-internal import (top level, inside functions, under ``if TYPE_CHECKING``, absolute or
  relative) is checked against the :data:`LAYERS` table, for import cycles, and for reaching into
  another module's private names or another package's private modules;
* a run-time one: the numerical core never loads the shells (robustff.cli, robustff.tui),
  argparse, textual or matplotlib; and nothing on the ``robustff run`` path loads python-control,
  scipy.signal, textual or matplotlib (slow to import, and not needed for a batch study).
"""

from __future__ import annotations

import ast
import json
import subprocess
import sys
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE_DIR = ROOT / "robustff"
DEMO = ROOT / "cases" / "syrup-dilution.toml"

#: Layers from this one up are the shells: they may import robustff modules inside functions, which
#: keeps ``robustff --help`` and the studio's start fast. Below it an import inside a function only
#: hides a dependency (usually a cycle), so the core imports robustff modules at module level
#: (slow third-party libraries such as scipy or python-control may still be imported late).
SHELL_LAYER = 8

#: Layer of each part of the package; a module may import from its own layer or a lower number,
#: never a higher one. The order follows the flow of a study: the package face and shared
#: helpers, plant models, the case file, loop design, simulation, statistics, the studies built
#: on them (study, tune, fit share a layer: the cycle check keeps their imports one-way), the
#: result writers, and last the two shells. The longest matching prefix decides; ``robustff``
#: itself matches only exactly (the package face holds ``__version__`` and ``CAUTION``).
LAYERS: Mapping[str, int] = {
    "robustff": 0,
    "robustff.errors": 0,
    "robustff.atomic": 0,
    "robustff.jsonvalues": 0,
    "robustff.percentile": 0,
    "robustff.units": 0,
    "robustff.demo": 0,
    "robustff.plant": 1,
    "robustff.case": 2,
    "robustff.design": 3,
    "robustff.engine": 4,
    "robustff.stats": 5,
    "robustff.study": 6,
    "robustff.tune": 6,
    "robustff.fit": 6,
    "robustff.output": 7,
    "robustff.cli": 8,
    "robustff.tui": 8,
    "robustff.__main__": 8,
}

CORE_MODULES = ("robustff.engine", "robustff.study", "robustff.study.summary", "robustff.stats",
                "robustff.case.sampling", "robustff.engine.metrics", "robustff.design.tuning",
                "robustff.case")
CORE_FORBIDDEN = ("textual", "matplotlib", "control", "argparse", "rich", "robustff.cli",
                  "robustff.tui")
RUN_FORBIDDEN = ("textual", "matplotlib", "control", "scipy.signal", "robustff.tui")


# --- the static checker ----------------------------------------------------------------------

@dataclass(frozen=True)
class Source:
    """One module to check: its source text and whether it is a package ``__init__``."""

    text: str
    is_package: bool = False


@dataclass(frozen=True)
class Edge:
    """One robustff-internal import: ``importer`` imports ``names`` from module ``target``."""

    importer: str
    target: str
    names: tuple[str, ...]
    line: int
    in_function: bool = False


def package_sources(package_dir: Path = PACKAGE_DIR) -> dict[str, Source]:
    """Every module of the package on disk, keyed by its dotted name."""
    sources = {}
    for path in sorted(package_dir.rglob("*.py")):
        parts = list(path.relative_to(package_dir.parent).with_suffix("").parts)
        is_package = parts[-1] == "__init__"
        if is_package:
            parts.pop()
        sources[".".join(parts)] = Source(path.read_text(encoding="utf-8"), is_package)
    return sources


def _absolute(importer: str, source: Source, node: ast.ImportFrom) -> str:
    """The absolute module name of a (possibly relative) ``from ... import``."""
    if not node.level:
        return node.module or ""
    package = importer.split(".")
    # A relative import counts from the module's package: ``__init__`` is its own package.
    base = package if source.is_package else package[:-1]
    base = base[:len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def _internal(name: str) -> bool:
    return name == "robustff" or name.startswith("robustff.")


def _import_nodes(tree: ast.AST) -> Iterator[tuple[ast.Import | ast.ImportFrom, bool]]:
    """Every import statement in a tree, and whether it sits inside a function."""
    pending: list[tuple[ast.AST, bool]] = [(tree, False)]
    while pending:
        node, in_function = pending.pop()
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node, in_function
        inside = in_function or isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef,
                                                  ast.Lambda))
        pending.extend((child, inside) for child in ast.iter_child_nodes(node))


def imports_of(importer: str, source: Source, modules: set[str]) -> Iterator[Edge]:
    """Every robustff-internal import in one module, wherever it sits in the file."""
    found = sorted(_import_nodes(ast.parse(source.text)), key=lambda item: item[0].lineno)
    for node, in_function in found:
        if isinstance(node, ast.Import):
            for alias in node.names:
                if _internal(alias.name):
                    yield Edge(importer, alias.name, (), node.lineno, in_function)
            continue
        target = _absolute(importer, source, node)
        if not _internal(target):
            continue
        plain = []
        for alias in node.names:
            # ``from robustff.case import sampling`` imports a module, not a name.
            if f"{target}.{alias.name}" in modules:
                yield Edge(importer, f"{target}.{alias.name}", (), node.lineno, in_function)
            else:
                plain.append(alias.name)
        if plain:
            yield Edge(importer, target, tuple(plain), node.lineno, in_function)


def layer_of(module: str) -> int | None:
    """The layer of a module from :data:`LAYERS` (longest prefix), or None if not declared."""
    if module in LAYERS:
        return LAYERS[module]
    parts = module.split(".")
    for end in range(len(parts) - 1, 1, -1):
        prefix = ".".join(parts[:end])
        if prefix in LAYERS:
            return LAYERS[prefix]
    return None


def _package_of(module: str, sources: Mapping[str, Source]) -> str:
    """The package a module belongs to (a package ``__init__`` belongs to itself)."""
    source = sources.get(module)
    return module if source is not None and source.is_package else module.rpartition(".")[0]


def _is_private(name: str) -> bool:
    """``_helper`` is private; ``__all__`` and ``__version__`` are not."""
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def _private_module_owner(module: str) -> str | None:
    """For ``robustff.stats._validation``: ``robustff.stats``; None for a public module."""
    parts = module.split(".")
    for index, part in enumerate(parts):
        if _is_private(part):
            return ".".join(parts[:index])
    return None


def find_cycles(graph: Mapping[str, set[str]]) -> list[list[str]]:
    """Strongly connected groups of more than one module, or a module importing itself."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []

    def visit(start: str) -> None:
        # Iterative Tarjan: the package is small, but recursion depth should not depend on it.
        work = [(start, iter(sorted(graph.get(start, ()))))]
        index[start] = low[start] = len(index)
        stack.append(start)
        on_stack.add(start)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.get(child, ())))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                group = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.append(member)
                    if member == node:
                        break
                if len(group) > 1 or node in graph.get(node, ()):
                    groups.append(sorted(group))

    for module in sorted(graph):
        if module not in index:
            visit(module)
    return groups


def check_imports(sources: Mapping[str, Source]) -> list[str]:
    """Every breach of the layering rules in a set of modules, one readable line each."""
    modules = set(sources)
    problems = []
    graph: dict[str, set[str]] = {module: set() for module in modules}
    for importer in sorted(sources):
        for edge in imports_of(importer, sources[importer], modules):
            where = f"{importer}:{edge.line}"
            if edge.target != importer:
                graph[importer].add(edge.target)
            own, their = layer_of(importer), layer_of(edge.target)
            if own is None:
                problems.append(f"{where}: {importer} has no layer in LAYERS")
            elif their is None:
                problems.append(f"{where}: {edge.target} has no layer in LAYERS")
            elif their > own:
                problems.append(f"{where}: upward import of {edge.target} (layer {their}) "
                                f"from layer {own}")
            if edge.in_function and own is not None and own < SHELL_LAYER:
                problems.append(f"{where}: imports {edge.target} inside a function; the core "
                                "imports robustff modules at module level")
            package = _package_of(importer, sources)
            if edge.target == package and importer != package:
                problems.append(f"{where}: imports its own package facade {package}")
            owner = _private_module_owner(edge.target)
            if owner is not None and not (importer == owner or importer.startswith(owner + ".")):
                problems.append(f"{where}: imports private module {edge.target} "
                                f"from outside {owner}")
            private = [name for name in edge.names if _is_private(name)]
            if private and edge.target != importer:
                problems.append(f"{where}: imports private names {', '.join(private)} "
                                f"from {edge.target}")
    problems += [f"import cycle: {' <-> '.join(group)}" for group in find_cycles(graph)]
    return problems


def test_every_module_has_a_layer() -> None:
    sources = package_sources()
    assert len(sources) > 30  # the walk found the package, not an empty folder
    assert [module for module in sources if layer_of(module) is None] == []


def test_package_imports_follow_the_layers_without_cycles_or_private_reach() -> None:
    assert check_imports(package_sources()) == []


def test_checker_reports_an_upward_import() -> None:
    sources = {
        "robustff.plant": Source("", is_package=True),
        "robustff.plant.models": Source("def f():\n    from robustff.output.plots import draw\n"),
        "robustff.output": Source("", is_package=True),
        "robustff.output.plots": Source("from ..plant import models\n"),
    }
    problems = check_imports(sources)
    assert problems == ["robustff.plant.models:2: upward import of robustff.output.plots "
                        "(layer 7) from layer 1",
                        "robustff.plant.models:2: imports robustff.output.plots inside a "
                        "function; the core imports robustff modules at module level",
                        "import cycle: robustff.output.plots <-> robustff.plant.models"]


def test_checker_lets_the_shells_import_late_but_not_upwards() -> None:
    sources = {
        "robustff.cli": Source("def main():\n    from robustff.study import run_study\n",
                               is_package=True),
        "robustff.study": Source("def run_study():\n    import robustff.tui\n", is_package=True),
        "robustff.tui": Source("", is_package=True),
    }
    assert check_imports(sources) == [
        "robustff.study:2: upward import of robustff.tui (layer 8) from layer 6",
        "robustff.study:2: imports robustff.tui inside a function; the core imports robustff "
        "modules at module level",
    ]


def test_checker_reports_a_cycle_inside_one_layer_and_a_facade_import() -> None:
    sources = {
        "robustff.fit": Source("from robustff.fit.a import x\n", is_package=True),
        "robustff.fit.a": Source("import robustff.fit.b\nx = 1\n"),
        "robustff.fit.b": Source("def g():\n    from . import a\n"),
        "robustff.case": Source("from robustff.case.loader import load\n", is_package=True),
        "robustff.case.loader": Source("from robustff.case import Case\n"),
    }
    problems = check_imports(sources)
    assert "robustff.case.loader:1: imports its own package facade robustff.case" in problems
    assert "import cycle: robustff.fit.a <-> robustff.fit.b" in problems
    assert "import cycle: robustff.case <-> robustff.case.loader" in problems
    # The facade importing its own submodule is not a problem by itself.
    assert not any(problem.startswith("robustff.fit:") for problem in problems)


def test_checker_reports_private_names_and_private_modules() -> None:
    sources = {
        "robustff.stats": Source("", is_package=True),
        "robustff.stats._validation": Source("def check():\n    pass\n"),
        "robustff.stats.harm": Source("from robustff.stats._validation import check\n"),
        "robustff.study": Source("", is_package=True),
        "robustff.study.runner": Source("from robustff.stats._validation import check\n"
                                        "from robustff.stats.harm import _z\n"),
    }
    problems = check_imports(sources)
    assert problems == [
        "robustff.study.runner:1: imports private module robustff.stats._validation "
        "from outside robustff.stats",
        "robustff.study.runner:2: imports private names _z from robustff.stats.harm",
    ]


# --- the run-time checks ---------------------------------------------------------------------

def _loaded_after(code: str, cwd: Path) -> list[str]:
    """Names in ``sys.modules`` after running ``code`` in a fresh interpreter."""
    script = code + "\nimport json, sys\nprint(json.dumps(sorted(sys.modules)))\n"
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          cwd=cwd, timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def _offenders(loaded: list[str], forbidden: tuple[str, ...]) -> list[str]:
    return [name for name in loaded
            if any(name == bad or name.startswith(bad + ".") for bad in forbidden)]


def test_core_imports_no_shell_or_ui_library(tmp_path: Path) -> None:
    loaded = _loaded_after("\n".join(f"import {name}" for name in CORE_MODULES), tmp_path)
    assert "robustff.study" in loaded and "robustff.engine" in loaded
    assert _offenders(loaded, CORE_FORBIDDEN) == []


def test_the_offender_check_would_catch_an_import(tmp_path: Path) -> None:
    # Guard against a check that cannot fail: a known import must show up.
    loaded = _loaded_after("import robustff.cli", tmp_path)
    assert {"argparse", "robustff.cli"} <= set(_offenders(loaded, CORE_FORBIDDEN))


def test_run_command_imports_no_slow_or_ui_library(tmp_path: Path) -> None:
    code = (
        "from robustff.cli import main\n"
        f"status = main(['run', {str(DEMO)!r}, '--samples', '20', '--jobs', '1',"
        " '--out', 'out'])\n"
        "assert status == 0, status\n"
    )
    loaded = _loaded_after(code, tmp_path)
    assert (tmp_path / "out" / "summary.json").exists()
    assert "robustff.cli.run_command" in loaded and "robustff.study" in loaded
    assert _offenders(loaded, RUN_FORBIDDEN) == []


def test_test_folders_mirror_the_packages() -> None:
    """Every test folder is named after a robustff package; every test module sits in one."""
    tests_dir = ROOT / "tests"
    packages = {path.parent.name for path in PACKAGE_DIR.glob("*/__init__.py")}
    folders = {path.name for path in tests_dir.iterdir()
               if path.is_dir() and not path.name.startswith((".", "_")) and path.name != "helpers"}
    assert folders <= packages, f"test folders with no package of that name: {folders - packages}"
    loose = sorted(path.name for path in tests_dir.glob("test_*.py")
                   if path.name != "test_layering.py")
    assert not loose, f"test modules outside a package folder: {loose}"
