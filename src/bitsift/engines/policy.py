"""The run policy: what bitsift's session does on each engine, as data.

The SQL a dialect can express is in :mod:`bitsift.sql.dialects` (:class:`Capabilities`, all a
pasted statement needs). What a *running* session does besides (make itself read-only, set
and enforce the timeout, spread the attributes over sibling sessions, find cut points in
steps) depends on the engine bitsift talks to, and lives here, one :class:`RunPolicy` per
dialect name; dialects without an entry get the defaults (nothing sent, no timeout, one
session, the bounds pre-pass).

>>> run_policy("postgres").timeout.sql
'SET LOCAL statement_timeout = {ms}'
>>> run_policy("bigquery") == RunPolicy()
True
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from typing import Literal

#: A transaction made read-only, in the SQL standard's words (PostgreSQL, MySQL, MariaDB).
READ_ONLY_TRANSACTION = "SET TRANSACTION READ ONLY"


@dataclass(frozen=True)
class Timeout:
    """How an engine enforces ``--timeout``: one mechanism, and the longest value it holds."""

    #: ``none``: not enforced (a note says so). ``client``: bitsift interrupts the statement
    #: (DuckDB ``interrupt()``, SQLite's progress handler, Spark job tags). ``transaction``:
    #: :attr:`sql` runs at the start of every transaction. ``prefix``: :attr:`sql` goes before
    #: every statement (MariaDB's ``SET STATEMENT ... FOR``, which leaves no session state
    #: behind). ``setting``: :attr:`sql` is one more of the statement's ``SETTINGS``.
    how: Literal["none", "client", "transaction", "prefix", "setting"] = "none"
    #: The SQL, with ``{ms}``, ``{seconds}`` (decimal) and ``{whole_seconds}`` (integer, at
    #: least 1) replaced.
    sql: str | None = None
    #: The longest ``--timeout`` the mechanism can hold, in seconds. Default: the longest wait
    #: of a Python timer, which bitsift's client-side interrupts use.
    longest: float = threading.TIMEOUT_MAX

    def filled(self, seconds: float) -> str:
        """:attr:`sql` with its placeholders filled from a validated number of seconds.

        >>> Timeout("prefix", "SET STATEMENT max_statement_time = {seconds} FOR ").filled(2)
        'SET STATEMENT max_statement_time = 2.000000 FOR '
        """
        assert self.sql is not None, f"a {self.how!r} timeout has no SQL"
        return self.sql.format(
            ms=max(1, round(seconds * 1000)),
            seconds=f"{max(seconds, 0.000001):.6f}",
            whole_seconds=max(1, round(seconds)),
        )


@dataclass(frozen=True)
class RunPolicy:
    """What a session on one engine does besides sending the statements it is asked to."""

    #: How quantile cut points are found before the ranking statement.
    #: ``statement``: the bounds pre-pass with the dialect's ``quantile``. ``buckets``: the same
    #: exact values from three aggregate statements that never sort a whole column
    #: (:mod:`bitsift.run.quantiles`). ``counted``: where there are no segments and no weight,
    #: one scan counts (bucket, class) cells that give both the cut points (on fine-bucket
    #: edges above 100,000 rows, exact below and where the buckets are too coarse) and the
    #: bins' exact counts, and no row is binned one by one
    #: (:mod:`bitsift.run.quantile_counts`); otherwise as
    #: ``buckets``; the metrics are computed in the client from the counts (the statements
    #: are plain aggregates and window functions). Measured in benchmarks/RESULTS.md.
    run_quantile: Literal["statement", "buckets", "counted"] = "statement"
    #: Cut the attributes into this many statements (each after its own boundaries pre-pass)
    #: and run them at once, one per session (bitsift.run.concurrent), when bitsift opened the
    #: source itself. 1: one statement. Measured in benchmarks/RESULTS.md.
    run_sessions: int = 1
    #: Where run mode counts quantile bins from cells in a part of their own (``counted``,
    #: :attr:`run_sessions` > 1), that part also ranks as many of the other attributes as
    #: even out the sessions' loads (:func:`bitsift.run.concurrent._balanced`). Pays where a
    #: session runs a statement on one core (PostgreSQL 500k x 16: 1.27x -> 1.04x the
    #: counting bound in one interleaved run); DuckDB spreads each statement over every core
    #: already, and a second ranking statement only adds its own scan (1.49x -> 1.55x).
    balance_counted_part: bool = False
    #: How the attributes that are not ranked from quantile cells are counted in run mode
    #: (unsegmented, unweighted rankings). ``statement``: the ranking statement computes
    #: their metrics. ``client``: one bare ``GROUP BY value, class`` per attribute, the
    #: metrics computed in the client from the counts (:mod:`bitsift.run.value_counts`),
    #: each attribute a part of its own over the :attr:`run_sessions`; an attribute with
    #: more than :attr:`client_cells` (value, class) cells is ranked by the statement.
    run_counts: Literal["statement", "client"] = "statement"
    #: The most (value, class) cells one attribute may send to the client (``client``).
    client_cells: int = 100_000
    #: Run at the start of every transaction bitsift opens, to make it read-only. Must be
    #: transaction-scoped (PostgreSQL, MySQL/MariaDB ``SET TRANSACTION READ ONLY``) unless
    #: :attr:`read_only_reset` undoes it when bitsift closes the connection.
    read_only_statement: str | None = None
    #: Run at the start of every transaction after :attr:`read_only_statement`: settings
    #: scoped to bitsift's own transaction (PostgreSQL ``SET LOCAL``), never a session's.
    transaction_settings: tuple[str, ...] = ()
    #: Undoes a session-scoped :attr:`read_only_statement` at close (SQLite's pragma).
    read_only_reset: str | None = None
    #: Settings scoped to each statement by a trailing ``SETTINGS`` clause (ClickHouse): they
    #: leave no state behind, so a caller's session is handed back unchanged.
    statement_settings: tuple[str, ...] = ()
    #: How ``--timeout`` is enforced (:class:`Timeout`).
    timeout: Timeout = Timeout()
    #: SQLite builds without math functions lack LN and FLOOR: bitsift registers Python's.
    register_math_functions: bool = False

    @property
    def has_timeout(self) -> bool:
        """True when ``--timeout`` is enforced on this engine, by the server or by bitsift."""
        return self.timeout.how != "none"


POLICIES: dict[str, RunPolicy] = {
    "duckdb": RunPolicy(
        run_quantile="counted",
        run_sessions=2,
        # Each attribute its own bare GROUP BY, metrics in the client, 2 sessions: one
        # interleaved run each against main's ranking statement (2026-12-05, shared 2-core
        # machine, load 2-4): 10M x 16 1.20x the counting bound (before 1.33x), 3M x 12
        # categorical 1.08x (before 1.36x). One session: 1.34x; DuckDB threads = 1 per
        # session: no better (benchmarks/RESULTS.md, issue 20).
        run_counts="client",
        timeout=Timeout("client"),
    ),
    "sqlite": RunPolicy(
        # 500k rows x 4 numeric + 3 categorical: 19.2 s with the window quantile, 6.7 s
        # with bucket cut points, 5.8 s counted (benchmarks/quantile_methods.py).
        run_quantile="counted",
        # Each attribute its own bare GROUP BY, metrics in the client, 2 sessions: 16
        # categorical x 200k rows, interleaved on a loaded machine (load 5): 3.9 s, 4.0 s on
        # one session, 4.6 s with the ranking statement; the bound 3.2-4.0 s (issue 20).
        run_sessions=2,
        run_counts="client",
        read_only_statement="PRAGMA query_only = ON",
        read_only_reset="PRAGMA query_only = OFF",
        timeout=Timeout("client"),
        register_math_functions=True,
    ),
    "postgres": RunPolicy(
        run_quantile="counted",
        run_sessions=2,
        balance_counted_part=True,
        read_only_statement=READ_ONLY_TRANSACTION,
        # The planner estimates a binned column's groups from the raw column's distinct
        # values (millions) and, at the default 4MB, sorts and spills instead of hashing
        # a few dozen groups: 2M x 16 took 19.7 s, 10.2 s with this (RESULTS.md).
        transaction_settings=("SET LOCAL work_mem = '256MB'",),
        # statement_timeout is a 32-bit count of milliseconds (pg_settings.max_val).
        timeout=Timeout("transaction", "SET LOCAL statement_timeout = {ms}", 2_147_483.647),
    ),
    # max_execution_time: an unsigned 32-bit count of milliseconds.
    "mysql": RunPolicy(read_only_statement=READ_ONLY_TRANSACTION, timeout=Timeout(
        "transaction", "SET SESSION max_execution_time = {ms}", 4_294_967.295)),
    "mariadb": RunPolicy(
        # Bucket cut points: 500k rows x 4 numeric + 3 categorical took 3.8 s against 14.5 s
        # with the window quantile; counted from cells, 200k rows: 4.24 s against 4.35 s
        # for bucket cut points, and no row binned (benchmarks/quantile_methods.py).
        run_quantile="counted",
        # Each attribute its own bare GROUP BY, metrics in the client, 2 sessions: 16
        # categorical x 200k rows, interleaved (load 4.7): 2.3 s, 2.7 s on one session,
        # 12.1 s with the ranking statement (it reads `counts` once per reference);
        # the bound 2.2-2.9 s (issue 20).
        run_sessions=2,
        run_counts="client",
        read_only_statement=READ_ONLY_TRANSACTION,
        # max_statement_time: at most 31536000 s (one year, SYSTEM_VARIABLES on 10.11);
        # a larger value is silently cut to that.
        timeout=Timeout("prefix", "SET STATEMENT max_statement_time = {seconds} FOR ",
                        31_536_000.0),
    ),
    # At most 604800 s (seven days), from Snowflake's parameter reference.
    "snowflake": RunPolicy(timeout=Timeout(
        "transaction", "ALTER SESSION SET STATEMENT_TIMEOUT_IN_SECONDS = {whole_seconds}",
        604_800.0)),
    # As PostgreSQL's: 32-bit milliseconds.
    "redshift": RunPolicy(timeout=Timeout("transaction", "SET statement_timeout TO {ms}",
                                          2_147_483.647)),
    # No statement timeout in Spark: bitsift interrupts its own tagged operation.
    "spark": RunPolicy(timeout=Timeout("client")),
    # readonly = 2 rejects writes yet lets the same SETTINGS clause set max_execution_time
    # (readonly = 1 would refuse that, and also refuses the file() table function). The
    # timeout is held as int64 microseconds: chdb 4.4 refuses 9223372036855 s and more.
    "clickhouse": RunPolicy(statement_settings=("readonly = 2",), timeout=Timeout(
        "setting", "max_execution_time = {seconds}", 9_223_372_036_854.0)),
}


def run_policy(dialect: str) -> RunPolicy:
    """The run policy of a dialect (its bitsift name, :attr:`Capabilities.name`)."""
    return POLICIES.get(dialect, RunPolicy())
