"""DuckDB (the embedded default): capability entry and paste-ready SQL.

Exact quantiles with quantile_cont (one list per attribute), GROUPING SETS, LN; the timeout
is enforced by interrupting the query from the client.
"""

from __future__ import annotations

import duckdb
import pytest
from helpers import invalid_constructs, paste_sql

import bitsift
from bitsift.dialects import capabilities
from bitsift.errors import QueryTimeoutError

DIALECT = "duckdb"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "quantile_cont"
    assert caps.timeout_in_client
    assert caps.exact_key_type is None
    assert caps.executed_in_tests


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "QUANTILE_CONT(CAST(\"score\" AS DOUBLE), [0.25, 0.5, 0.75])" in sql
    assert "GROUPING SETS" in sql
    assert "LN(CAST(n AS DOUBLE))" in sql


@pytest.mark.slow
def test_timeout_interrupts_the_query() -> None:
    connection = duckdb.connect()
    connection.execute("CREATE TABLE big AS SELECT i % 7 AS a, (i * 13) % 11 AS b, i % 3 AS y "
                       "FROM range(20000000) r(i)")
    with pytest.raises(QueryTimeoutError, match="--timeout 0.001"):
        bitsift.rank(connection, table="big", target="y", timeout=0.001)
