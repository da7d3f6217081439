"""DuckDB, the embedded default: database files opened read-only, Parquet/CSV read in place."""

from __future__ import annotations

import contextlib
import threading
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import ClassVar

import duckdb
from sqlglot import exp

from bitsift.engines.base import (
    MAX_SCHEMAS_SEARCHED,
    Engine,
    FetchResult,
    check_timeout_limit,
    missing_table_error,
    tables_elsewhere,
)
from bitsift.errors import (
    QueryCancelledError,
    QueryError,
    QueryTimeoutError,
    SourceError,
    first_line,
    unknown_names_message,
)
from bitsift.spec.schema import Column, family_of
from bitsift.sql.dialects import capabilities

FILE_READERS: dict[str, str] = {
    ".parquet": "read_parquet",
    ".pq": "read_parquet",
    ".csv": "read_csv_auto",
    ".tsv": "read_csv_auto",
    ".txt": "read_csv_auto",
    ".gz": "read_csv_auto",
    ".json": "read_json_auto",
    ".ndjson": "read_json_auto",
    ".jsonl": "read_json_auto",
}


def file_reader(path: str) -> str | None:
    """The DuckDB table function that reads ``path`` in place, or None for a database file."""
    suffixes = Path(path).suffixes
    if suffixes[-2:-1] == [".csv"] and suffixes[-1] in (".gz", ".zst"):
        return "read_csv_auto"
    return FILE_READERS.get(suffixes[-1].lower()) if suffixes else None


def file_table(path: str, arguments: Sequence[exp.Expression] = ()) -> exp.Expression:
    """``read_parquet('path')``: the path is a string literal, never an identifier;
    ``arguments``: the reader's named arguments (:mod:`bitsift.engines.read_options`)."""
    reader = file_reader(path)
    assert reader is not None
    return exp.Table(this=exp.Anonymous(this=reader, expressions=[exp.Literal.string(path),
                                                                  *arguments]))


@dataclass
class DuckDBEngine(Engine):
    connection: duckdb.DuckDBPyConnection | None = None
    timeout: float | None = field(default=None)

    def __post_init__(self) -> None:
        super().__post_init__()
        if self.owned and self.connection is not None:
            # DuckDB draws a progress bar on stdout once a statement has run 2 s, into a pipe
            # too, mixed into bitsift's output. A connection setting: only on bitsift's own.
            self.connection.execute("SET enable_progress_bar = false")

    has_siblings: ClassVar[bool] = True

    def _new_session(self) -> DuckDBEngine:
        # cursor(): a new connection to the same database instance, read-only if it is.
        return DuckDBEngine(caps=self.caps, connection=self.con.cursor(), owned=True)

    @classmethod
    def open_file(cls, path: str) -> DuckDBEngine:
        """A database file opened read-only, or an in-memory session for Parquet/CSV files."""
        caps = capabilities("duckdb")
        if file_reader(path) is not None:
            if not any(ch in path for ch in "*?[") and not Path(path).exists():
                raise SourceError(f"no such file: {path}")
            return cls(caps=caps, connection=duckdb.connect(":memory:"))
        if not Path(path).exists():
            raise SourceError(f"no such file: {path}")
        try:
            connection = duckdb.connect(path, read_only=True)
        except duckdb.Error as error:
            message = f"cannot open {path} as a DuckDB database: {first_line(error)}"
            raise SourceError(message) from None
        return cls(caps=caps, connection=connection)

    @classmethod
    def wrap(cls, connection: duckdb.DuckDBPyConnection) -> DuckDBEngine:
        """A connection the caller opened and keeps ownership of."""
        return cls(caps=capabilities("duckdb"), connection=connection, owned=False)

    @property
    def con(self) -> duckdb.DuckDBPyConnection:
        assert self.connection is not None, "engine is closed"
        return self.connection

    def catalog_columns(self, table: exp.Expression, display: str) -> list[Column]:
        query = exp.select(exp.Star()).from_(table).limit(0).sql("duckdb")
        try:
            relation = self.con.sql(query)
            names, types = relation.columns, relation.types
        except duckdb.CatalogException:
            elsewhere = self._tables_elsewhere(table)
            message = (f"unknown table: {display!r}" if elsewhere
                       else self._missing_table_message(table, display))
            raise missing_table_error(message, elsewhere) from None
        except duckdb.IOException as error:
            raise SourceError(f"cannot read {display}: {first_line(error)}") from None
        except duckdb.Error as error:
            raise SourceError(f"cannot read {display}: {first_line(error)}") from None
        self._qualify(table)
        return [
            Column(name=n, family=family_of(str(t), "duckdb"), type_name=str(t))
            for n, t in zip(names, types, strict=True)
        ]

    def _qualify(self, table: exp.Expression) -> None:
        """Write out the schema of an unqualified table that lives in the current schema, so
        that a table named like one of the statement's CTEs ("bounds") is not read as that CTE.

        Left as it is when the name resolves elsewhere (a temporary table, a DataFrame the
        connection scans by name) or nowhere in the catalog.
        """
        if not isinstance(table, exp.Table) or table.db or not isinstance(table.this,
                                                                          exp.Identifier):
            return
        places = self.con.execute(
            "SELECT table_catalog = current_database() AND table_schema = current_schema(), "
            "table_schema FROM information_schema.tables WHERE lower(table_name) = lower(?)",
            [table.name],
        ).fetchall()
        if len(places) == 1 and places[0][0]:
            table.set("db", exp.to_identifier(places[0][1], quoted=True))

    def _tables_elsewhere(self, table: exp.Expression) -> list[str]:
        """Other schemas (of any attached database) holding a table of this name."""
        if not isinstance(table, exp.Table):
            return []
        rows = self.con.execute(
            "SELECT table_catalog, table_schema, list(table_name ORDER BY table_name) "
            "FROM information_schema.tables GROUP BY ALL ORDER BY ALL LIMIT ?",
            [MAX_SCHEMAS_SEARCHED]).fetchall()
        current = self.con.execute("SELECT current_database()").fetchone()
        here = current[0] if current else None
        # The schema searched holds no such table (or it would have been found): no filter.
        places = [(schema if catalog == here else f"{catalog}.{schema}", tables)
                  for catalog, schema, tables in rows]
        return tables_elsewhere(table.name, places)

    def _missing_table_message(self, table: exp.Expression, display: str) -> str:
        rows = self.con.execute(
            "SELECT table_schema, table_name FROM information_schema.tables"
        ).fetchall()
        names = [n for _, n in rows] + [f"{s}.{n}" for s, n in rows]
        return unknown_names_message("table", [display], names)

    def set_timeout(self, seconds: float | None) -> None:
        # DuckDB has no statement timeout setting; a timer interrupts the query instead.
        check_timeout_limit(self.caps, seconds)
        self.timeout = seconds

    def fetch(self, sql: str) -> FetchResult:
        self.refuse_if_cancelled()
        self.statements.append(sql)
        timer = None
        fired = threading.Event()
        if self.timeout:
            def interrupt() -> None:
                fired.set()
                self.con.interrupt()

            timer = threading.Timer(self.timeout, interrupt)
            timer.start()
        try:
            cursor = self.con.execute(sql)
            names = [d[0] for d in cursor.description or []]
            rows = cursor.fetchall()
        except (duckdb.Error, RuntimeError) as error:
            raise self._failure(error, fired.is_set()) from None
        finally:
            if timer is not None:
                timer.cancel()
        if fired.is_set():
            # An interrupt that lands before DuckDB starts executing is lost and the query
            # runs to the end; it still ran past the deadline, so the outcome is the same.
            raise self._timeout_error()
        return FetchResult(columns=names, rows=rows)

    def _failure(self, error: BaseException, timed_out: bool) -> QueryError:
        """The timeout if it fired, a cancel if :meth:`cancel` ran, else DuckDB's error."""
        if timed_out:
            return self._timeout_error()
        if self.cancelled.is_set():
            return QueryCancelledError("the query was cancelled")
        return QueryError(f"DuckDB error: {first_line(error)}")

    def _timeout_error(self) -> QueryTimeoutError:
        return QueryTimeoutError(
            f"the query ran longer than --timeout {self.timeout:g} s and was cancelled")

    def cancel(self) -> None:
        """From another thread: interrupt the running statement (``interrupt()`` is
        thread-safe), refuse new ones."""
        super().cancel()
        connection = self.connection  # close() may run meanwhile in the main thread
        if connection is not None:
            # A connection closed since: nothing is left running to interrupt.
            with contextlib.suppress(duckdb.ConnectionException):
                connection.interrupt()

    def close(self) -> None:
        if self.owned and self.connection is not None:
            self.connection.close()
        self.connection = None
