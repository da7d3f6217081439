"""Oracle: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS, PERCENTILE_CONT ... WITHIN GROUP; no SELECT without FROM (the attribute-index
list of the cross-join strategy would need DUAL, so it is not used), no AS before table aliases.
Not executed here.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "oracle"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "percentile_cont"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "FROM \"bitsift_golden\" src" in sql
    assert "LIMIT" not in sql and "CLOB" not in sql
    assert "PERCENTILE_CONT(0.25) WITHIN GROUP" in sql
