"""Apache Spark: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS with one-column GROUPING(); quantiles by Spark's exact percentile() aggregate (sqlglot
would turn PERCENTILE_CONT ... WITHIN GROUP into the approximate percentile_approx). Executed on a
local Spark session in tests/test_spark.py.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "spark"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "percentile"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "PERCENTILE(CAST(`score` AS DOUBLE), ARRAY(" in sql
    assert "PERCENTILE_APPROX" not in sql.upper()
    assert "GROUPING(a1) = 0" in sql
