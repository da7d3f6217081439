"""Amazon Redshift: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS; every PERCENTILE_CONT of one query must share its ORDER BY on Redshift, so the
window method. Not executed here.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "redshift"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "window"
    assert caps.timeout_statement == "SET statement_timeout TO {ms}"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "PERCENTILE_CONT" not in sql
    assert "GROUPING SETS" in sql and "DOUBLE PRECISION" in sql
