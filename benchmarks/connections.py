"""Per engine, what the hand-written contenders (contenders.py) stand on: the analyst's sessions
and cursors, the two ways of reading the table into pandas, the quantile query, and the Spark
session a worker starts before its clock.

Spark and ClickHouse have no DB-API cursor here: :class:`Statements` gives their sessions the
three calls the contenders use (``execute``, ``fetchone``, ``fetchall``). The SQL is the
analyst's own; the only names in it are the generated table's.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import numpy as np
from datagen import TARGET, AttributeDef, Dataset
from sqlglot import exp

#: bitsift's engine names -> the sqlglot dialect the hand-written SQL is quoted for.
DIALECTS: dict[str, str] = {
    "duckdb": "duckdb",
    "postgres": "postgres",
    "mariadb": "mysql",
    "sqlite": "sqlite",
    "spark": "spark",
    "clickhouse": "clickhouse",
}
#: Sessions the counting bound (e) counts on at once (default 2, as bitsift's run mode on
#: DuckDB and PostgreSQL). Spark runs two jobs at once on its one session; chdb's embedded
#: session takes one statement at a time, and ClickHouse spreads each over every core anyway.
BOUND_SESSIONS: dict[str, int] = {"clickhouse": 1}
#: Engines whose bound is also measured on one session (e1), the faster of the two being the
#: bound: on SQLite two connections reading one file were slower than one in a preliminary
#: 200k x 16 run (issue 20), and MariaDB's server threads share the same 2 cores; which is
#: faster depends on the machine's load, so both are measured side by side.
ONE_SESSION_BOUND: frozenset[str] = frozenset({"sqlite", "mariadb"})
#: The second export reader per engine: the engine's columnar (Arrow) export where it has
#: one, else the plain DB-API fetch (cursor.fetchall into a DataFrame, no pandas.read_sql).
FAST_READER: dict[str, str] = {
    "duckdb": "arrow",
    "spark": "arrow",
    "clickhouse": "arrow",
    "postgres": "fetch",
    "mariadb": "fetch",
    "sqlite": "fetch",
}


def bound_sessions(dataset: Dataset) -> int:
    return BOUND_SESSIONS.get(dataset.engine, 2)


def identifier(name: str, dataset: Dataset) -> str:
    return exp.to_identifier(name, quoted=True).sql(DIALECTS[dataset.engine])


def table_sql(dataset: Dataset) -> str:
    return ".".join(identifier(part, dataset) for part in dataset.table.split("."))


def bitsift_source(dataset: Dataset) -> tuple[Any, str | None]:
    """SOURCE and ``table`` as a user passes them to ``bitsift.rank`` for this engine."""
    if dataset.engine in ("spark", "clickhouse"):
        from bitsift.engines.sources import EngineSource

        # Spark: the Parquet file on the active session; ClickHouse: the chdb directory.
        source = EngineSource(dataset.engine, dataset.location)
        return source, None if dataset.engine == "spark" else dataset.table
    return dataset.location, dataset.table


# --- the Spark session of a worker ------------------------------------------------------------


def prepare(dataset: Dataset) -> None:
    """Before the clock: start Spark's session (``dataset.settings``: local[2], ...) and run
    one trivial statement, as a session an analyst has open would have."""
    if dataset.engine != "spark":
        return
    from bitsift.engines.spark_engine import import_pyspark

    builder = import_pyspark().SparkSession.builder
    for key, value in dataset.settings.items():
        builder = builder.config(key, value)
    session = builder.getOrCreate()
    session.sparkContext.setLogLevel("ERROR")
    session.sql("SELECT 1").collect()


def finish(dataset: Dataset) -> None:
    """After the clock: stop the session :func:`prepare` started."""
    if dataset.engine == "spark":
        _spark().stop()


def _spark() -> Any:
    from pyspark.sql import SparkSession

    session = SparkSession.getActiveSession()
    assert session is not None, "no Spark session: connections.prepare() starts it"
    return session


def _spark_view(dataset: Dataset) -> Any:
    """The active session, with the Parquet file as the temporary view ``dataset.table``."""
    session = _spark()
    session.read.parquet(dataset.location).createOrReplaceTempView(dataset.table)
    return session


# --- cursors -------------------------------------------------------------------------------------


class Statements:
    """``execute`` / ``fetchone`` / ``fetchall`` over a function running one statement."""

    def __init__(self, run: Callable[[str], list[tuple[Any, ...]]]) -> None:
        self._run = run
        self._rows: list[tuple[Any, ...]] = []

    def execute(self, sql: str) -> None:
        self._rows = self._run(sql)

    def fetchone(self) -> tuple[Any, ...] | None:
        return self._rows[0] if self._rows else None

    def fetchall(self) -> list[tuple[Any, ...]]:
        return self._rows


def _chdb_rows(session: Any) -> Callable[[str], list[tuple[Any, ...]]]:
    def run(sql: str) -> list[tuple[Any, ...]]:
        table = session.query(sql, "ArrowTable")
        return list(zip(*(column.to_pylist() for column in table.columns), strict=True))

    return run


@contextmanager
def session_pool(dataset: Dataset, workers: int) -> Iterator[list[Any]]:
    """``workers`` cursors on separate sessions (DuckDB: cursors of one read-only database;
    Spark: statements on the one session; chdb: one session, whatever ``workers`` says)."""
    engine = dataset.engine
    if engine == "duckdb":
        import duckdb

        connection = duckdb.connect(dataset.location, read_only=True)
        try:
            yield [connection.cursor() for _ in range(workers)]
        finally:
            connection.close()
    elif engine == "spark":
        session = _spark_view(dataset)
        yield [Statements(lambda sql: [tuple(r) for r in session.sql(sql).collect()])
               for _ in range(workers)]
    elif engine == "clickhouse":
        import chdb.session

        chdb_session = chdb.session.Session(dataset.location)
        try:
            yield [Statements(_chdb_rows(chdb_session))]
        finally:
            chdb_session.close()
    else:
        connections = [_dbapi_connection(dataset) for _ in range(workers)]
        try:
            yield [c.cursor() for c in connections]
        finally:
            for c in connections:
                c.close()


def _dbapi_connection(dataset: Dataset) -> Any:
    if dataset.engine == "postgres":
        import psycopg

        return psycopg.connect(
            dataset.location.replace("postgresql+psycopg://", "postgresql://", 1))
    if dataset.engine == "mariadb":
        from copies import mariadb_connection

        return mariadb_connection(dataset.location)
    import sqlite3

    # check_same_thread off: the counting bound hands the cursors to its threads.
    return sqlite3.connect(f"file:{dataset.location}?mode=ro", uri=True,
                           check_same_thread=False)


@contextmanager
def cursor(dataset: Dataset) -> Iterator[Any]:
    """One plain cursor (read-only for DuckDB and SQLite files)."""
    with session_pool(dataset, 1) as (one,):
        yield one


# --- the export path -------------------------------------------------------------------------


def read_frame(dataset: Dataset, query: str, reader: str) -> Any:
    """``query``'s rows as a pandas DataFrame. ``dbapi``: the plain read an analyst writes
    (``pandas.read_sql``; Spark ``toPandas``; chdb's ``DataFrame`` output); ``arrow``: the
    engine's columnar export (DuckDB ``.df()``, Spark ``toPandas`` with Arrow on, chdb
    ``ArrowTable``); ``fetch``: ``cursor.fetchall()`` into a DataFrame."""
    engine = dataset.engine
    if reader == "fetch":
        import pandas as pd

        with cursor(dataset) as one:
            one.execute(query)
            rows = one.fetchall()
            names = [d[0] for d in one.description]
        return pd.DataFrame(rows, columns=names)
    if engine == "spark":
        session = _spark_view(dataset)
        session.conf.set("spark.sql.execution.arrow.pyspark.enabled", reader == "arrow")
        return session.sql(query).toPandas()
    if engine == "clickhouse":
        import chdb.session

        chdb_session = chdb.session.Session(dataset.location)
        try:
            if reader == "arrow":
                return chdb_session.query(query, "ArrowTable").to_pandas()
            return chdb_session.query(query, "DataFrame")
        finally:
            chdb_session.close()
    if engine == "duckdb" and reader == "arrow":
        with cursor(dataset) as one:
            return one.sql(query).df()
    return _read_sql(dataset, query)


def _read_sql(dataset: Dataset, query: str) -> Any:
    """``pandas.read_sql``: on the DB-API connection (DuckDB, SQLite), else SQLAlchemy's."""
    import pandas as pd

    if dataset.engine in ("duckdb", "sqlite"):
        with cursor(dataset) as one, warnings.catch_warnings():
            # pandas reads any DB-API connection but warns that it only tests SQLAlchemy's
            # and sqlite3's.
            warnings.simplefilter("ignore", UserWarning)
            connection = one.connection if dataset.engine == "sqlite" else one
            return pd.read_sql(query, connection)
    import sqlalchemy as sa

    engine = sa.create_engine(dataset.location, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            return pd.read_sql(sa.text(query), connection)
    finally:
        engine.dispose()


# --- the quantile query ------------------------------------------------------------------------


def quantile_cuts(one: Any, dataset: Dataset, numeric: Sequence[AttributeDef],
                  levels: Sequence[float]) -> dict[str, list[float]]:
    """Each numeric column's exact (linear) quantiles at ``levels``, rows with a target only.

    One aggregate per column (DuckDB ``quantile_cont``, PostgreSQL ``percentile_cont``, Spark
    ``percentile``, ClickHouse ``quantilesExactInclusive``); MariaDB has ``PERCENTILE_CONT``
    as a window function only; SQLite has none: each column is read and cut by NumPy.
    """
    if not numeric:
        return {}
    table, target = table_sql(dataset), identifier(TARGET, dataset)
    columns = [identifier(a.name, dataset) for a in numeric]
    if dataset.engine == "sqlite":
        found = {}
        for a, column in zip(numeric, columns, strict=True):
            one.execute(f"SELECT {column} FROM {table}"
                        f" WHERE {column} IS NOT NULL AND {target} IS NOT NULL")
            values = np.fromiter((r[0] for r in one.fetchall()), dtype=float)
            found[a.name] = list(np.quantile(values, levels)) if len(values) else []
        return found
    if dataset.engine == "mariadb":
        parts = [f"PERCENTILE_CONT({p!r}) WITHIN GROUP (ORDER BY {c}) OVER ()"
                 for c in columns for p in levels]
        one.execute(f"SELECT {', '.join(parts)} FROM {table} WHERE {target} IS NOT NULL LIMIT 1")
        row = one.fetchone()
        width = len(levels)
        return {a.name: list(row[i * width:(i + 1) * width]) for i, a in enumerate(numeric)}
    listed = ", ".join(repr(p) for p in levels)
    aggregate = {
        "duckdb": lambda c: f"quantile_cont({c}, [{listed}])",
        "postgres": lambda c: f"percentile_cont(ARRAY[{listed}]) WITHIN GROUP (ORDER BY {c})",
        "spark": lambda c: f"percentile({c}, array({listed}))",
        "clickhouse": lambda c: f"quantilesExactInclusive({listed})({c})",
    }[dataset.engine]
    one.execute(f"SELECT {', '.join(aggregate(c) for c in columns)} FROM {table}"
                f" WHERE {target} IS NOT NULL")
    row = one.fetchone()
    return {a.name: list(row[i]) for i, a in enumerate(numeric)}
