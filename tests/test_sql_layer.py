"""Every statement bitsift sends for data is built in the SQL layer (sqlbuild.py + templates),
and the metrics of counts already in the client follow the ranking statement's formulas.

Contingency tables here are invented for these checks.
"""

from __future__ import annotations

import ast
import itertools
from pathlib import Path

import duckdb
import numpy as np
import pytest

import bitsift
from bitsift.run.metrics import table_row

PACKAGE = Path(bitsift.__file__).resolve().parent

#: Modules allowed to build sqlglot trees outside the SQL layer, and why.
OWN_STATEMENTS = {
    "sql/sqlbuild.py": "the SQL layer itself",
    "sql/sqlstatements.py": "the SQL layer itself",
    "sql/history_select.py": "the SQL layer itself: the ranking as history rows (model files)",
    "jobs/history_script.py": "the history table's script (DDL + INSERT), written, never sent",
    "engines/sources.py": "opening a source: table names and DuckDB's file readers on its session",
    "jobs/history.py": "the history store's own tables, written (the SQL layer sends one SELECT)",
    "jobs/history_duckdb.py": "the history store's own tables in a DuckDB file, written and read",
    "spec/predicate.py": "re-quotes the column names of the user's --where it parses",
    "sql/counts_sql.py": "the SQL layer itself (stored counts)",
    "sql/counts_paste.py": "the SQL layer itself (stored counts, pasted)",
    "jobs/counts_store.py": "the counts store's own tables in a DuckDB file, written and read",
}


def _sql_built(path: Path) -> list[str]:
    """Where ``path`` builds SQL: sqlglot node constructors (``exp.<name>(...)``), private
    helpers of sqlbuild imported, SQL templates rendered."""
    found = []
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                and isinstance(node.func.value, ast.Name) and node.func.value.id == "exp"):
            found.append(f"line {node.lineno}: exp.{node.func.attr}()")
        elif isinstance(node, ast.ImportFrom) and node.module == "bitsift.sql.sqlbuild":
            found += [f"line {node.lineno}: imports sqlbuild.{a.name}"
                      for a in node.names if a.name.startswith("_")]
        elif (isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
              and node.func.id == "render" and node.args
              and isinstance(node.args[0], ast.Constant)
              and str(node.args[0].value).endswith(".sql.j2")):
            found.append(f"line {node.lineno}: renders {node.args[0].value}")
    return found


def test_only_the_sql_layer_builds_sql() -> None:
    outside = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        relative = path.relative_to(PACKAGE).as_posix()
        if relative in OWN_STATEMENTS or relative.startswith("engines/"):
            continue  # engines build their own session statements (probes, cancel, views)
        built = _sql_built(path)
        if built:
            outside[relative] = built
    assert outside == {}


#: A 4-valued attribute (one value seen in one class only) and 3 classes.
TABLE = [[30, 5, 1], [2, 40, 9], [0, 0, 17], [11, 12, 13]]


def _ranked_by_the_statement(table: list[list[int]]) -> dict[str, float]:
    """The attribute's row of the ranking statement over rows expanding ``table``."""
    connection = duckdb.connect()
    rows = [(f"v{i}", f"c{j}") for i, counts in enumerate(table) for j, n in enumerate(counts)
            for _ in range(n)]
    connection.execute("CREATE TABLE t (x VARCHAR, y VARCHAR)")
    connection.executemany("INSERT INTO t VALUES (?, ?)", rows)
    try:
        statement = bitsift.statement(connection, target="y", table="t")
        cursor = connection.execute(statement)
        names = [d[0] for d in cursor.description]
        records = [dict(zip(names, r, strict=True)) for r in cursor.fetchall()]
    finally:
        connection.close()
    (row,) = [r for r in records if r["attribute_index"] == 1]
    return row


def test_table_row_equals_the_ranking_statement() -> None:
    want = _ranked_by_the_statement(TABLE)
    got = table_row(TABLE)
    assert got is not None
    assert got.keys() <= want.keys()
    for key, value in got.items():
        assert abs(value - want[key]) <= 1e-12 * max(1.0, abs(want[key])), key


def test_table_row_is_the_same_in_any_order() -> None:
    # Exact sums: the order the values and classes arrive in changes no bit.
    first = table_row(TABLE)
    for values in itertools.permutations(range(len(TABLE))):
        for classes in itertools.permutations(range(3)):
            shuffled = np.asarray(TABLE)[list(values)][:, list(classes)]
            assert table_row(shuffled) == first


@pytest.mark.parametrize("table", [[[0, 0]], [[5, 0], [0, 0]], [[3, 4]]])
def test_table_row_of_degenerate_tables(table: list[list[int]]) -> None:
    row = table_row(table)
    if sum(map(sum, table)) == 0:
        assert row is None  # no row counted: the statement returns no row either
        return
    assert row is not None
    assert (row["information_gain"], row["gain_ratio"], row["dof"]) == (0.0, 0.0, 0)
    assert row["distinct_values"] == 1
