"""PostgreSQL: capability entry and what its paste-ready SQL must (not) say.

GROUPING SETS with one-column GROUPING(), PERCENTILE_CONT ... WITHIN GROUP (exact). Read-only
and statement_timeout are set per transaction (SET TRANSACTION READ ONLY, SET LOCAL), so a
caller's pooled connection keeps its own settings.
"""

from __future__ import annotations

import dataclasses

import sqlglot
from helpers import invalid_constructs, paste_sql
from sqlglot import exp

import bitsift
from bitsift.dialects import capabilities

DIALECT = "postgres"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "grouping_sets"
    assert caps.quantile == "percentile_cont"
    assert caps.read_only_statement == "SET TRANSACTION READ ONLY"
    assert caps.timeout_statement == "SET LOCAL statement_timeout = {ms}"
    assert caps.executed_in_tests


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert "PERCENTILE_CONT(0.25) WITHIN GROUP (ORDER BY" in sql
    assert "GROUPING(a1) = 0" in sql
    assert "LN(CAST(n AS DOUBLE PRECISION))" in sql


def test_union_all_types_its_columns_before_the_null_branches() -> None:
    # PostgreSQL types UNION branches pairwise from the left: a first branch of NULLs only
    # would make every attribute column text. The typed, row-less first branch prevents it.
    spec_sql = bitsift.statement(table="t", target="y", attributes="a,b", dialect=DIALECT)
    caps = dataclasses.replace(capabilities(DIALECT), count_strategy="union_all")
    tree = sqlglot.parse_one(spec_sql, read="postgres")
    assert tree.find(exp.GroupingSets) is not None
    from bitsift.api import _declared_columns, make_options
    from bitsift.sources import parse_table_name
    from bitsift.spec import resolve
    from bitsift.sqlbuild import rank_statement

    options = make_options("y", attributes="a,b")
    spec = resolve(options, _declared_columns(options), parse_table_name("t", "postgres"), "t",
                   "postgres")
    sql = rank_statement(spec, caps, {}).sql
    first = sql.split("UNION ALL")[0]
    assert first.endswith("SELECT 0 AS attr, a1, a2, y, 0 AS n FROM base WHERE 1 = 0 ")
