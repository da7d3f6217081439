"""The capability table: what each SQL dialect can do, as data.

The query builder never asks "is this PostgreSQL?"; it asks the dialect's
:class:`Capabilities` entry: the SQL the dialect can express, all a pasted statement needs.
What a running session does on the engine (read-only settings, timeouts, sessions at once) is
its run policy, :mod:`bitsift.engines.policy`. Adding a dialect means adding one entry here
(and one entry in the expectations table of ``tests/test_dialects.py``, which also says which
entries the suite executes).

The entries the suite executes were checked by executing the generated SQL on
DuckDB 2.0, SQLite 3.40, PostgreSQL 15 and MariaDB 10.11 (tests/test_parity.py,
tests/test_golden.py), Spark 4.3 local[2] (tests/test_spark.py) and ClickHouse 26.9 embedded as
chdb 4.4 (tests/test_clickhouse.py) against the NumPy reference; the others come from sqlglot's
output, the pitfalls in design.md and the vendors' documentation (tests/test_dialects.py).
Once, by hand (2026-12-01, not in the suite), the golden databricks statements ran on a local
Spark 4.3 too: every attribute matched DuckDB's ranking.

Why each engine's count strategy
--------------------------------
Measured 2026-12-01 with an ad-hoc script (not kept): 500,000 rows, 8 attributes of 2 to
1,000 values (7 integer, 1 text) and a 3-class text target, run mode (no quantile pre-pass),
median of 3 runs of the statement, two sessions each (SQLite: one), on this 2-core machine
shared with other jobs (load average about 3, so expect +-50 % noise):

=====================  ===============  ===============  ===============
engine                 grouping_sets    union_all        cross_join
=====================  ===============  ===============  ===============
PostgreSQL 15.20       0.41 / 0.60 s    0.94 / 0.93 s    2.26 / 1.38 s
MariaDB 10.11.19       (not available)  3.39 / 1.62 s    4.92 / 3.66 s
SQLite 3.40.1          (not available)  9.5 s            37.7 s
=====================  ===============  ===============  ===============

- PostgreSQL: ``grouping_sets``, about twice as fast as one narrow GROUP BY per attribute
  (the ``base`` CTE is referenced K+1 times there, so PostgreSQL materialises it) and 2-5x
  faster than the cross join (K+1 times the rows through one hash aggregate).
- MariaDB/MySQL: no GROUPING SETS (WITH ROLLUP only, and MariaDB has no GROUPING()), so
  ``union_all`` (one narrow GROUP BY per attribute), which beat the cross join by 1.5-2x.
- SQLite: no GROUPING SETS; ``union_all`` beat the cross join by about 4x.
- DuckDB: ``grouping_sets`` (design.md's prototype: 0.45 s against 1.03 s for the cross join
  at 5M rows; per-attribute statements were faster still, but need several statements).
- Not executed here: every dialect with GROUPING SETS uses them (one scan); sqlglot cannot
  emit them for the others.
- Pasted statements that compute their own cut points (a ``bounds`` CTE joined into
  ``base``) use ``paste_count_strategy`` where it is set: MariaDB ``union_scans`` (``base`` is
  evaluated once per reference there, so ``union_all`` recomputed every quantile per
  attribute: 172 s against 33 s for the cross join; reading the table per attribute with
  only that attribute's bounds computes each quantile once: 7.8 s against 10.5 s for the
  cross join) with ``counts`` shared (``paste_shared_ctes``: each later step's reference
  recomputed it, 39.5 s against 7.8 s), PostgreSQL ``union_all`` (at a console's default
  work_mem: 5.6 s against 13.2 s for GROUPING SETS; ``union_scans`` 5.9 s against 3.2 s:
  PostgreSQL materializes a shared ``base`` once). benchmarks/RESULTS.md, "Paste mode".

Text grouping: MySQL/MariaDB compare text under the column's collation; their defaults are
case-insensitive and PAD SPACE, so ``GROUP BY`` would merge 'a' with 'A' and 'x' with 'x '.
bitsift groups text (and, in paste mode without types, every categorical column) as
``CAST(x AS BINARY)``: values are then told apart byte by byte, exactly as DuckDB, SQLite and
PostgreSQL do, and the parity tests hold on data with case variants. ``--where`` predicates
are the user's own and keep the collation's meaning. SQL Server's default collations are
case-insensitive and ignore trailing spaces too: its paste-ready SQL groups text as
``VARBINARY(8000)`` (not executed here; longer values would be cut at 8,000 bytes).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, Literal

from bitsift.errors import SpecError

#: How the (value, class) counts of all attributes are produced in one statement.
#: ``grouping_sets``: one scan, ``GROUP BY GROUPING SETS ((a1, y), (a2, y), ...)``.
#: ``union_all``: one narrow ``GROUP BY ai, y`` per attribute glued by UNION ALL.
#: ``cross_join``: one scan, rows repeated per attribute index, one GROUP BY.
#: ``union_scans``: as ``union_all``, but each branch reads the table itself, joined with
#: only its own attribute's cut points (a pasted statement's ``bounds`` parts): for engines
#: that evaluate a CTE once per reference. The ranking statement only; the pair and drill-down
#: statements count it as ``union_all`` (their cut points are always literals).
CountStrategy = Literal["grouping_sets", "union_all", "cross_join", "union_scans"]

#: How quantile boundaries of numeric attributes are computed.
#: ``quantile_cont``: DuckDB's ``quantile_cont(x, p)`` aggregate (exact).
#: ``percentile_cont``: ``PERCENTILE_CONT(p) WITHIN GROUP (ORDER BY x)`` aggregate (exact).
#: ``percentile``: Spark's exact ``percentile(x, array(p, ...))`` aggregate (one value-count
#: map per attribute, merged across partitions; no global sort).
#: ``window``: exact, from ``ROW_NUMBER()`` and ``COUNT(*) OVER ()`` with linear interpolation;
#: portable to every engine with window functions (SQLite, MariaDB...).
QuantileMethod = Literal["quantile_cont", "percentile_cont", "percentile", "window"]


@dataclass(frozen=True)
class DateFunctions:
    """A date or timestamp as a number or as one part, in the dialect's own SQL with ``x``
    standing for the value. sqlglot parses each in the dialect and the value's node replaces
    ``x`` (see :func:`bitsift.sql.sqlbuild.temporal_value`): its own transpilation of EXTRACT and
    epoch functions is invalid on several engines (EXTRACT(DAYOFWEEK ...) on PostgreSQL,
    TIME_TO_UNIX on SQLite, MySQL, SQL Server...).

    ``epoch``: seconds since 1970-01-01 00:00 of the value as written (dates at midnight, no
    time-zone conversion of naive timestamps). ``dow``: day of the week, Sunday = 0.
    """

    epoch: str = "EXTRACT(EPOCH FROM x)"
    year: str = "EXTRACT(YEAR FROM x)"
    month: str = "EXTRACT(MONTH FROM x)"
    dow: str = "EXTRACT(DOW FROM x)"
    hour: str = "EXTRACT(HOUR FROM x)"


@dataclass(frozen=True)
class Capabilities:
    """The SQL one dialect can express, as the query builder uses it: all a pasted statement
    needs. What a running session on the engine does besides (read-only settings, timeouts,
    sessions at once, how cut points are found) is its :class:`~bitsift.engines.policy.RunPolicy`.
    """

    name: str
    sqlglot_dialect: str
    count_strategy: CountStrategy = "grouping_sets"
    #: The count strategy of a pasted statement (``bitsift sql``, job models) that computes
    #: its own cut points: ``base`` then joins the ``bounds`` CTE, and an engine that evaluates
    #: ``base`` once per reference (``union_all`` reads it once per attribute) recomputes
    #: every quantile each time. ``None``: :attr:`count_strategy`. Measured in
    #: benchmarks/RESULTS.md ("Paste mode"; benchmarks/paste_strategies.py).
    paste_count_strategy: CountStrategy | None = None
    #: Steps of the ranking statement (``base``, ``counts``) written as recursive CTEs with an
    #: empty recursive branch (``WITH RECURSIVE``): MariaDB evaluates a plain CTE once per
    #: reference (``counts`` is read by ``cells`` and ``excluded``, and the steps after it up
    #: to five times), but materializes a recursive one once for every reference.
    shared_ctes: tuple[str, ...] = ()
    #: :attr:`shared_ctes` of a pasted statement that computes its own cut points (``None``:
    #: the same). Measured in benchmarks/RESULTS.md ("Paste mode").
    paste_shared_ctes: tuple[str, ...] | None = None
    quantile: QuantileMethod = "window"
    #: Type (spelled in the dialect) that grouped text values are cast to so that they compare
    #: byte-exactly. ``None``: the engine's default comparison already tells 'a' from 'A'
    #: and 'x' from 'x '. MySQL/MariaDB's default collations are case-insensitive and
    #: PAD SPACE, SQL Server's are case-insensitive and always pad.
    exact_key_type: str | None = None
    #: The chi-square survival function in the dialect's SQL, ``g`` and ``dof`` standing for the
    #: G statistic and its degrees of freedom, for model files' ``p_value``. ``None``: the
    #: engine has none (no engine listed here has one; bitsift computes p in Python).
    chi2_survival: str | None = None
    #: The current time in UTC without a zone, in the dialect's SQL, read once per statement:
    #: a model file's ``run_at`` (docs/scheduled-runs.md, "Keeping the history...").
    utc_now: str = "CAST(CURRENT_TIMESTAMP AT TIME ZONE 'UTC' AS TIMESTAMP)"
    #: The statements that open and end one transaction in a script (``bitsift models
    #: --insert``); ``None``: the engine has none (each statement stands alone); an empty
    #: opening statement: transactions open by themselves.
    script_transaction: tuple[str, str] | None = ("BEGIN", "COMMIT")
    #: Put before CREATE TABLE where the engine has no IF NOT EXISTS; ``{table}`` is the
    #: table's name as a string literal.
    create_guard: str | None = None
    #: Written after the history table's column list where the engine needs more (ClickHouse:
    #: its table engine and sort key).
    table_options: str | None = None
    #: Dates and timestamps as epoch seconds or parts (``--numeric``, ``--date-part``).
    dates: DateFunctions = DateFunctions()
    #: A pasted statement may read a data file in place (DuckDB's read_parquet/read_csv_auto/
    #: read_json_auto); elsewhere ``bitsift sql FILE`` needs ``--table`` naming the table.
    reads_files: bool = False

    @property
    def for_paste(self) -> Capabilities:
        """These capabilities with the pasted statement's count strategy."""
        if self.paste_count_strategy is None and self.paste_shared_ctes is None:
            return self
        return replace(self, count_strategy=self.paste_count_strategy or self.count_strategy,
                       shared_ctes=(self.shared_ctes if self.paste_shared_ctes is None
                                    else self.paste_shared_ctes),
                       paste_count_strategy=None, paste_shared_ctes=None)


#: Each dialect's date functions where the standard EXTRACT forms do not serve. Executed in
#: tests (tests/test_binning_parity.py) on DuckDB, SQLite, PostgreSQL and MariaDB; the others
#: from the vendors' documentation. SQLite and MySQL/MariaDB epochs are whole seconds; MySQL's
#: TIMESTAMPDIFF, unlike UNIX_TIMESTAMP, ignores the session time zone. Days of the week are
#: shifted to Sunday = 0 where the engine counts from 1 (or from Monday).
DATE_FUNCTIONS: dict[str, DateFunctions] = {
    "duckdb": DateFunctions(epoch="EPOCH(x)"),
    "sqlite": DateFunctions(
        epoch="CAST(STRFTIME('%s', x) AS INTEGER)",
        year="CAST(STRFTIME('%Y', x) AS INTEGER)",
        month="CAST(STRFTIME('%m', x) AS INTEGER)",
        dow="CAST(STRFTIME('%w', x) AS INTEGER)",
        hour="CAST(STRFTIME('%H', x) AS INTEGER)",
    ),
    "mysql": DateFunctions(epoch="TIMESTAMPDIFF(SECOND, '1970-01-01 00:00:00', x)",
                           dow="DAYOFWEEK(x) - 1"),
    "mariadb": DateFunctions(epoch="TIMESTAMPDIFF(SECOND, '1970-01-01 00:00:00', x)",
                             dow="DAYOFWEEK(x) - 1"),
    "snowflake": DateFunctions(epoch="EXTRACT(EPOCH_SECOND FROM x)",
                               dow="EXTRACT(DAYOFWEEK FROM x)"),
    "bigquery": DateFunctions(epoch="UNIX_SECONDS(CAST(x AS TIMESTAMP))",
                              dow="EXTRACT(DAYOFWEEK FROM x) - 1"),
    "trino": DateFunctions(epoch="TO_UNIXTIME(CAST(x AS TIMESTAMP))",
                           dow="MOD(DAY_OF_WEEK(x), 7)"),
    "tsql": DateFunctions(
        epoch="DATEDIFF_BIG(SECOND, '1970-01-01', x)",
        year="DATEPART(YEAR, x)",
        month="DATEPART(MONTH, x)",
        dow="DATEPART(WEEKDAY, x) - 1",  # with the default DATEFIRST 7 (Sunday first)
        hour="DATEPART(HOUR, x)",
    ),
    "oracle": DateFunctions(
        epoch="(CAST(x AS DATE) - DATE '1970-01-01') * 86400",
        dow="MOD(TRUNC(CAST(x AS DATE)) - DATE '1970-01-04', 7)",  # 1970-01-04: a Sunday
        hour="EXTRACT(HOUR FROM CAST(x AS TIMESTAMP))",  # EXTRACT(HOUR) rejects a DATE
    ),
    "spark": DateFunctions(epoch="UNIX_TIMESTAMP(x)", dow="DAYOFWEEK(x) - 1"),
    "databricks": DateFunctions(epoch="UNIX_TIMESTAMP(x)", dow="DAYOFWEEK(x) - 1"),
    "clickhouse": DateFunctions(epoch="toUnixTimestamp(x)", year="toYear(x)",
                                month="toMonth(x)", dow="toDayOfWeek(x) % 7",
                                hour="toHour(x)"),
}
#: Each dialect's UTC clock where the default (``CURRENT_TIMESTAMP AT TIME ZONE 'UTC'``) does
#: not serve. Executed on DuckDB, SQLite, PostgreSQL and MariaDB (tests/test_models_history.py);
#: the others from the vendors' documentation. Every one is read once per statement.
UTC_CLOCKS: dict[str, str] = {
    "sqlite": "STRFTIME('%Y-%m-%d %H:%M:%f', 'now') || '000'",  # SQLAlchemy's text form
    "mysql": "UTC_TIMESTAMP(6)",
    "mariadb": "UTC_TIMESTAMP(6)",
    "redshift": "SYSDATE",
    "snowflake": "CAST(CONVERT_TIMEZONE('UTC', CURRENT_TIMESTAMP()) AS TIMESTAMP_NTZ)",
    "bigquery": "CURRENT_DATETIME('UTC')",
    "tsql": "SYSUTCDATETIME()",
    "oracle": "SYS_EXTRACT_UTC(SYSTIMESTAMP)",
    "spark": "TO_UTC_TIMESTAMP(CURRENT_TIMESTAMP(), CURRENT_TIMEZONE())",
    "databricks": "TO_UTC_TIMESTAMP(CURRENT_TIMESTAMP(), CURRENT_TIMEZONE())",
    "clickhouse": "now64(6, 'UTC')",
}
#: Transactions of ``bitsift models --insert`` scripts where ``BEGIN``/``COMMIT`` do not serve.
#: Oracle opens one by itself; Spark, Databricks and ClickHouse have none (one INSERT is
#: atomic on a Delta table; ClickHouse inserts a block at a time).
SCRIPT_TRANSACTIONS: dict[str, tuple[str, str] | None] = {
    "duckdb": ("BEGIN TRANSACTION", "COMMIT"),
    "mysql": ("START TRANSACTION", "COMMIT"),
    "mariadb": ("START TRANSACTION", "COMMIT"),
    "bigquery": ("BEGIN TRANSACTION", "COMMIT TRANSACTION"),
    "trino": ("START TRANSACTION", "COMMIT"),
    "tsql": ("BEGIN TRANSACTION", "COMMIT TRANSACTION"),
    "oracle": ("", "COMMIT"),
    "spark": None,
    "databricks": None,
    "clickhouse": None,
}


def _dialect(name: str, sqlglot_dialect: str | None = None, **traits: Any) -> Capabilities:
    """One entry: its sqlglot dialect (by default of the same name), its date functions, clock
    and script transaction from the tables above, and the traits where it differs from the
    defaults."""
    defaults = Capabilities(name=name, sqlglot_dialect=sqlglot_dialect or name)
    return replace(defaults, dates=DATE_FUNCTIONS.get(name, defaults.dates),
                   utc_now=UTC_CLOCKS.get(name, defaults.utc_now),
                   script_transaction=SCRIPT_TRANSACTIONS.get(name, defaults.script_transaction),
                   **traits)


CAPABILITIES: dict[str, Capabilities] = {
    c.name: c
    for c in [
        _dialect("duckdb", quantile="quantile_cont", reads_files=True),
        # No GROUPING SETS, no quantile aggregate; math functions only in builds with
        # SQLITE_ENABLE_MATH_FUNCTIONS (Python's 3.40 has them).
        _dialect("sqlite", count_strategy="union_all"),
        # Pasted with its own cut points (and the console's default work_mem): 500k rows x
        # 3 categorical + 4 numeric took 13.2 s with GROUPING SETS, 5.6 s with UNION ALL,
        # 4.8 s in run mode; without cut points GROUPING SETS stays ahead, 0.4 s against
        # 1.1 s (benchmarks/paste_strategies.py, RESULTS.md).
        _dialect("postgres", quantile="percentile_cont", paste_count_strategy="union_all"),
        # WITH ROLLUP only (sqlglot would emit GROUPING SETS anyway); PERCENTILE_CONT is a
        # window function only; default collations are case-insensitive.
        _dialect("mysql", count_strategy="union_all", exact_key_type="BINARY"),
        # MariaDB speaks MySQL's SQL (sqlglot's mysql dialect) and has no GROUPING() at all;
        # its default utf8mb4_general_ci is case-insensitive and PAD SPACE, so text is
        # grouped as BINARY.
        # Pasted with its own cut points, union_all over a shared `base` recomputed every
        # window quantile once per attribute: 200k rows x 3 categorical + 4 numeric took
        # 172 s, 33 s with the cross join, 6 s in run mode; `counts` shared (one recursive
        # CTE, read five times) brought the cross join from 39.5 s to 7.8 s; union_scans
        # (each branch reads the table with only its own attribute's bounds) with `counts`
        # shared: 7.8 s against 10.5 s for that cross join, measured side by side (load 3;
        # 1.3 x again at load 4-5) (benchmarks/paste_strategies.py, RESULTS.md).
        # Run mode ranks unsegmented, unweighted attributes from bare counts instead of this
        # statement (engines/policy.py, run/value_counts.py). Sharing `counts` in run mode too
        # took 12 categorical attributes of 200k rows from 5.2 s to 1.3 s, but the model
        # files' history script renames CTEs and then fails on the recursive one (issue 20).
        _dialect("mariadb", "mysql", count_strategy="union_all", exact_key_type="BINARY",
                 paste_count_strategy="union_scans", paste_shared_ctes=("counts",)),
        _dialect("snowflake", quantile="percentile_cont"),
        _dialect("bigquery"),
        # Redshift wants every PERCENTILE_CONT of one query to share its ORDER BY: window method.
        _dialect("redshift"),
        # Trino has only approx_percentile: window method.
        _dialect("trino"),
        # PERCENTILE_CONT is window-only; collations are usually case-insensitive and
        # comparisons always ignore trailing spaces: group text as VARBINARY.
        _dialect("tsql", exact_key_type="VARBINARY(8000)",
                 create_guard="IF OBJECT_ID({table}, 'U') IS NULL"),
        _dialect("oracle", quantile="percentile_cont"),
        # sqlglot rewrites exact percentiles to percentile_approx for Spark: window method.
        _dialect("databricks"),
        # Spark's exact percentile() aggregate.
        _dialect("spark", quantile="percentile"),
        # Exact quantiles need parametric syntax (quantileExactInclusive(p)(x)) that sqlglot
        # cannot produce from the canonical dialect: window method.
        # A history table sorted by its run key (docs/scheduled-runs.md).
        _dialect("clickhouse", table_options="ENGINE = MergeTree ORDER BY (job, run_id)"),
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
