"""SQLite: capability entry and what its paste-ready SQL must (not) say.

No GROUPING SETS and no quantile aggregate: UNION ALL of narrow GROUP BYs and exact quantiles
from ROW_NUMBER(). Read-only through PRAGMA query_only (undone at close); --timeout through a
progress handler; LN/FLOOR registered from Python when the build lacks them.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities
from bitsift.sources import open_source

DIALECT = "sqlite"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "union_all"
    assert caps.quantile == "window"
    assert caps.read_only_statement == "PRAGMA query_only = ON"
    assert caps.read_only_reset == "PRAGMA query_only = OFF"
    assert caps.timeout_in_client and caps.register_math_functions
    assert caps.executed_in_tests


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "GROUPING" not in sql and "UNION ALL" in sql
    assert "ROW_NUMBER() OVER (ORDER BY CAST(\"score\" AS REAL) NULLS LAST)" in sql
    assert "CAST(n AS REAL)" in sql


def test_sqlite_url_maps_to_this_entry(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'x.sqlite'}"
    with sqlite3.connect(tmp_path / "x.sqlite") as connection:
        connection.execute("CREATE TABLE t (a TEXT, y TEXT)")
    opened = open_source(url, "t")
    with opened.engine as engine:
        assert engine.caps.name == DIALECT
        assert engine.statements == ["PRAGMA query_only = ON"]
