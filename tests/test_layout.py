"""The package's module layout: no import circle, and the command starts as a module.

Built from the source with :mod:`ast` (every ``import bitsift.x`` / ``from bitsift[.x] import``,
at any depth, deferred imports included: a circle broken by importing inside a function is
still a circle), so the test does not depend on the order modules happen to be imported in.
"""

from __future__ import annotations

import ast
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "src" / "bitsift"


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _imported(tree: ast.AST, known: set[str]) -> set[str]:
    """The bitsift modules a module's source imports (``from bitsift import x`` names the
    submodule ``bitsift.x`` when there is one, else the package)."""
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name in known)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module not in known:
                continue
            submodules = {f"{node.module}.{a.name}" for a in node.names} & known
            found.update(submodules or {node.module})
    return found


def import_graph() -> dict[str, set[str]]:
    """bitsift module -> the bitsift modules it imports (the package itself left out: its
    ``__init__`` re-exports the public API and so imports from everything)."""
    paths = {_module_name(p): p for p in PACKAGE.rglob("*.py")}
    known = set(paths)
    graph = {}
    for name, path in paths.items():
        if name == "bitsift":
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        graph[name] = _imported(tree, known) - {name, "bitsift"}
    return graph


def find_cycle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import circle of ``graph`` (its modules, the first repeated at the end), or None."""
    state: dict[str, str] = {}
    path: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = "open"
        path.append(node)
        for nxt in sorted(graph.get(node, ())):
            if state.get(nxt) == "open":
                return path[path.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        path.pop()
        state[node] = "done"
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_find_cycle_sees_a_circle_and_a_clean_graph() -> None:
    assert find_cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert find_cycle({"a": {"b", "c"}, "b": {"c"}, "c": set()}) is None


def test_the_import_graph_covers_the_modules_it_should() -> None:
    graph = import_graph()
    assert "bitsift.run.api" in graph and "bitsift.engines.base" in graph
    assert "bitsift.run.concurrent" in graph["bitsift.run.api"] or any(
        "bitsift.run.concurrent" in deps for deps in graph.values())


def test_no_import_circle_between_bitsift_modules() -> None:
    cycle = find_cycle(import_graph())
    assert cycle is None, "import circle: " + " -> ".join(cycle or [])


#: The subpackages in pipeline order: a module may import from its own stage or an earlier one,
#: never a later one (the CLI sits on top of everything, the spec at the bottom).
PIPELINE = ("spec", "sql", "engines", "run", "analysis", "output", "jobs", "cli")
#: Small shared modules at the package's top level, below every stage: they import only each
#: other.
LEAVES = ("errors", "version", "names", "jsonout", "numformat")


def stage(module: str) -> int:
    """``module``'s place in the pipeline: -1 for a top-level leaf, else its stage's index."""
    parts = module.split(".")
    if len(parts) == 2 and parts[1] in LEAVES:
        return -1
    assert len(parts) >= 2 and parts[1] in PIPELINE, f"{module} is in no pipeline stage"
    return PIPELINE.index(parts[1])


def upward_imports(graph: dict[str, set[str]]) -> list[str]:
    """Every import of ``graph`` that goes up the pipeline (to a later stage), sorted."""
    return sorted(f"{module} -> {imported}" for module, deps in graph.items()
                  for imported in deps if stage(imported) > stage(module))


def test_upward_imports_sees_a_stage_importing_a_later_one() -> None:
    graph = {"bitsift.spec.x": {"bitsift.cli.y", "bitsift.errors"},
             "bitsift.errors": {"bitsift.names"}, "bitsift.names": set(),
             "bitsift.cli.y": {"bitsift.spec.x"}}
    assert upward_imports(graph) == ["bitsift.spec.x -> bitsift.cli.y"]
    assert upward_imports({"bitsift.errors": {"bitsift.run.api"}}) == [
        "bitsift.errors -> bitsift.run.api"]


def test_imports_only_go_down_the_pipeline() -> None:
    assert upward_imports(import_graph()) == []


def test_every_module_imports_on_its_own() -> None:
    """Each module imported first, in a fresh interpreter: a circle shows as an ImportError
    only when the circle's modules are entered in a particular order."""
    names = sorted(import_graph())
    code = ("import importlib, sys\n"
            "for name in sys.argv[1:]:\n"
            "    for loaded in [m for m in sys.modules if m.startswith('bitsift')]:\n"
            "        del sys.modules[loaded]\n"
            "    importlib.import_module(name)\n")
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
    done = subprocess.run([sys.executable, "-c", code, *names], env=env, capture_output=True,
                          text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr[-2000:]


def test_python_m_bitsift_cli_help_runs() -> None:
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
    done = subprocess.run([sys.executable, "-m", "bitsift.cli", "--help"], env=env,
                          capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    assert "Usage:" in done.stdout and "rank" in done.stdout


def test_debug_flag_does_not_outlive_its_invocation(tmp_path: Path) -> None:
    """--debug lives in click's context (ctx.obj): an invocation after a --debug one in the
    same process prints no SQL."""
    import duckdb
    from click.testing import CliRunner

    from bitsift.cli import cli

    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 3 AS a, i % 2 = 0 AS y FROM range(30) r(i)")
    args = ["rank", str(path), "--table", "t", "--target", "y"]
    runner = CliRunner()
    with_debug = runner.invoke(cli, ["--debug", *args])
    assert with_debug.exit_code == 0 and "-- sent to duckdb" in with_debug.stderr
    after = runner.invoke(cli, args)
    assert after.exit_code == 0 and "-- sent to" not in after.stderr
