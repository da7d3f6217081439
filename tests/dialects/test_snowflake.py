"""Snowflake: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS, exact PERCENTILE_CONT ... WITHIN GROUP; case-sensitive comparisons by default.
Not executed here: checked by sqlglot and the vendor's documentation.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "snowflake"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "percentile_cont"
    assert not caps.executed_in_tests


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "PERCENTILE_CONT(0.5) WITHIN GROUP (ORDER BY" in sql
    assert "GROUPING SETS" in sql
    assert "CAST(n AS DOUBLE)" in sql
