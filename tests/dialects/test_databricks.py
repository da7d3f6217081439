"""Databricks: capability entry and what its paste-ready SQL must (not) say.

Spark SQL: GROUPING SETS; sqlglot turns WITHIN GROUP into percentile_approx (approximate), so
the window method. Not executed here.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "databricks"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "window"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "PERCENTILE" not in sql.upper()
    assert "FROM `bitsift_golden` AS src" in sql
