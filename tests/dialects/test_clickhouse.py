"""ClickHouse: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS; non-grouped columns read '' or 0 instead of NULL, which is harmless here because
the rows of each grouping set are told apart by GROUPING(); sqlglot's quantile is approximate,
so the window method. Executed on embedded ClickHouse (chdb) in tests/test_clickhouse.py.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "clickhouse"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "window"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "GROUPING(a1) = 0" in sql
    assert "quantile(" not in sql.lower()
    assert "Float64" in sql
