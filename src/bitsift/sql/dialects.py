"""The capability table: what each SQL dialect can do, as data.

The query builder never asks "is this PostgreSQL?"; it asks the dialect's
:class:`Capabilities` entry. Adding a dialect means adding one entry here (and
one entry in the expectations table of ``tests/test_dialects.py``).

Entries marked ``executed_in_tests`` were checked by executing the generated SQL on
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
  ``base``) use ``paste_count_strategy`` where it is set: MariaDB ``cross_join`` (``base`` is
  evaluated once per reference there, so ``union_all`` recomputed every quantile per
  attribute: 172 s against 33 s), PostgreSQL ``union_all`` (at a console's default work_mem:
  5.6 s against 13.2 s for GROUPING SETS). benchmarks/RESULTS.md, "Paste mode".

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

import threading
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
    """What the query builder and the engines may use on one dialect."""

    name: str
    sqlglot_dialect: str
    count_strategy: CountStrategy = "grouping_sets"
    #: The count strategy of a pasted statement (``bitsift sql``, job models) that computes
    #: its own cut points: ``base`` then joins the ``bounds`` CTE, and an engine that evaluates
    #: ``base`` once per reference (``union_all`` reads it once per attribute) recomputes
    #: every quantile each time. ``None``: :attr:`count_strategy`. Measured in
    #: benchmarks/RESULTS.md ("Paste mode"; benchmarks/paste_strategies.py).
    paste_count_strategy: CountStrategy | None = None
    quantile: QuantileMethod = "window"
    #: Run mode only: how quantile cut points are found before the ranking statement.
    #: ``statement``: the bounds pre-pass with :attr:`quantile`. ``buckets``: the same exact
    #: values from three aggregate statements that never sort a whole column
    #: (:mod:`bitsift.run.quantiles`). ``counted``: where there are no segments and no weight,
    #: one scan counts (bucket, class) cells that give both the cut points and the bins'
    #: counts, and no row is binned one by one (:mod:`bitsift.run.quantile_counts`); otherwise as
    #: ``buckets``; the metrics are computed in the client from the counts (the statements
    #: are plain aggregates and window functions). Measured in benchmarks/RESULTS.md.
    run_quantile: Literal["statement", "buckets", "counted"] = "statement"
    #: Run mode only: cut the attributes into this many statements (each after its own
    #: boundaries pre-pass) and run them at once, one per session (bitsift.run.concurrent), when
    #: bitsift opened the source itself. 1: one statement. Measured in benchmarks/RESULTS.md.
    run_sessions: int = 1
    #: Type (spelled in the dialect) that grouped text values are cast to so that they compare
    #: byte-exactly. ``None``: the engine's default comparison already tells 'a' from 'A'
    #: and 'x' from 'x '. MySQL/MariaDB's default collations are case-insensitive and
    #: PAD SPACE, SQL Server's are case-insensitive and always pad.
    exact_key_type: str | None = None
    #: Run at the start of every transaction bitsift opens, to make it read-only. Must be
    #: transaction-scoped (PostgreSQL, MySQL/MariaDB ``SET TRANSACTION READ ONLY``) unless
    #: :attr:`read_only_reset` undoes it when bitsift closes the connection.
    read_only_statement: str | None = None
    #: Run at the start of every transaction after :attr:`read_only_statement`: settings
    #: scoped to bitsift's own transaction (PostgreSQL ``SET LOCAL``), never a session's.
    transaction_settings: tuple[str, ...] = ()
    #: Undoes a session-scoped :attr:`read_only_statement` at close (SQLite's pragma).
    read_only_reset: str | None = None
    #: Run at the start of every transaction to set a statement timeout; ``{ms}``,
    #: ``{seconds}`` (decimal) and ``{whole_seconds}`` (integer, at least 1) are replaced.
    timeout_statement: str | None = None
    #: Alternatively, a prefix put before every statement (MariaDB's ``SET STATEMENT ... FOR``,
    #: which leaves no session state behind), with the same placeholders.
    timeout_prefix: str | None = None
    #: The engine has no server-side timeout, and bitsift interrupts the query from the
    #: client instead (DuckDB ``interrupt()``, SQLite's progress handler).
    timeout_in_client: bool = False
    #: Settings scoped to each statement by a trailing ``SETTINGS`` clause (ClickHouse): they
    #: leave no state behind, so a caller's session is handed back unchanged.
    statement_settings: tuple[str, ...] = ()
    #: The timeout as one more such setting, with the placeholders of :attr:`timeout_statement`.
    timeout_setting: str | None = None
    #: The longest ``--timeout`` the engine's mechanism can hold, in seconds. Default: the
    #: longest wait of a Python timer, which bitsift's client-side interrupts use.
    timeout_max: float = threading.TIMEOUT_MAX
    #: SQLite builds without math functions lack LN and FLOOR: bitsift registers Python's.
    register_math_functions: bool = False
    #: Does the engine have a chi-square survival function? (none listed has; p comes from Python)
    has_chi2: bool = False
    #: True when the entry was checked by executing SQL on a real engine in the test suite.
    executed_in_tests: bool = False
    #: Dates and timestamps as epoch seconds or parts (``--numeric``, ``--date-part``).
    dates: DateFunctions = DateFunctions()
    #: A pasted statement may read a data file in place (DuckDB's read_parquet/read_csv_auto/
    #: read_json_auto); elsewhere ``bitsift sql FILE`` needs ``--table`` naming the table.
    reads_files: bool = False

    @property
    def for_paste(self) -> Capabilities:
        """These capabilities with the pasted statement's count strategy."""
        if self.paste_count_strategy is None:
            return self
        return replace(self, count_strategy=self.paste_count_strategy, paste_count_strategy=None)

    @property
    def has_timeout(self) -> bool:
        """True when ``--timeout`` is enforced on this dialect, by the server or by bitsift."""
        return bool(self.timeout_statement or self.timeout_prefix or self.timeout_in_client
                    or self.timeout_setting)


_DEFAULT = Capabilities(name="generic", sqlglot_dialect="")

CAPABILITIES: dict[str, Capabilities] = {
    c.name: c
    for c in [
        replace(
            _DEFAULT,
            name="duckdb",
            sqlglot_dialect="duckdb",
            quantile="quantile_cont",
            run_quantile="counted",
            run_sessions=2,
            timeout_in_client=True,
            executed_in_tests=True,
            reads_files=True,
        ),
        # No GROUPING SETS, no quantile aggregate; math functions only in builds with
        # SQLITE_ENABLE_MATH_FUNCTIONS (Python's 3.40 has them).
        replace(
            _DEFAULT,
            name="sqlite",
            sqlglot_dialect="sqlite",
            count_strategy="union_all",
            # 500k rows x 4 numeric + 3 categorical: 19.2 s with the window quantile, 6.7 s
            # with bucket cut points, 5.8 s counted (benchmarks/quantile_methods.py).
            run_quantile="counted",
            read_only_statement="PRAGMA query_only = ON",
            read_only_reset="PRAGMA query_only = OFF",
            timeout_in_client=True,
            register_math_functions=True,
            executed_in_tests=True,
        ),
        replace(
            _DEFAULT,
            name="postgres",
            sqlglot_dialect="postgres",
            quantile="percentile_cont",
            # Pasted with its own cut points (and the console's default work_mem): 500k rows x
            # 3 categorical + 4 numeric took 13.2 s with GROUPING SETS, 5.6 s with UNION ALL,
            # 4.8 s in run mode; without cut points GROUPING SETS stays ahead, 0.4 s against
            # 1.1 s (benchmarks/paste_strategies.py, RESULTS.md).
            paste_count_strategy="union_all",
            run_quantile="counted",
            run_sessions=2,
            # The planner estimates a binned column's groups from the raw column's distinct
            # values (millions) and, at the default 4MB, sorts and spills instead of hashing
            # a few dozen groups: 2M x 16 took 19.7 s, 10.2 s with this (RESULTS.md).
            transaction_settings=("SET LOCAL work_mem = '256MB'",),
            timeout_statement="SET LOCAL statement_timeout = {ms}",
            # statement_timeout is a 32-bit count of milliseconds (pg_settings.max_val).
            timeout_max=2_147_483.647,
            read_only_statement="SET TRANSACTION READ ONLY",
            executed_in_tests=True,
        ),
        # WITH ROLLUP only (sqlglot would emit GROUPING SETS anyway); PERCENTILE_CONT is a
        # window function only; default collations are case-insensitive.
        replace(
            _DEFAULT,
            name="mysql",
            sqlglot_dialect="mysql",
            count_strategy="union_all",
            exact_key_type="BINARY",
            timeout_statement="SET SESSION max_execution_time = {ms}",
            # max_execution_time: an unsigned 32-bit count of milliseconds.
            timeout_max=4_294_967.295,
            read_only_statement="SET TRANSACTION READ ONLY",
        ),
        # MariaDB speaks MySQL's SQL (sqlglot's mysql dialect), has no GROUPING() at all, and
        # names its timeout differently; its default utf8mb4_general_ci is case-insensitive
        # and PAD SPACE, so text is grouped as BINARY.
        replace(
            _DEFAULT,
            name="mariadb",
            sqlglot_dialect="mysql",
            count_strategy="union_all",
            # Pasted with its own cut points, union_all recomputed the window quantiles once
            # per attribute: 200k rows x 3 categorical + 4 numeric took 172 s, 33 s with the
            # cross join, 6 s in run mode (benchmarks/paste_strategies.py, RESULTS.md).
            paste_count_strategy="cross_join",
            # Bucket cut points: 500k rows x 4 numeric + 3 categorical took 3.8 s against 14.5 s
            # with the window quantile; counted from cells, 200k rows: 4.24 s against 4.35 s
            # for bucket cut points, and no row binned (benchmarks/quantile_methods.py).
            run_quantile="counted",
            exact_key_type="BINARY",
            timeout_prefix="SET STATEMENT max_statement_time = {seconds} FOR ",
            # max_statement_time: at most 31536000 s (one year, SYSTEM_VARIABLES on 10.11);
            # a larger value is silently cut to that.
            timeout_max=31_536_000.0,
            read_only_statement="SET TRANSACTION READ ONLY",
            executed_in_tests=True,
        ),
        replace(
            _DEFAULT,
            name="snowflake",
            sqlglot_dialect="snowflake",
            quantile="percentile_cont",
            timeout_statement="ALTER SESSION SET STATEMENT_TIMEOUT_IN_SECONDS = {whole_seconds}",
            # At most 604800 s (seven days), from Snowflake's parameter reference.
            timeout_max=604_800.0,
        ),
        replace(_DEFAULT, name="bigquery", sqlglot_dialect="bigquery"),
        # Redshift wants every PERCENTILE_CONT of one query to share its ORDER BY: window method.
        replace(
            _DEFAULT,
            name="redshift",
            sqlglot_dialect="redshift",
            timeout_statement="SET statement_timeout TO {ms}",
            timeout_max=2_147_483.647,  # as PostgreSQL's: 32-bit milliseconds
        ),
        # Trino has only approx_percentile: window method.
        replace(_DEFAULT, name="trino", sqlglot_dialect="trino"),
        # PERCENTILE_CONT is window-only; collations are usually case-insensitive and
        # comparisons always ignore trailing spaces: group text as VARBINARY.
        replace(_DEFAULT, name="tsql", sqlglot_dialect="tsql", exact_key_type="VARBINARY(8000)"),
        replace(_DEFAULT, name="oracle", sqlglot_dialect="oracle", quantile="percentile_cont"),
        # sqlglot rewrites exact percentiles to percentile_approx for Spark: window method.
        replace(_DEFAULT, name="databricks", sqlglot_dialect="databricks"),
        # Executed on a local Spark 4.3 (tests/test_spark.py). Spark's exact percentile()
        # aggregate; no statement timeout, so bitsift interrupts its own tagged operation.
        replace(
            _DEFAULT,
            name="spark",
            sqlglot_dialect="spark",
            quantile="percentile",
            timeout_in_client=True,
            executed_in_tests=True,
        ),
        # Executed on embedded ClickHouse, chdb 4.4 (tests/test_clickhouse.py). Exact quantiles
        # need parametric syntax (quantileExactInclusive(p)(x)) that sqlglot cannot produce
        # from the canonical dialect: window method. readonly = 2 rejects writes yet lets the
        # same SETTINGS clause set max_execution_time (readonly = 1 would refuse that, and
        # also refuses the file() table function).
        replace(
            _DEFAULT,
            name="clickhouse",
            sqlglot_dialect="clickhouse",
            statement_settings=("readonly = 2",),
            timeout_setting="max_execution_time = {seconds}",
            # Held as int64 microseconds: chdb 4.4 refuses 9223372036855 s and more.
            timeout_max=9_223_372_036_854.0,
            executed_in_tests=True,
        ),
    ]
}

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
CAPABILITIES = {name: replace(c, dates=DATE_FUNCTIONS.get(name, c.dates))
                for name, c in CAPABILITIES.items()}

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
