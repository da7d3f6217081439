"""The benchmark table on the engines that do not generate it themselves.

DuckDB generates the rows in memory (:func:`datagen.create_table_sql`) and a child process
copies them: into a SQLite file, into a uniquely named MariaDB database (dropped afterwards,
also on Ctrl-C or SIGTERM), into a Parquet file (zstd) that Spark reads, or into a MergeTree
table of a chdb database directory (loaded from such a Parquet file). Every engine so ranks the
same rows, typed from :func:`datagen.layout` (the NULL-free columns declared NOT NULL).

    python benchmarks/copies.py FORMAT PATH --rows N --attributes K [--seed S]
        [--categorical-only]        # FORMAT: sqlite, parquet, clickhouse, mariadb

For ``mariadb`` PATH is the database to fill, and the server's URL comes in the environment
(``BITSIFT_BENCH_URL``), so no password shows on a command line.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import shutil
import tempfile
import uuid
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

from datagen import (
    TABLE,
    TARGET,
    AttributeDef,
    Dataset,
    create_table_sql,
    generate_in_child,
    layout,
    sigterm_as_interrupt,
)
from sqlglot import exp

if TYPE_CHECKING:  # imported where used: the harness imports this module and must stay small
    import duckdb

#: Rows per INSERT batch on the DB-API paths (SQLite, MariaDB).
BATCH = 20_000
URL_VARIABLE = "BITSIFT_BENCH_URL"
#: Per target: the column types of the target, the integer and text categories, the doubles.
SQL_TYPES: dict[str, dict[str, str]] = {
    "sqlite": {"target": "INTEGER", "integer": "INTEGER", "text": "TEXT", "numeric": "REAL"},
    "mariadb": {"target": "INT", "integer": "BIGINT", "text": "VARCHAR(16)", "numeric": "DOUBLE"},
    "clickhouse": {"target": "Int32", "integer": "Int64", "text": "String", "numeric": "Float64"},
}
#: Spark's session for the benchmark: two cores, as the issue asks; the UI off.
SPARK_SETTINGS: dict[str, str] = {
    "spark.master": "local[2]",
    "spark.driver.memory": "4g",
    # The plain export (toPandas) collects every row in the driver: no cap on its size.
    "spark.driver.maxResultSize": "0",
    "spark.ui.enabled": "false",
    "spark.ui.showConsoleProgress": "false",
}


def _declared(target: str, kind: str, nullable: bool) -> str:
    sql_type = SQL_TYPES[target][kind]
    if target == "clickhouse":
        return f"Nullable({sql_type})" if nullable else sql_type
    return sql_type if nullable else f"{sql_type} NOT NULL"


def _kind(attribute: AttributeDef) -> str:
    if attribute.kind == "numeric":
        return "numeric"
    return "text" if attribute.text else "integer"


def create_statement(target: str, table: str, attributes: list[AttributeDef]) -> str:
    """CREATE TABLE with the generated columns typed for ``target`` (our own names only)."""
    columns = [f"{TARGET} {_declared(target, 'target', False)}"] + [
        f"{a.name} {_declared(target, _kind(a), a.null_percent > 0)}" for a in attributes
    ]
    engine = " ENGINE = MergeTree ORDER BY tuple()" if target == "clickhouse" else ""
    return f"CREATE TABLE {table} ({', '.join(columns)}){engine}"


def _generated(rows: int, k: int, seed: int, categorical_only: bool) -> duckdb.DuckDBPyConnection:
    import duckdb

    connection = duckdb.connect()
    connection.execute(create_table_sql("duckdb", TABLE, rows, k, seed, categorical_only))
    return connection


def _write_parquet(source: duckdb.DuckDBPyConnection, path: str) -> None:
    literal = exp.Literal.string(path).sql("duckdb")
    source.execute(f"COPY {TABLE} TO {literal} (FORMAT parquet, COMPRESSION zstd)")


def _copy_rows(source: duckdb.DuckDBPyConnection, cursor: Any, insert: str) -> None:
    """Every row of DuckDB's table through ``cursor.executemany(insert, batch)``, in order."""
    result = source.execute(f"SELECT * FROM {TABLE}")
    while batch := result.fetchmany(BATCH):
        cursor.executemany(insert, batch)


def write(target: str, path: str, rows: int, k: int, seed: int, categorical_only: bool) -> None:
    """Generate the table and copy it to ``target`` at ``path`` (see the module's docstring)."""
    attributes = layout(k, categorical_only)
    source = _generated(rows, k, seed, categorical_only)
    marks = ", ".join(["?" if target == "sqlite" else "%s"] * (len(attributes) + 1))
    if target == "parquet":
        _write_parquet(source, path)
    elif target == "sqlite":
        import sqlite3

        with contextlib.closing(sqlite3.connect(path)) as connection:
            connection.execute(create_statement("sqlite", TABLE, attributes))
            _copy_rows(source, connection.cursor(), f"INSERT INTO {TABLE} VALUES ({marks})")
            connection.commit()
    elif target == "mariadb":
        with contextlib.closing(mariadb_connection(os.environ[URL_VARIABLE], path)) as connection:
            cursor = connection.cursor()
            cursor.execute(create_statement("mariadb", TABLE, attributes))
            _copy_rows(source, cursor, f"INSERT INTO {TABLE} VALUES ({marks})")
            connection.commit()
            cursor.execute(f"ANALYZE TABLE {TABLE}")
            cursor.fetchall()
    elif target == "clickhouse":
        _write_chdb(source, path, attributes)
    else:
        raise ValueError(f"unknown target {target!r}")
    source.close()


def _write_chdb(source: duckdb.DuckDBPyConnection, directory: str,
                attributes: list[AttributeDef]) -> None:
    """A MergeTree table in a new chdb database directory, loaded from a Parquet file."""
    import chdb.session

    parquet = f"{directory}.parquet"
    _write_parquet(source, parquet)
    session = chdb.session.Session(directory)
    try:
        session.query(create_statement("clickhouse", TABLE, attributes))
        literal = exp.Literal.string(parquet).sql("clickhouse")
        session.query(f"INSERT INTO {TABLE} SELECT * FROM file({literal}, 'Parquet')")
        session.query(f"OPTIMIZE TABLE {TABLE} FINAL")
    finally:
        session.close()
        Path(parquet).unlink()


def mariadb_connection(url: str, database: str | None = None) -> Any:
    """A PyMySQL connection to the server of a SQLAlchemy URL."""
    import pymysql
    import sqlalchemy as sa

    parsed = sa.engine.make_url(url)
    return pymysql.connect(host=parsed.host or "127.0.0.1", port=parsed.port or 3306,
                           user=parsed.username or "root", password=parsed.password or "",
                           database=database or parsed.database, charset="utf8mb4")


@contextlib.contextmanager
def _workdir() -> Iterator[Path]:
    directory = Path(tempfile.mkdtemp(prefix="bitsift-bench-"))
    try:
        yield directory
    finally:
        shutil.rmtree(directory, ignore_errors=True)


@contextlib.contextmanager
def _mariadb_database(url: str) -> Iterator[str]:
    """A uniquely named database, dropped afterwards (also on Ctrl-C / SIGTERM)."""
    import sqlalchemy as sa

    name = f"bitsift_bench_{uuid.uuid4().hex[:12]}"
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with sigterm_as_interrupt():
            try:
                with engine.begin() as connection:
                    connection.exec_driver_sql(f"CREATE DATABASE `{name}` CHARACTER SET utf8mb4")
                yield name
            finally:
                with engine.begin() as connection:
                    connection.exec_driver_sql(f"DROP DATABASE IF EXISTS `{name}`")
    finally:
        engine.dispose()


@contextlib.contextmanager
def copied_table(engine: str, rows: int, k: int, seed: int, *, categorical_only: bool,
                 mariadb_url: str, settings: dict[str, str]) -> Iterator[Dataset]:
    """The table copied to ``engine`` (sqlite, mariadb, spark, clickhouse), removed afterwards.

    The copy is made by a child process, so the harness's own peak RSS stays small
    (:func:`datagen.duckdb_table` says why). ``settings`` go to the Spark workers, over
    :data:`SPARK_SETTINGS`.
    """
    def child(target: str, path: str) -> None:
        env = {**os.environ, URL_VARIABLE: mariadb_url} if target == "mariadb" else None
        generate_in_child(__file__, target, path, rows=rows, k=k, seed=seed,
                          categorical_only=categorical_only, env=env)

    def dataset(location: str, table: str = TABLE, **extra: Any) -> Dataset:
        return Dataset(engine, rows, k, location, table, categorical_only, **extra)  # type: ignore[arg-type]

    if engine == "mariadb":
        with _mariadb_database(mariadb_url) as database:
            child("mariadb", database)
            yield dataset(mariadb_url, f"{database}.{TABLE}")
        return
    with _workdir() as directory:
        if engine == "sqlite":
            child("sqlite", str(directory / "bench.sqlite"))
            yield dataset(str(directory / "bench.sqlite"))
        elif engine == "spark":
            child("parquet", str(directory / "bench.parquet"))
            yield dataset(str(directory / "bench.parquet"),
                          settings={**SPARK_SETTINGS, **settings})
        elif engine == "clickhouse":
            child("clickhouse", str(directory / "chdb"))
            yield dataset(str(directory / "chdb"))
        else:
            raise ValueError(f"unknown engine {engine!r}")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description="Copy the benchmark table to another engine.")
    parser.add_argument("target", choices=("sqlite", "parquet", "clickhouse", "mariadb"))
    parser.add_argument("path")
    parser.add_argument("--rows", type=int, required=True)
    parser.add_argument("--attributes", type=int, required=True)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--categorical-only", action="store_true")
    args = parser.parse_args(argv)
    write(args.target, args.path, args.rows, args.attributes, args.seed, args.categorical_only)


if __name__ == "__main__":
    main()
