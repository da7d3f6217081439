"""Trino: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS; only approx_percentile natively (sqlglot rewrites exact percentiles into it),
so the window method. Not executed here.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "trino"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "window"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "APPROX" not in sql.upper()
    assert "GROUPING SETS" in sql and "CAST(n AS DOUBLE)" in sql
