"""Benchmark tables generated inside the database: N rows × K attributes plus a target ``y``.

The rows are made by the engine itself (DuckDB ``range()``, PostgreSQL ``generate_series``)
from seeded hashes of the row number, so 10M rows take seconds and no data crosses the wire.
The other engines get DuckDB's rows, copied (:mod:`copies`): SQLite and MariaDB tables, a
Parquet file for Spark, a MergeTree table in a chdb directory for ClickHouse.

Layout (deterministic in K; see :func:`layout`): every 4th attribute is a numeric DOUBLE, the
others are categorical with cardinalities cycling through :data:`CARDINALITIES` (2 … 1000),
every third categorical stored as text. Each attribute copies a function of the target in a
share of the rows (its "signal"), so the ranking has a spread of gains; every 5th attribute
has 1 % NULLs. The target has 3 classes in proportions 50/30/20. ``categorical_only``: no
numeric attribute, the cardinalities cycling all the same.
"""

from __future__ import annotations

import argparse
import contextlib
import shutil
import signal
import subprocess
import sys
import tempfile
import uuid
from collections.abc import Iterator
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Literal

EngineName = Literal["duckdb", "postgres", "mariadb", "sqlite", "spark", "clickhouse"]
#: The engines that generate the rows themselves; the others get a copy of DuckDB's.
GENERATING: tuple[EngineName, ...] = ("duckdb", "postgres")

#: Categorical cardinalities, cycled; high and low alternate so small K still spans 2 … 1000.
CARDINALITIES: tuple[int, ...] = (2, 1000, 5, 200, 10, 50, 3, 500, 20, 100)
TARGET = "y"
TABLE = "bench"
DEFAULT_POSTGRES_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"
DEFAULT_MARIADB_URL = "mysql+pymysql://root@127.0.0.1:3306/test"


@dataclass(frozen=True)
class AttributeDef:
    """One generated column."""

    index: int
    kind: Literal["categorical", "numeric"]
    cardinality: int
    text: bool
    signal_percent: int
    null_percent: int

    @property
    def name(self) -> str:
        return f"a{self.index}"


@dataclass(frozen=True)
class Dataset:
    """Where a generated table lives; passed to worker processes as JSON."""

    engine: EngineName
    rows: int
    attributes: int
    #: DuckDB and SQLite: the database file; PostgreSQL and MariaDB: the SQLAlchemy URL;
    #: Spark: the Parquet file; ClickHouse: the chdb database directory.
    location: str
    #: ``schema.table`` for PostgreSQL, ``database.table`` for MariaDB, else ``table``
    #: (Spark: the temporary view the hand-written contenders read the file through).
    table: str
    #: Every attribute categorical (:func:`layout`).
    categorical_only: bool = False
    #: What a worker starts the engine with (Spark: ``spark.master``, driver memory...).
    settings: dict[str, str] = field(default_factory=dict)

    def layout(self) -> list[AttributeDef]:
        """The generated attributes of this table."""
        return layout(self.attributes, self.categorical_only)

    def to_json(self) -> dict[str, object]:
        return asdict(self)

    @classmethod
    def from_json(cls, data: dict[str, object]) -> Dataset:
        return cls(**data)  # type: ignore[arg-type]


def layout(k: int, categorical_only: bool = False) -> list[AttributeDef]:
    """The K generated attributes, the same for every engine and seed."""
    attributes = []
    categorical_seen = 0
    for index in range(1, k + 1):
        numeric = index % 4 == 0 and not categorical_only
        cardinality = 0 if numeric else CARDINALITIES[categorical_seen % len(CARDINALITIES)]
        attributes.append(
            AttributeDef(
                index=index,
                kind="numeric" if numeric else "categorical",
                cardinality=cardinality,
                text=not numeric and categorical_seen % 3 == 2,
                signal_percent=(index * 23) % 50,
                null_percent=1 if index % 5 == 3 else 0,
            )
        )
        if not numeric:
            categorical_seen += 1
    return attributes


def _hash(engine: str, seed: int, salt: int) -> str:
    """A non-negative 63/64-bit hash of the row number ``i`` and a salt, in the engine's SQL."""
    if engine == "duckdb":
        return f"hash(i, {seed}, {salt})"
    # hashint8extended is PostgreSQL's seeded 64-bit hash; the mask keeps it non-negative.
    return f"(hashint8extended(i, {seed * 100_003 + salt}) & 9223372036854775807)"


def _mod(engine: str, left: str, right: int) -> str:
    # psycopg reads a bare % as a placeholder, so PostgreSQL gets the mod() function.
    return f"{left} % {right}" if engine == "duckdb" else f"mod({left}, {right})"


def _attribute_sql(engine: str, seed: int, a: AttributeDef) -> str:
    h_signal = _hash(engine, seed, a.index * 10 + 1)
    h_value = _hash(engine, seed, a.index * 10 + 2)
    h_null = _hash(engine, seed, a.index * 10 + 3)
    if a.kind == "numeric":
        uniform = f"({_mod(engine, h_value, 1_000_000)}) / 1000000.0"
        value = f"{uniform} + {a.signal_percent / 100.0!r} * y"
        if engine == "postgres":
            value = f"CAST({value} AS DOUBLE PRECISION)"
        else:
            value = f"CAST({value} AS DOUBLE)"
    else:
        value = (
            f"CASE WHEN {_mod(engine, h_signal, 100)} < {a.signal_percent}"
            f" THEN {_mod(engine, '(y * 7 + 1)', a.cardinality)}"
            f" ELSE {_mod(engine, h_value, a.cardinality)} END"
        )
        value = f"CAST({value} AS BIGINT)"
        if a.text:
            value = f"'v' || CAST({value} AS {'TEXT' if engine == 'postgres' else 'VARCHAR'})"
    if a.null_percent:
        value = (f"CASE WHEN {_mod(engine, h_null, 100)} < {a.null_percent}"
                 f" THEN NULL ELSE {value} END")
    return f"{value} AS {a.name}"


def create_table_sql(engine: str, table: str, rows: int, k: int, seed: int,
                     categorical_only: bool = False) -> str:
    """CREATE TABLE … AS SELECT generating the rows inside DuckDB or PostgreSQL (our own
    names only)."""
    h_target = _mod(engine, _hash(engine, seed, 0), 10)
    series = (
        f"range({rows}) AS r(i)" if engine == "duckdb" else f"generate_series(1, {rows}) AS i"
    )
    columns = ",\n  ".join(
        [TARGET] + [_attribute_sql(engine, seed, a) for a in layout(k, categorical_only)]
    )
    return (
        f"CREATE TABLE {table} AS\nSELECT\n  {columns}\nFROM (\n"
        f"  SELECT i, CAST(CASE WHEN {h_target} < 5 THEN 0"
        f" WHEN {h_target} < 8 THEN 1 ELSE 2 END AS INTEGER) AS {TARGET}\n"
        f"  FROM {series}\n) AS s"
    )


def write_duckdb_file(path: str, rows: int, k: int, seed: int,
                      categorical_only: bool = False) -> None:
    """Create the table in a new DuckDB database file."""
    import duckdb

    with duckdb.connect(path) as connection:
        connection.execute(create_table_sql("duckdb", TABLE, rows, k, seed, categorical_only))
        connection.execute("CHECKPOINT")


def generate_in_child(script: str, *arguments: str, rows: int, k: int, seed: int,
                      categorical_only: bool, env: dict[str, str] | None = None) -> None:
    """Run a generating script in a child process (see :func:`duckdb_table` for why)."""
    subprocess.run(
        [sys.executable, script, *arguments, "--rows", str(rows), "--attributes", str(k),
         "--seed", str(seed), *(["--categorical-only"] if categorical_only else [])],
        check=True, env=env,
    )


@contextlib.contextmanager
def duckdb_table(rows: int, k: int, seed: int, directory: str | None = None,
                 categorical_only: bool = False) -> Iterator[Dataset]:
    """A DuckDB database file holding the table; the file is removed afterwards.

    The file is written by a child process. On Linux a process's peak RSS (``ru_maxrss``)
    carries over from its parent through fork and exec, so the harness that starts the
    workers must never grow: generating 10M rows in it would lift every worker's figure.
    """
    workdir = Path(tempfile.mkdtemp(prefix="bitsift-bench-", dir=directory))
    path = workdir / "bench.duckdb"
    try:
        generate_in_child(__file__, str(path), rows=rows, k=k, seed=seed,
                          categorical_only=categorical_only)
        yield Dataset("duckdb", rows, k, str(path), TABLE, categorical_only)
    finally:
        shutil.rmtree(workdir, ignore_errors=True)


@contextlib.contextmanager
def sigterm_as_interrupt() -> Iterator[None]:
    """Let ``kill`` (SIGTERM) unwind like Ctrl-C, so the scratch schema is dropped."""

    def handler(signum: int, frame: object) -> None:
        raise KeyboardInterrupt(f"signal {signum}")

    previous = signal.signal(signal.SIGTERM, handler)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


@contextlib.contextmanager
def postgres_table(rows: int, k: int, seed: int, url: str = DEFAULT_POSTGRES_URL,
                   categorical_only: bool = False) -> Iterator[Dataset]:
    """The table in a uniquely named schema, dropped afterwards (also on Ctrl-C / SIGTERM)."""
    import sqlalchemy as sa

    schema = f"bitsift_bench_{uuid.uuid4().hex[:12]}"
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with sigterm_as_interrupt():
            try:
                with engine.begin() as connection:
                    connection.exec_driver_sql(f'CREATE SCHEMA "{schema}"')
                    connection.exec_driver_sql(
                        create_table_sql("postgres", f'"{schema}"."{TABLE}"', rows, k, seed,
                                         categorical_only)
                    )
                # VACUUM sets hint bits and the visibility map so the first scans are not slower.
                with engine.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
                    c.exec_driver_sql(f'VACUUM ANALYZE "{schema}"."{TABLE}"')
                yield Dataset("postgres", rows, k, url, f"{schema}.{TABLE}", categorical_only)
            finally:
                with engine.begin() as connection:
                    connection.exec_driver_sql(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE')
    finally:
        engine.dispose()


def generated_table(engine: EngineName, rows: int, k: int, seed: int,
                    postgres_url: str = DEFAULT_POSTGRES_URL, *, categorical_only: bool = False,
                    mariadb_url: str = DEFAULT_MARIADB_URL,
                    settings: dict[str, str] | None = None,
                    ) -> contextlib.AbstractContextManager[Dataset]:
    """The context manager generating (and removing) the table on ``engine``; ``settings``
    are what the workers start the engine with (Spark)."""
    if engine == "duckdb":
        return duckdb_table(rows, k, seed, categorical_only=categorical_only)
    if engine == "postgres":
        return postgres_table(rows, k, seed, postgres_url, categorical_only)
    import copies  # the copying engines; imports this module

    return copies.copied_table(engine, rows, k, seed, categorical_only=categorical_only,
                               mariadb_url=mariadb_url, settings=settings or {})


def main(argv: list[str] | None = None) -> None:
    """``python datagen.py PATH --rows N --attributes K --seed S``: write a DuckDB file."""
    parser = argparse.ArgumentParser(description="Write the benchmark table to a DuckDB file.")
    parser.add_argument("path")
    parser.add_argument("--rows", type=int, required=True)
    parser.add_argument("--attributes", type=int, required=True)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--categorical-only", action="store_true")
    args = parser.parse_args(argv)
    write_duckdb_file(args.path, args.rows, args.attributes, args.seed, args.categorical_only)


if __name__ == "__main__":
    main()
