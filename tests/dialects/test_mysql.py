"""MySQL: capability entry and what its paste-ready SQL must (not) say.

Only WITH ROLLUP (sqlglot would still print GROUPING SETS), PERCENTILE_CONT only as a window
function, and case-insensitive default collations: UNION ALL, window quantiles, and text grouped
as CAST(... AS BINARY) (sqlglot would print VARBINARY, which MySQL rejects).
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "mysql"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "union_all"
    assert caps.quantile == "window"
    assert caps.exact_key_type == "BINARY"
    assert caps.timeout_statement == "SET SESSION max_execution_time = {ms}"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "CAST(src.`word` AS BINARY) AS a1" in sql
    assert "CAST(src.`y` AS BINARY) AS y" in sql
    assert "CAST(SUM(n) AS SIGNED)" in sql and "CAST(n AS DOUBLE)" in sql
