"""BigQuery: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS and GROUPING(); no exact quantile aggregate sqlglot maps faithfully, so the
portable window method. LOG's arguments are reversed in BigQuery: only LN is written.
Not executed here.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "bigquery"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "window"
    assert not caps.executed_in_tests


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "FROM `bitsift_golden`" in sql
    assert "CAST(n AS FLOAT64)" in sql and "CAST(SUM(n) AS INT64)" in sql
    assert "WITHIN GROUP" not in sql and "ROW_NUMBER() OVER" in sql
