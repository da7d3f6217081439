"""DuckDB, the embedded default: database files opened read-only, Parquet/CSV read in place."""

from __future__ import annotations

import contextlib
import threading
import uuid
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
    cancelled_error,
    query_error,
    tables_elsewhere,
    unreadable_table,
)
from bitsift.errors import QueryError, SourceError, first_line
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


#: Settings of every DuckDB connection bitsift opens: DuckDB would otherwise download and load
#: an extension when a statement or file needs one (a SQLite file, an https:// path), sending
#: requests and running fetched code although bitsift promises to send nothing anywhere.
#: Parquet, CSV and JSON readers are built in. Also used by the DuckDB history store.
SAFE_CONFIG: dict[str, str | bool | int | float | list[str]] = {
    "autoinstall_known_extensions": False,
    "autoload_known_extensions": False,
    "allow_community_extensions": False,
}


def connect(database: str, *, read_only: bool = False) -> duckdb.DuckDBPyConnection:
    """A DuckDB connection with :data:`SAFE_CONFIG` (no extension is fetched or loaded)."""
    return duckdb.connect(database, read_only=read_only, config=dict(SAFE_CONFIG))


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


#: Modules whose data frames DuckDB scans in place (pandas, Arrow tables and record batches,
#: tested; Polars, which DuckDB reads through Arrow, untested here: not installed), registered
#: on bitsift's own in-memory connection: no rows are copied.
FRAME_MODULES: tuple[str, ...] = ("pandas", "pyarrow", "polars")


def is_frame(source: object) -> bool:
    """Whether ``source`` is a data frame DuckDB can scan in place."""
    return type(source).__module__.partition(".")[0] in FRAME_MODULES


def _frame_columns(frame: object) -> list[object]:
    """A frame's own column names: Arrow's ``column_names``/``schema.names``, else ``columns``."""
    for attribute in ("column_names", "columns"):
        names = getattr(frame, attribute, None)
        if names is not None and not callable(names):
            return list(names)
    schema = getattr(frame, "schema", None)
    return list(getattr(schema, "names", []) or [])


@dataclass
class DuckDBEngine(Engine):
    connection: duckdb.DuckDBPyConnection | None = None
    #: Data frames registered by name on this session (:meth:`open_frame`); a sibling session
    #: registers them again, since a registration is visible to its own connection only.
    frames: dict[str, object] = field(default_factory=dict)

    def __post_init__(self) -> None:
        super().__post_init__()
        if self.owned and self.connection is not None:
            # DuckDB draws a progress bar on stdout once a statement has run 2 s, into a pipe
            # too, mixed into bitsift's output. A connection setting: only on bitsift's own.
            self.connection.execute("SET enable_progress_bar = false")

    has_siblings: ClassVar[bool] = True

    def _new_session(self) -> DuckDBEngine:
        # cursor(): a new connection to the same database instance, read-only if it is.
        sibling = DuckDBEngine(caps=self.caps, connection=self.con.cursor(), owned=True,
                               frames=dict(self.frames))
        for name, frame in self.frames.items():
            sibling.con.register(name, frame)
        return sibling

    @classmethod
    def open_frame(cls, frame: object) -> tuple[DuckDBEngine, exp.Table]:
        """A pandas/Arrow/Polars data frame, scanned in place by an in-memory session (DuckDB's
        ``register``: a view over the caller's memory, no copy), and the view's name."""
        name = f"bitsift_frame_{uuid.uuid4().hex}"
        connection = connect(":memory:")
        try:
            connection.register(name, frame)
        except (duckdb.Error, TypeError, ValueError) as error:
            connection.close()
            raise SourceError(f"cannot read the {type(frame).__name__}: {first_line(error)}"
                              ) from None
        view = exp.Table(this=exp.to_identifier(name, quoted=True))
        read = connection.sql(exp.select(exp.Star()).from_(view).limit(0).sql("duckdb")).columns
        own = [str(c) for c in _frame_columns(frame)]
        if own and own != read:
            connection.close()
            renamed = [f"{o!r} (read as {r!r})" for o, r in zip(own, read, strict=False) if o != r]
            raise SourceError(f"the {type(frame).__name__}'s column names collide apart from "
                              f"case or repeat: {', '.join(renamed)}; rename them (bitsift will "
                              "not guess which one a name means)")
        engine = cls(caps=capabilities("duckdb"), connection=connection, frames={name: frame})
        return engine, view

    @classmethod
    def open_file(cls, path: str) -> DuckDBEngine:
        """A database file opened read-only, or an in-memory session for Parquet/CSV files."""
        caps = capabilities("duckdb")
        if file_reader(path) is not None:
            if not any(ch in path for ch in "*?[") and not Path(path).exists():
                raise SourceError(f"no such file: {path}")
            return cls(caps=caps, connection=connect(":memory:"))
        if not Path(path).exists():
            raise SourceError(f"no such file: {path}")
        try:
            connection = connect(path, read_only=True)
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
            raise self.missing_table(display, table) from None
        except duckdb.Error as error:  # IOException and the others alike
            raise unreadable_table(display, error) from None
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
        # information_schema.tables is these two functions' rows (DuckDB 2.0's definition);
        # read directly, a fresh connection binds them in a few milliseconds, not tens.
        places = self.con.execute(
            "SELECT database_name = current_database() AND schema_name = current_schema(), "
            "schema_name FROM duckdb_tables() WHERE lower(table_name) = lower($name) "
            "UNION ALL SELECT database_name = current_database() AND schema_name = "
            "current_schema(), schema_name FROM duckdb_views() WHERE lower(view_name) = "
            "lower($name)",
            {"name": table.name},
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

    def _table_names(self) -> list[str]:
        rows = self.con.execute(
            "SELECT table_schema, table_name FROM information_schema.tables"
        ).fetchall()
        return [n for _, n in rows] + [f"{s}.{n}" for s, n in rows]

    def fetch(self, sql: str) -> FetchResult:
        # DuckDB has no statement timeout setting; a timer interrupts the query instead.
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
            raise self.timeout_error()
        return FetchResult(columns=names, rows=rows)

    def _failure(self, error: BaseException, timed_out: bool) -> QueryError:
        """The timeout if it fired, a cancel if :meth:`cancel` ran, else DuckDB's error."""
        if timed_out:
            return self.timeout_error()
        if self.cancelled.is_set():
            return cancelled_error()
        return query_error("DuckDB", first_line(error))

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
