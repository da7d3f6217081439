"""The session (issue 17): one opened source and one resolved spec per command, engines used
only through their base class, one helper per job.

Test data is invented here (small DuckDB tables built from ``range``).
"""

from __future__ import annotations

import ast
from pathlib import Path

import duckdb
import pytest

from bitsift.engines.base import Engine
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.sources import open_source

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "src" / "bitsift"


@pytest.fixture
def small_db(tmp_path: Path) -> Path:
    """A DuckDB file: t(a, b, n, s, y) of 240 invented rows."""
    path = tmp_path / "small.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 4 AS a, i % 3 AS b, (i * 7) % 50 + 0.5 AS n, "
                    "i % 2 AS s, (i % 4 < 2) AS y FROM range(240) r(i)")
    return path


# --- engines: run mode uses the base class only ---------------------------------------------------


def _bitsift_imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("bitsift"):
            found.add(node.module)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.startswith("bitsift"))
    return found


def test_run_mode_knows_no_concrete_engine() -> None:
    engines = {m for m in _bitsift_imports(PACKAGE / "concurrent.py")
               if m.startswith("bitsift.engines")}
    assert engines == {"bitsift.engines.base"}


def test_a_sibling_session_logs_into_its_engines_statements(small_db: Path) -> None:
    opened = open_source(str(small_db), "t")
    with opened.engine as engine:
        assert engine.can_open_siblings()
        with engine.open_sibling(None) as sibling:
            assert isinstance(sibling, Engine) and sibling is not engine
            sibling.fetch("SELECT 42 AS answer")
        assert any("42" in s for s in engine.statements)


def test_a_callers_connection_gets_no_sibling() -> None:
    con = duckdb.connect()
    engine = DuckDBEngine.wrap(con)
    assert not engine.owned and not engine.can_open_siblings()
    with pytest.raises(TypeError):
        Engine._new_session(engine)


def test_one_helper_for_an_errors_first_line() -> None:
    """The first line of an error's message is taken by errors.first_line only (there were
    five private copies of it)."""
    copies = []
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.FunctionDef) and "splitlines()[0]" in ast.unparse(node) \
                    and "type(error).__name__" in ast.unparse(node):
                copies.append(f"{path.relative_to(PACKAGE)}:{node.name}")
    assert copies == ["errors.py:first_line"]


def test_parts_are_renumbered_in_one_place() -> None:
    """Rows of a ranking computed in parts get their attribute numbers back in
    parts.merge_parts only (api, concurrent and quantile_counts each had a copy)."""
    renumbering = []
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if not isinstance(node, ast.FunctionDef):
                continue
            writes = [n for n in ast.walk(node)
                      if isinstance(n, ast.Dict | ast.Subscript)
                      and "'attribute_index'" in ast.unparse(n)
                      and (isinstance(n, ast.Dict) or isinstance(n.ctx, ast.Store))]
            if writes:
                renumbering.append(f"{path.relative_to(PACKAGE)}:{node.name}")
    assert renumbering == ["parts.py:merge_parts"]


def test_one_session_runs_the_parts_serially(small_db: Path, monkeypatch: pytest.MonkeyPatch,
                                             ) -> None:
    """On one session (a caller's connection) a table wider than a statement's share is ranked
    in parts one after another, with the numbers of the one-statement ranking."""
    import bitsift
    from bitsift import api

    con = duckdb.connect(str(small_db), read_only=True)
    whole = bitsift.rank(con, target="y", table="t")
    monkeypatch.setattr(api, "MAX_ATTRIBUTES_PER_STATEMENT", 1)
    parts = bitsift.rank(con, target="y", table="t")
    ranking_statements = [s for s in parts.statements if "information_gain" in s]
    assert len(ranking_statements) >= 4
    assert [(a.attribute, a.information_gain, a.cuts) for a in parts.attributes] == [
        (a.attribute, a.information_gain, a.cuts) for a in whole.attributes]
    assert (parts.rows, parts.classes) == (whole.rows, whole.classes)
