"""Every dialect's capability entry and what its paste-ready SQL must (not) say, from one table.

:data:`EXPECTED` holds, per dialect, the capability fields (SQL traits) and run-policy fields
its entries must have, why, whether the suite executes it, and the text its paste-ready
statement (golden variant ``default``) must and must not contain; the same tests read every
entry. Adding a dialect: one ``Capabilities`` entry in
``src/bitsift/sql/dialects.py`` and one :class:`Expected` here (DEVELOPERS.md, "How to add a
dialect"). At the end, what only a running engine shows (timeouts, read-only statements), on
the engines that run here.
"""

from __future__ import annotations

import dataclasses
import sqlite3
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
import sqlglot
from conftest import MARIADB_URL
from helpers import ENGINES, fill_sqlalchemy, invalid_constructs, paste_sql, random_dataset
from sqlglot import exp

import bitsift
from bitsift.engines.policy import POLICIES, RunPolicy, Timeout, run_policy
from bitsift.errors import QueryTimeoutError
from bitsift.sql import dialects
from bitsift.sql.dialects import CAPABILITIES, capabilities


@dataclass(frozen=True)
class Expected:
    """What one dialect's capability entry and paste-ready statement must be."""

    #: Why the entry is what it is (the engine's traits that decide it).
    why: str
    #: ``Capabilities`` fields (the SQL traits) and the value each must have.
    caps: Mapping[str, Any]
    #: ``RunPolicy`` fields (what a running session does) and the value each must have.
    policy: Mapping[str, Any] = dataclasses.field(default_factory=dict)
    #: The suite executes this dialect's SQL on a real engine against the NumPy reference
    #: (tests/test_parity.py and tests/test_golden.py on :data:`helpers.ENGINES`,
    #: tests/test_spark.py, tests/test_clickhouse.py); the others are checked on sqlglot's
    #: output and the vendors' documentation only.
    executed_here: bool = False
    #: Text the statement must contain, exactly as written.
    says: tuple[str, ...] = ()
    #: Text it must not contain, exactly as written.
    never_says: tuple[str, ...] = ()
    #: Text it must not contain in any letter case.
    never_says_any_case: tuple[str, ...] = ()
    #: Another dialect whose statement this one's equals, apart from the dialect's name.
    same_statement_as: str | None = None


EXPECTED: dict[str, Expected] = {
    "duckdb": Expected(
        why="The embedded default: exact quantiles with quantile_cont (one list per "
            "attribute), GROUPING SETS, LN; the timeout is enforced by interrupting the query "
            "from the client.",
        caps={"count_strategy": "grouping_sets", "quantile": "quantile_cont",
              "exact_key_type": None},
        policy={"timeout": Timeout("client"), "run_quantile": "counted", "run_sessions": 2,
                "balance_counted_part": False, "run_counts": "client"},
        executed_here=True,
        says=("QUANTILE_CONT(CAST(\"score\" AS DOUBLE), [0.25, 0.5, 0.75])", "GROUPING SETS",
              "LN(CAST(n AS DOUBLE))"),
    ),
    "sqlite": Expected(
        why="No GROUPING SETS and no quantile aggregate: UNION ALL of narrow GROUP BYs and "
            "exact quantiles from ROW_NUMBER(). Read-only through PRAGMA query_only (undone at "
            "close); --timeout through a progress handler; LN/FLOOR registered from Python "
            "when the build lacks them.",
        caps={"count_strategy": "union_all", "quantile": "window"},
        policy={"read_only_statement": "PRAGMA query_only = ON",
                "read_only_reset": "PRAGMA query_only = OFF", "timeout": Timeout("client"),
                "register_math_functions": True, "run_sessions": 2, "run_counts": "client"},
        executed_here=True,
        says=("UNION ALL", "ROW_NUMBER() OVER (ORDER BY CAST(\"score\" AS REAL) NULLS LAST)",
              "CAST(n AS REAL)"),
        never_says=("GROUPING",),
    ),
    "postgres": Expected(
        why="GROUPING SETS with one-column GROUPING(), PERCENTILE_CONT ... WITHIN GROUP "
            "(exact). Read-only and statement_timeout are set per transaction (SET TRANSACTION "
            "READ ONLY, SET LOCAL), so a caller's pooled connection keeps its own settings.",
        caps={"count_strategy": "grouping_sets", "paste_count_strategy": "union_all",
              "quantile": "percentile_cont"},
        policy={"read_only_statement": "SET TRANSACTION READ ONLY",
                "timeout": Timeout("transaction", "SET LOCAL statement_timeout = {ms}",
                                   2_147_483.647),
                "balance_counted_part": True},
        executed_here=True,
        # Pasted with its own cut points: UNION ALL (2.4x faster than GROUPING SETS at the
        # console's default work_mem, RESULTS.md); test_paste_count_strategy covers the rest.
        says=("PERCENTILE_CONT(0.25) WITHIN GROUP (ORDER BY", "WHERE\n    1 = 0",
              "LN(CAST(n AS DOUBLE PRECISION))"),
        never_says=("GROUPING SETS",),
    ),
    "mysql": Expected(
        why="Only WITH ROLLUP (sqlglot would still print GROUPING SETS), PERCENTILE_CONT only "
            "as a window function, and case-insensitive default collations: UNION ALL, window "
            "quantiles, and text grouped as CAST(... AS BINARY) (sqlglot would print "
            "VARBINARY, which MySQL rejects).",
        caps={"count_strategy": "union_all", "quantile": "window", "exact_key_type": "BINARY"},
        policy={"timeout": Timeout("transaction", "SET SESSION max_execution_time = {ms}",
                                   4_294_967.295)},
        says=("CAST(src.`word` AS BINARY) AS a1", "CAST(src.`y` AS BINARY) AS y",
              "CAST(SUM(n) AS SIGNED)", "CAST(n AS DOUBLE)"),
    ),
    "mariadb": Expected(
        why="MySQL's SQL (sqlglot's mysql dialect), no GROUPING() at all, utf8mb4_general_ci "
            "merging 'a'/'A' and 'x'/'x ' in GROUP BY: UNION ALL (pasted with its own cut "
            "points: one branch per attribute reading the table with only its own bounds), "
            "window quantiles, text "
            "grouped as BINARY. The timeout is a per-statement prefix (SET STATEMENT "
            "max_statement_time = s FOR ...), leaving no session state.",
        caps={"count_strategy": "union_all", "paste_count_strategy": "union_scans",
              "paste_shared_ctes": ("counts",), "exact_key_type": "BINARY"},
        policy={"timeout": Timeout("prefix", "SET STATEMENT max_statement_time = {seconds} FOR ",
                                   31_536_000.0),
                "read_only_statement": "SET TRANSACTION READ ONLY", "run_sessions": 2,
                "run_counts": "client"},
        executed_here=True,
        # Pasted with its own cut points: each attribute's branch reads the table joined with
        # its own bounds part only, so each quantile is computed once; UNION ALL over a shared
        # `base` recomputed every quantile per branch (RESULTS.md). `counts` is a recursive
        # CTE, materialized once for its five readers.
        says=("CROSS JOIN bounds_4 AS bounds", ") AS rows_4", "WITH RECURSIVE",
              "FROM counts\n  WHERE\n    1 = 0"),
        never_says=("base AS (", "bounds AS (", "CROSS JOIN attribute_index"),
    ),
    "snowflake": Expected(
        why="GROUPING SETS, exact PERCENTILE_CONT ... WITHIN GROUP; case-sensitive comparisons "
            "by default. Not executed here: checked by sqlglot and the vendor's documentation.",
        caps={"count_strategy": "grouping_sets", "quantile": "percentile_cont"},
        says=("PERCENTILE_CONT(0.5) WITHIN GROUP (ORDER BY", "GROUPING SETS",
              "CAST(n AS DOUBLE)"),
    ),
    "bigquery": Expected(
        why="GROUPING SETS and GROUPING(); no exact quantile aggregate sqlglot maps "
            "faithfully, so the portable window method. LOG's arguments are reversed in "
            "BigQuery: only LN is written. Not executed here.",
        caps={"count_strategy": "grouping_sets", "quantile": "window"},
        says=("FROM `bitsift_golden`", "CAST(n AS FLOAT64)", "CAST(SUM(n) AS INT64)",
              "ROW_NUMBER() OVER"),
        never_says=("WITHIN GROUP",),
    ),
    "redshift": Expected(
        why="GROUPING SETS; every PERCENTILE_CONT of one query must share its ORDER BY on "
            "Redshift, so the window method. Not executed here.",
        caps={"count_strategy": "grouping_sets", "quantile": "window"},
        policy={"timeout": Timeout("transaction", "SET statement_timeout TO {ms}",
                                   2_147_483.647)},
        says=("GROUPING SETS", "DOUBLE PRECISION"),
        never_says=("PERCENTILE_CONT",),
    ),
    "trino": Expected(
        why="GROUPING SETS; only approx_percentile natively (sqlglot rewrites exact "
            "percentiles into it), so the window method. Not executed here.",
        caps={"count_strategy": "grouping_sets", "quantile": "window"},
        says=("GROUPING SETS", "CAST(n AS DOUBLE)"),
        never_says_any_case=("APPROX",),
    ),
    "tsql": Expected(
        why="GROUPING SETS; COUNT is 32-bit (sqlglot writes COUNT_BIG); one-argument LOG is "
            "the natural log there (sqlglot writes LOG for LN); PERCENTILE_CONT is "
            "window-only: window method. Default collations are case-insensitive and always "
            "ignore trailing spaces: text grouped as VARBINARY(8000). Not executed here.",
        caps={"count_strategy": "grouping_sets", "exact_key_type": "VARBINARY(8000)"},
        says=("COUNT_BIG(*) AS n", "LOG(CAST(n AS FLOAT))",
              "CAST(src.[word] AS VARBINARY(8000))"),
        never_says=("LN(", " LIMIT ", " TOP "),
    ),
    "oracle": Expected(
        why="GROUPING SETS, PERCENTILE_CONT ... WITHIN GROUP; no SELECT without FROM (the "
            "attribute-index list of the cross-join strategy would need DUAL, so it is not "
            "used), no AS before table aliases. Not executed here.",
        caps={"count_strategy": "grouping_sets", "quantile": "percentile_cont"},
        says=("FROM \"bitsift_golden\" src", "PERCENTILE_CONT(0.25) WITHIN GROUP"),
        never_says=("LIMIT", "CLOB"),
    ),
    "databricks": Expected(
        why="Spark SQL: GROUPING SETS; sqlglot turns WITHIN GROUP into percentile_approx "
            "(approximate), so the window method. Not executed here.",
        caps={"count_strategy": "grouping_sets", "quantile": "window"},
        says=("FROM `bitsift_golden` AS src",),
        never_says_any_case=("PERCENTILE",),
    ),
    "spark": Expected(
        why="GROUPING SETS with one-column GROUPING(); quantiles by Spark's exact percentile() "
            "aggregate (sqlglot would turn PERCENTILE_CONT ... WITHIN GROUP into the "
            "approximate percentile_approx). Executed on a local Spark session in "
            "tests/test_spark.py.",
        caps={"count_strategy": "grouping_sets", "quantile": "percentile"},
        policy={"timeout": Timeout("client")},
        executed_here=True,
        says=("PERCENTILE(CAST(`score` AS DOUBLE), ARRAY(", "GROUPING(a1) = 0"),
        never_says_any_case=("PERCENTILE_APPROX",),
    ),
    "clickhouse": Expected(
        why="GROUPING SETS; non-grouped columns read '' or 0 instead of NULL, which is "
            "harmless here because the rows of each grouping set are told apart by "
            "GROUPING(); sqlglot's quantile is approximate, so the window method. Executed on "
            "embedded ClickHouse (chdb) in tests/test_clickhouse.py.",
        caps={"count_strategy": "grouping_sets", "quantile": "window"},
        policy={"statement_settings": ("readonly = 2",), "timeout": Timeout(
            "setting", "max_execution_time = {seconds}", 9_223_372_036_854.0)},
        executed_here=True,
        says=("GROUPING(a1) = 0", "Float64"),
        never_says_any_case=("quantile(",),
    ),
}


def test_every_dialect_has_one_entry_here() -> None:
    # A dialect added to the capability table without its expectations (or the reverse) fails.
    without_expectations = sorted(set(dialects.CAPABILITIES) - set(EXPECTED))
    without_capabilities = sorted(set(EXPECTED) - set(dialects.CAPABILITIES))
    assert without_expectations == []
    assert without_capabilities == []


@pytest.mark.parametrize("dialect", EXPECTED)
def test_capability_entry(dialect: str) -> None:
    caps = capabilities(dialect)
    wanted = EXPECTED[dialect].caps
    assert {field: getattr(caps, field) for field in wanted} == wanted


@pytest.mark.parametrize("dialect", EXPECTED)
def test_run_policy_entry(dialect: str) -> None:
    policy = run_policy(dialect)
    wanted = EXPECTED[dialect].policy
    assert {field: getattr(policy, field) for field in wanted} == wanted


def test_every_run_policy_names_a_dialect() -> None:
    assert sorted(set(POLICIES) - set(dialects.CAPABILITIES)) == []


def test_the_executed_dialects_are_the_engines_the_suite_runs() -> None:
    executed = {name for name, expected in EXPECTED.items() if expected.executed_here}
    assert executed == {*ENGINES, "spark", "clickhouse"}


def test_sql_traits_and_run_policy_share_no_field() -> None:
    """The capability entry holds what pasted SQL needs; what a session does is policy."""
    traits = {f.name for f in dataclasses.fields(dialects.Capabilities)}
    policy = {f.name for f in dataclasses.fields(RunPolicy)}
    assert traits & policy == set()
    assert "executed_in_tests" not in traits


@pytest.mark.parametrize("dialect", EXPECTED)
def test_paste_sql(dialect: str) -> None:
    expected = EXPECTED[dialect]
    sql = paste_sql(dialect, "default")
    assert invalid_constructs(sql, dialect) == []
    assert [text for text in expected.says if text not in sql] == []
    assert [text for text in expected.never_says if text in sql] == []
    assert [text for text in expected.never_says_any_case if text.lower() in sql.lower()] == []
    if expected.same_statement_as is not None:
        other = expected.same_statement_as
        assert sql.replace(f"dialect {dialect}", f"dialect {other}") == paste_sql(other, "default")


@pytest.mark.parametrize("dialect", sorted(CAPABILITIES))
def test_paste_count_strategy_only_where_the_statement_computes_cut_points(dialect: str) -> None:
    # Issue 21 item 8: paste_count_strategy is for statements with a bounds CTE; without
    # numeric attributes (or with MDL's cut points inlined) the dialect's count strategy holds.
    caps = capabilities(dialect)
    categorical = bitsift.statement(table="t", target="y", attributes="a,b", dialect=dialect)
    binned = bitsift.statement(table="t", target="y", attributes="a", numeric="x",
                               dialect=dialect)
    def strategy(sql: str) -> str:
        body = sql.split("counts AS", 1)[1].split("cells AS", 1)[0]
        if "GROUPING SETS" in body.upper():
            return "grouping_sets"
        if "attribute_index" in body:
            return "cross_join"
        return "union_scans" if ") AS rows_1" in body else "union_all"

    assert strategy(categorical) == caps.count_strategy
    assert strategy(binned) == (caps.paste_count_strategy or caps.count_strategy)


# --- what only a running engine shows ----------------------------------------------------------


@pytest.mark.slow
def test_duckdb_timeout_interrupts_the_query() -> None:
    connection = duckdb.connect()
    connection.execute("CREATE TABLE big AS SELECT i % 7 AS a, (i * 13) % 11 AS b, i % 3 AS y "
                       "FROM range(20000000) r(i)")
    with pytest.raises(QueryTimeoutError, match="--timeout 0.001"):
        bitsift.rank(connection, table="big", target="y", timeout=0.001)


def test_sqlite_url_maps_to_its_entry_and_opens_read_only(tmp_path: Path) -> None:
    path = tmp_path / "x.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE t (a TEXT, y TEXT)")
        connection.executemany("INSERT INTO t VALUES (?, ?)", [("p", "q"), ("r", "s")])
    ranking = bitsift.rank(f"sqlite:///{path}", table="t", target="y")
    assert ranking.dialect == "sqlite"
    # The pragma is sent once, when the connection opens, before any query.
    assert ranking.statements[0] == "PRAGMA query_only = ON"
    assert ranking.statements.count("PRAGMA query_only = ON") == 1


@pytest.mark.mariadb
def test_mariadb_statements_sent_carry_read_only_and_timeout(mariadb_database: str) -> None:
    dataset = random_dataset(seed=41, rows=60)
    writer = sa.create_engine(MARIADB_URL, poolclass=sa.pool.NullPool)
    with writer.begin() as connection:
        fill_sqlalchemy("mariadb", connection, [mariadb_database, "t"], dataset)
    writer.dispose()
    ranking = bitsift.rank(MARIADB_URL, table=f"{mariadb_database}.t", target="y", timeout=30)
    selects = [s for s in ranking.statements if "SELECT" in s]
    assert selects and all(
        s.startswith("SET STATEMENT max_statement_time = 30.000000 FOR ") for s in selects)
    assert ranking.statements.count("SET TRANSACTION READ ONLY") == len(selects)


def first_counts_branch(sql: str, dialect: str) -> str:
    """The first SELECT of the ``counts`` CTE's UNION ALL, as one line of ``dialect``."""
    tree = sqlglot.parse_one(sql, read=dialect)
    counts = next(cte for cte in tree.find_all(exp.CTE) if cte.alias == "counts")
    branch = counts.this
    while isinstance(branch, exp.Union):
        branch = branch.this
    return branch.sql(dialect=dialect)


def test_postgres_union_all_types_its_columns_before_the_null_branches(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # PostgreSQL types UNION branches pairwise from the left: a first branch of NULLs only
    # would make every attribute column text. The typed, row-less first branch prevents it.
    grouping_sets = bitsift.statement(table="t", target="y", attributes="a,b",
                                      dialect="postgres")
    assert sqlglot.parse_one(grouping_sets, read="postgres").find(exp.GroupingSets) is not None
    monkeypatch.setitem(dialects.CAPABILITIES, "postgres",
                        dataclasses.replace(capabilities("postgres"), count_strategy="union_all"))
    union_all = bitsift.statement(table="t", target="y", attributes="a,b", dialect="postgres")
    assert (first_counts_branch(union_all, "postgres")
            == "SELECT 0 AS attr, a1, a2, y, 0 AS n FROM base WHERE 1 = 0")
