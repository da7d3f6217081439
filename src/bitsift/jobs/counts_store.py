"""The counts table and its metadata in the destination (docs/stored-counts.md): a DuckDB file
or a SQLAlchemy URL, written in one transaction while the table's other writers wait, with the
history's writer lock and file waiting (:mod:`bitsift.jobs.duckdb_file`,
:mod:`bitsift.jobs.history_sqlalchemy`).

A write replaces the partitions it carries (and, with ``recount_from``, every partition from
there on), so two runs counting the same partition leave it once."""

from __future__ import annotations

import uuid
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

import duckdb
import sqlalchemy as sa
from sqlalchemy.dialects import mysql
from sqlglot import exp

from bitsift.jobs.counts_rows import CountsRows
from bitsift.jobs.duckdb_file import connect_file, write_transaction
from bitsift.jobs.history import Destination, HistoryError
from bitsift.jobs.history_sqlalchemy import SqlAlchemyStore
from bitsift.run.counts_meta import CountsMeta
from bitsift.sql.counts_sql import COUNTS_COLUMNS, META_COLUMNS, META_SUFFIX

#: Rows sent per INSERT batch.
_BATCH = 100_000
#: Partitions named per DELETE ... IN (...).
_IN_BATCH = 500



class CountsConflict(HistoryError):
    """The destination holds counts built otherwise (another target, other attributes...)."""


@dataclass
class Write:
    """One run's write: its metadata, rows, the partitions they replace, and how."""

    meta: CountsMeta
    rows: CountsRows
    partitions: list[str | int]
    recount_from: str | int | None = None
    refit: bool = False


def _check_meta(stored: CountsMeta | None, write: Write, where: str) -> None:
    if write.refit or stored is None:
        return
    if stored.cuts != write.meta.cuts or [a["name"] for a in stored.attributes] != [
            a["name"] for a in write.meta.attributes]:
        raise CountsConflict(f"{where} was built meanwhile by another run with other "
                             "attributes or cut points; nothing was written: run again")


class CountsStore:
    """The counts destination: read its state, write one run's counts."""

    def __init__(self, destination: Destination) -> None:
        self.destination = destination
        self.table = destination.table_name()
        self.where = f"counts table {destination.table} in {destination.display}"

    def state(self) -> tuple[CountsMeta | None, str | int | None]:
        """The stored metadata and newest partition (None, None: nothing stored yet)."""
        raise NotImplementedError

    def write(self, write: Write) -> int:
        raise NotImplementedError


def open_counts_store(destination: Destination) -> CountsStore:
    problems = destination.keyed_problems()
    if problems:
        raise HistoryError(problems=problems)
    if destination.is_url:
        return SqlAlchemyCounts(destination)
    return DuckDBCounts(destination)


# --- DuckDB file ---------------------------------------------------------------------------

def _ident(name: str) -> exp.Identifier:
    return exp.to_identifier(name, quoted=True)


class DuckDBCounts(CountsStore):
    """Counts in a DuckDB file; SQL built by sqlglot with ``?`` parameters."""

    def _meta_table(self) -> exp.Table:
        meta = self.table.copy()
        meta.set("this", _ident(self.table.name + META_SUFFIX))
        return meta

    def _exists(self, con: duckdb.DuckDBPyConnection) -> bool:
        query = ("SELECT count(*) FROM information_schema.tables WHERE lower(table_schema) = "
                 "lower(?) AND table_name = ?")
        row = con.execute(query, [self.table.db or "main", self.table.name + META_SUFFIX]
                          ).fetchone()
        return bool(row and row[0])

    def _read(self, con: duckdb.DuckDBPyConnection) -> tuple[CountsMeta | None,
                                                             str | int | None]:
        if not self._exists(con):
            return None, None
        rows = con.execute(exp.select(*(_ident(c) for c in META_COLUMNS))
                           .from_(self._meta_table()).sql("duckdb")).fetchall()
        if not rows:
            return None, None
        newest = con.execute(exp.select(exp.func("MAX", exp.column(_ident("partition"))))
                             .from_(self.table.copy()).sql("duckdb")).fetchone()
        return CountsMeta.from_rows(rows, self.where), newest[0] if newest else None

    def state(self) -> tuple[CountsMeta | None, str | int | None]:
        if not self.destination.path.exists():
            return None, None
        con = connect_file(self.destination.path, read_only=True)
        try:
            return self._read(con)
        finally:
            con.close()

    @staticmethod
    def _types(kind: str) -> dict[str, str]:
        return {"partition": "BIGINT" if kind == "integer" else "VARCHAR",
                "attribute_index": "INTEGER", "attribute": "VARCHAR", "value": "VARCHAR",
                "class": "VARCHAR", "n": "BIGINT", "key": "VARCHAR"}

    def _create(self, con: duckdb.DuckDBPyConnection, kind: str) -> None:
        types = self._types(kind)
        for table, columns in ((self.table, COUNTS_COLUMNS), (self._meta_table(), META_COLUMNS)):
            definitions = [exp.ColumnDef(this=_ident(c), kind=exp.DataType.build(types[c]))
                           for c in columns]
            con.execute(exp.Create(this=exp.Schema(this=table.copy(), expressions=definitions),
                                   kind="TABLE", exists=True).sql("duckdb"))

    def _insert(self, con: duckdb.DuckDBPyConnection, rows: CountsRows, kind: str) -> None:
        """The rows in one statement, read from their NumPy columns registered on the
        connection: executemany() inserts about a thousand rows a second, list parameters
        about 300,000, a registered column scan (no per-value conversion) over a million."""
        types = self._types(kind)
        arrays = dict(zip(COUNTS_COLUMNS, rows.columns, strict=True))
        view = f"bitsift_rows_{uuid.uuid4().hex}"
        con.register(view, arrays)
        try:
            con.execute(exp.insert(exp.select(*(
                exp.cast(exp.column(_ident(c)), exp.DataType.build(types[c], dialect="duckdb"))
                for c in COUNTS_COLUMNS)).from_(exp.Table(this=_ident(view))),
                self.table.copy(), columns=[_ident(c) for c in COUNTS_COLUMNS]).sql("duckdb"))
        finally:
            con.unregister(view)

    def _replace(self, con: duckdb.DuckDBPyConnection, write: Write) -> None:
        """The write's statements, in the caller's transaction."""
        partition = exp.column(_ident("partition"))
        if write.refit:  # the partition column's type may change with the rebuild
            for table in (self.table, self._meta_table()):
                con.execute(exp.Drop(tables=[table.copy()], kind="TABLE", exists=True
                                     ).sql("duckdb"))
        self._create(con, write.meta.partition_kind)
        stored, _ = self._read(con)
        _check_meta(stored, write, self.where)
        if write.recount_from is not None:
            later = partition.copy() >= exp.Placeholder()
            con.execute(exp.delete(self.table.copy(), where=later).sql("duckdb"),
                        [write.recount_from])
        for chunk in _chunks(write.partitions, _IN_BATCH):
            con.execute(exp.delete(self.table.copy(), where=partition.copy().isin(
                *(exp.Placeholder() for _ in chunk))).sql("duckdb"), list(chunk))
        if write.rows:
            self._insert(con, write.rows, write.meta.partition_kind)
        con.execute(exp.delete(self._meta_table()).sql("duckdb"))
        con.executemany(exp.insert(exp.Values(expressions=[exp.tuple_(
            exp.Placeholder(), exp.Placeholder())]), self._meta_table(),
            columns=[_ident(c) for c in META_COLUMNS]).sql("duckdb"),
            [list(r) for r in write.meta.rows()])

    def write(self, write: Write) -> int:
        con = connect_file(self.destination.path, read_only=False)
        try:
            with write_transaction(con, self.where):
                self._replace(con, write)
        finally:
            con.close()
        return len(write.rows)


# --- SQLAlchemy ----------------------------------------------------------------------------

def _text(length: int | None = None) -> Any:
    """Text compared byte for byte also on MySQL/MariaDB (a binary collation)."""
    base: Any = sa.String(length) if length else sa.Text()
    variant = (mysql.VARCHAR(length, charset="utf8mb4", collation="utf8mb4_bin") if length
               else mysql.MEDIUMTEXT(charset="utf8mb4", collation="utf8mb4_bin"))
    return base.with_variant(variant, "mysql", "mariadb")


class SqlAlchemyCounts(CountsStore):
    """Counts in any SQLAlchemy database, through SQLAlchemy Core; writers take turns through
    the history's writer lock (named after the counts table)."""

    def __init__(self, destination: Destination) -> None:
        super().__init__(destination)
        self._store = SqlAlchemyStore(destination)
        self.schema = self.table.db or None

    def _tables(self, kind: str) -> tuple[sa.Table, sa.Table]:
        metadata = sa.MetaData()
        options: dict[str, Any] = {"schema": self.schema, "mysql_charset": "utf8mb4",
                                   "mariadb_charset": "utf8mb4"}
        counts = sa.Table(
            self.table.name, metadata,
            sa.Column("partition", sa.BigInteger() if kind == "integer" else _text(255),
                      nullable=False),
            sa.Column("attribute_index", sa.Integer(), nullable=False),
            sa.Column("attribute", _text(), nullable=False),
            sa.Column("value", _text()), sa.Column("class", _text()),
            sa.Column("n", sa.BigInteger(), nullable=False), **options)
        meta = sa.Table(self.table.name + META_SUFFIX, metadata,
                        sa.Column("key", _text(100), nullable=False),
                        sa.Column("value", _text(), nullable=False), **options)
        return counts, meta

    def _read(self, connection: sa.Connection, kind: str = "text",
              ) -> tuple[CountsMeta | None, str | int | None]:
        counts, meta = self._tables(kind)
        if not sa.inspect(connection).has_table(meta.name, schema=self.schema):
            return None, None
        rows = connection.execute(sa.select(meta.c.key, meta.c.value)).all()
        if not rows:
            return None, None
        newest = connection.execute(sa.select(sa.func.max(counts.c.partition))).scalar()
        return CountsMeta.from_rows([tuple(r) for r in rows], self.where), newest

    def state(self) -> tuple[CountsMeta | None, str | int | None]:
        with self._store._connection(write=False) as connection:
            return self._read(connection)

    def _insert(self, connection: sa.Connection, counts: sa.Table, rows: list[list[Any]],
                ) -> None:
        """The rows by PostgreSQL's COPY where the driver is psycopg (a tenth of the time of
        batched INSERTs), else by batched INSERTs; in the connection's transaction either way."""
        driver = connection.connection.driver_connection
        copying = (connection.dialect.name, connection.dialect.driver) == ("postgresql", "psycopg")
        if not copying or driver is None:
            for batch in _chunks(rows, _BATCH):
                connection.execute(sa.insert(counts),
                                   [dict(zip(COUNTS_COLUMNS, r, strict=True)) for r in batch])
            return
        statement = exp.Copy(this=exp.Schema(this=self.table.copy(), expressions=[
            _ident(c) for c in COUNTS_COLUMNS]), kind=True, files=[exp.to_identifier("STDIN")])
        with driver.cursor() as cursor, cursor.copy(statement.sql("postgres")) as copy:
            for row in rows:
                copy.write_row(row)

    def write(self, write: Write) -> int:
        counts, meta = self._tables(write.meta.partition_kind)
        with self._store._connection(write=True) as connection:
            if write.refit:  # the partition column's type may change with the rebuild
                counts.metadata.drop_all(connection, checkfirst=True)
            counts.metadata.create_all(connection, checkfirst=True)
            stored, _ = self._read(connection, write.meta.partition_kind)
            _check_meta(stored, write, self.where)
            if write.recount_from is not None:
                connection.execute(sa.delete(counts).where(
                    counts.c.partition >= write.recount_from))
            for chunk in _chunks(write.partitions, _IN_BATCH):
                connection.execute(sa.delete(counts).where(counts.c.partition.in_(list(chunk))))
            self._insert(connection, counts, write.rows.as_lists())
            connection.execute(sa.delete(meta))
            connection.execute(sa.insert(meta), [{"key": k, "value": v}
                                                 for k, v in write.meta.rows()])
        return len(write.rows)


def _chunks(items: Sequence[Any], size: int) -> Iterable[Sequence[Any]]:
    for start in range(0, len(items), size):
        yield items[start:start + size]
