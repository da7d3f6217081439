"""SQL Server (T-SQL): capability entry and paste-ready SQL.

GROUPING SETS; COUNT is 32-bit (sqlglot writes COUNT_BIG); one-argument LOG is the natural log
there (sqlglot writes LOG for LN); PERCENTILE_CONT is window-only: window method. Default
collations are case-insensitive and always ignore trailing spaces: text grouped as
VARBINARY(8000). Not executed here.
"""

from __future__ import annotations

from helpers import invalid_constructs, paste_sql

from bitsift.dialects import capabilities

DIALECT = "tsql"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.exact_key_type == "VARBINARY(8000)"


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "COUNT_BIG(*) AS n" in sql
    assert "LOG(CAST(n AS FLOAT))" in sql and "LN(" not in sql
    assert "CAST(src.[word] AS VARBINARY(8000))" in sql
    assert " LIMIT " not in sql and " TOP " not in sql
