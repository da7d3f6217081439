"""The capability table: what each SQL dialect can do, as data.

The query builder never asks "is this PostgreSQL?"; it asks the dialect's
:class:`Capabilities` entry. Adding a dialect means adding one entry here (and
one test file, ``tests/dialects/test_<name>.py``).

Facts were checked by executing generated SQL on DuckDB, SQLite, PostgreSQL 15
and MariaDB 10.11; entries for the other dialects come from sqlglot's output
and the vendors' documentation.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Literal

from bitsift.errors import SpecError

#: How the (value, class) counts of all attributes are produced in one statement.
#: ``grouping_sets``: one scan, ``GROUP BY GROUPING SETS ((a1, y), (a2, y), ...)``.
#: ``union_all``: one narrow ``GROUP BY ai, y`` per attribute glued by UNION ALL.
#: ``cross_join``: one scan, rows repeated per attribute index, one GROUP BY.
CountStrategy = Literal["grouping_sets", "union_all", "cross_join"]

#: How quantile boundaries of numeric attributes are computed.
#: ``quantile_cont``: DuckDB's ``quantile_cont(x, p)`` aggregate (exact).
#: ``percentile_cont``: ``PERCENTILE_CONT(p) WITHIN GROUP (ORDER BY x)`` aggregate (exact).
#: ``window``: exact, from ``ROW_NUMBER()`` and ``COUNT(*) OVER ()`` with linear interpolation;
#: portable to every engine with window functions (SQLite, MariaDB...).
QuantileMethod = Literal["quantile_cont", "percentile_cont", "window"]


@dataclass(frozen=True)
class Capabilities:
    """What the query builder may use on one dialect."""

    name: str
    sqlglot_dialect: str
    count_strategy: CountStrategy = "grouping_sets"
    quantile: QuantileMethod = "window"
    #: Statement run on the session to set a timeout; ``{ms}`` / ``{seconds}`` are replaced
    #: by integers. ``None``: the engine has no statement timeout.
    timeout_statement: str | None = None
    #: Statement that makes the session read-only, if the engine has one.
    read_only_statement: str | None = None
    #: Does the engine have a chi-square survival function? (none listed has; p comes from Python)
    has_chi2: bool = False
    #: True when the entry was checked by executing SQL on a real engine in the test suite.
    executed_in_tests: bool = False


_DEFAULT = Capabilities(name="generic", sqlglot_dialect="")

CAPABILITIES: dict[str, Capabilities] = {
    c.name: c
    for c in [
        replace(
            _DEFAULT,
            name="duckdb",
            sqlglot_dialect="duckdb",
            quantile="quantile_cont",
            executed_in_tests=True,
        ),
        # SQLite has neither GROUPING SETS nor a quantile aggregate; UNION ALL of narrow
        # GROUP BYs measured faster than the cross join (see benchmarks/RESULTS.md).
        replace(
            _DEFAULT,
            name="sqlite",
            sqlglot_dialect="sqlite",
            count_strategy="union_all",
            read_only_statement="PRAGMA query_only = ON",
            executed_in_tests=True,
        ),
        replace(
            _DEFAULT,
            name="postgres",
            sqlglot_dialect="postgres",
            quantile="percentile_cont",
            timeout_statement="SET statement_timeout = {ms}",
            read_only_statement="SET SESSION CHARACTERISTICS AS TRANSACTION READ ONLY",
            executed_in_tests=True,
        ),
        # MySQL/MariaDB: WITH ROLLUP only, and MariaDB has no GROUPING().
        replace(
            _DEFAULT,
            name="mysql",
            sqlglot_dialect="mysql",
            count_strategy="union_all",
            timeout_statement="SET SESSION max_execution_time = {ms}",
            read_only_statement="SET SESSION TRANSACTION READ ONLY",
        ),
        # MariaDB speaks MySQL's SQL (sqlglot's mysql dialect) but names its timeout differently.
        replace(
            _DEFAULT,
            name="mariadb",
            sqlglot_dialect="mysql",
            count_strategy="union_all",
            timeout_statement="SET SESSION max_statement_time = {seconds}",
            read_only_statement="SET SESSION TRANSACTION READ ONLY",
            executed_in_tests=True,
        ),
        replace(_DEFAULT, name="snowflake", sqlglot_dialect="snowflake",
                quantile="percentile_cont",
                timeout_statement="ALTER SESSION SET STATEMENT_TIMEOUT_IN_SECONDS = {seconds}"),
        replace(_DEFAULT, name="bigquery", sqlglot_dialect="bigquery"),
        replace(_DEFAULT, name="redshift", sqlglot_dialect="redshift",
                quantile="percentile_cont",
                timeout_statement="SET statement_timeout TO {ms}"),
        replace(_DEFAULT, name="trino", sqlglot_dialect="trino"),
        replace(_DEFAULT, name="tsql", sqlglot_dialect="tsql"),
        replace(_DEFAULT, name="oracle", sqlglot_dialect="oracle",
                quantile="percentile_cont"),
        replace(_DEFAULT, name="databricks", sqlglot_dialect="databricks"),
        replace(_DEFAULT, name="spark", sqlglot_dialect="spark"),
        replace(_DEFAULT, name="clickhouse", sqlglot_dialect="clickhouse"),
    ]
}

#: SQLAlchemy dialect names (``engine.dialect.name``) to bitsift dialect names.
SQLALCHEMY_DIALECTS: dict[str, str] = {
    "duckdb": "duckdb",
    "sqlite": "sqlite",
    "postgresql": "postgres",
    "mysql": "mysql",
    "mariadb": "mariadb",
    "snowflake": "snowflake",
    "bigquery": "bigquery",
    "redshift": "redshift",
    "trino": "trino",
    "mssql": "tsql",
    "oracle": "oracle",
    "databricks": "databricks",
    "hive": "spark",
    "clickhouse": "clickhouse",
}

#: Accepted spellings of dialect names on the command line.
ALIASES: dict[str, str] = {
    "postgresql": "postgres",
    "pg": "postgres",
    "mssql": "tsql",
    "sqlserver": "tsql",
    "sparksql": "spark",
}


def capabilities(name: str) -> Capabilities:
    """Look up a dialect's capabilities by bitsift or alias name.

    >>> capabilities("postgresql").count_strategy
    'grouping_sets'
    >>> capabilities("sqlserver").name
    'tsql'
    """
    key = ALIASES.get(name.lower(), name.lower())
    try:
        return CAPABILITIES[key]
    except KeyError:
        from bitsift.errors import suggest

        known = ", ".join(sorted(CAPABILITIES))
        raise SpecError(
            f"unknown dialect {name!r}{suggest(name, CAPABILITIES)}; known: {known}"
        ) from None
