"""The results history in a DuckDB file: one writing process at a time, SQL built by sqlglot."""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import duckdb
import sqlglot
from sqlglot import exp

from bitsift.engines.duckdb_engine import connect
from bitsift.errors import first_line
from bitsift.jobs.history import (
    COLUMN_NAMES,
    COLUMNS,
    Destination,
    HistoryColumn,
    HistoryError,
    RunInfo,
    columns_to_add,
)
from bitsift.jobs.history_store import (
    WRITE_WAIT_SECONDS,
    HistoryStore,
    _ctrl_c_as_interrupt,
    _interrupted,
    _newest_first,
    _rows_to_dicts,
    _wait_until,
)
from bitsift.spec.schema import family_of

_DUCKDB_TYPES = {"text": "VARCHAR", "integer": "BIGINT", "float": "DOUBLE",
                 "timestamp": "TIMESTAMP"}


def _connect_duckdb(path: Path, *, read_only: bool) -> duckdb.DuckDBPyConnection:
    """Open the results file, waiting up to :data:`WRITE_WAIT_SECONDS` while another process
    holds it: DuckDB lets one process write a file, and nobody else open it meanwhile."""
    opened: list[duckdb.DuckDBPyConnection] = []
    conflicts: list[duckdb.Error] = []

    def attempt() -> bool:
        try:
            opened.append(connect(str(path), read_only=read_only))
        except duckdb.IOException as error:
            if "lock" not in str(error).lower():
                message = f"cannot open results file {path}: {first_line(error)}"
                raise HistoryError(message) from None
            conflicts.append(error)
            return False
        except duckdb.Error as error:
            message = f"cannot open results file {path}: {first_line(error)}"
            raise HistoryError(message) from None
        return True

    if not _wait_until(attempt, WRITE_WAIT_SECONDS):
        raise HistoryError(
            f"results file {path} was held by another process for more than "
            f"{WRITE_WAIT_SECONDS:g} s, so nothing was written to it: {first_line(conflicts[-1])}"
        )
    return opened[0]


def _ident(name: str) -> exp.Identifier:
    return exp.to_identifier(name, quoted=True)


def _col(name: str) -> exp.Column:
    return exp.column(_ident(name))


def create_table_sql(table: exp.Table, dialect: str, table_options: str | None = None) -> str:
    """CREATE TABLE IF NOT EXISTS of the history table as a DuckDB results file has it, in
    ``dialect`` (sqlglot spells the types), ``table_options`` after it."""
    definitions = [
        exp.ColumnDef(
            this=_ident(c.name),
            # nullable=False: ClickHouse would wrap the type in Nullable() beside NOT NULL.
            kind=exp.DataType.build(_DUCKDB_TYPES[c.family], nullable=c.nullable),
            constraints=[] if c.nullable else [
                exp.ColumnConstraint(kind=exp.NotNullColumnConstraint())
            ],
        )
        for c in COLUMNS
    ]
    create = exp.Create(this=exp.Schema(this=table.copy(), expressions=definitions),
                        kind="TABLE", exists=True)
    text = create.sql(dialect, unsupported_level=sqlglot.ErrorLevel.RAISE)
    return f"{text} {table_options}" if table_options else text


class DuckDBStore(HistoryStore):
    """History in a DuckDB database file; SQL built by sqlglot with ``?`` parameters."""

    def __init__(self, destination: Destination, *, write: bool) -> None:
        super().__init__(destination)
        path = destination.path
        self.connection: duckdb.DuckDBPyConnection | None = None
        if not write and not path.exists():
            return
        self.connection = _connect_duckdb(path, read_only=not write)

    def _sql(self, tree: exp.Expression) -> str:
        return tree.sql("duckdb")

    def existing_columns(self) -> dict[str, str] | None:
        if self.connection is None:
            return None
        schema = self.table.db or "main"
        query = ("SELECT column_name, data_type FROM information_schema.columns "
                 "WHERE lower(table_schema) = lower(?) AND lower(table_name) = lower(?)")
        parameters = [schema, self.table.name]
        if self.table.catalog:
            query += " AND lower(table_catalog) = lower(?)"
            parameters.append(self.table.catalog)
        rows = self.connection.execute(query, parameters).fetchall()
        if not rows:
            return None
        return {name: family_of(type_name, "duckdb") for name, type_name in rows}

    def schema_exists(self) -> bool:
        schema = self.table.db
        if not schema:
            return True
        if self.connection is None:  # no file yet: it will have only DuckDB's "main"
            return schema.lower() == "main"
        query = ("SELECT count(*) FROM information_schema.schemata "
                 "WHERE lower(schema_name) = lower(?)")
        row = self.connection.execute(query, [schema]).fetchone()
        return bool(row and row[0])

    def newest_schema_version(self) -> int | None:
        assert self.connection is not None
        query = exp.select(exp.func("MAX", _col("schema_version"))).from_(self.table.copy())
        row = self.connection.execute(self._sql(query)).fetchone()
        return None if row is None or row[0] is None else int(row[0])

    def _create_sql(self) -> str:
        return create_table_sql(self.table, "duckdb")

    def _add_column_sql(self, column: HistoryColumn) -> str:
        """ALTER TABLE ... ADD COLUMN for a column an older schema version's table lacks."""
        definition = exp.ColumnDef(this=_ident(column.name),
                                   kind=exp.DataType.build(_DUCKDB_TYPES[column.family]))
        return self._sql(exp.Alter(this=self.table.copy(), kind="TABLE",
                                   actions=[definition]))

    def _run_filter(self) -> exp.Condition:
        return exp.and_(_col("job").eq(exp.Placeholder()), _col("run_id").eq(exp.Placeholder()))

    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        assert self.connection is not None, "opened for reading only"
        con = self.connection
        self._check_keys(job, run_id, rows)
        delete = exp.delete(self.table.copy(), where=self._run_filter())
        insert = exp.insert(
            exp.Values(expressions=[exp.tuple_(*(exp.Placeholder() for _ in COLUMNS))]),
            self.table.copy(),
            columns=[_ident(n) for n in COLUMN_NAMES],
        )
        # This process holds the file alone (see _connect_duckdb): writers take turns.
        con.begin()
        try:
            if not self.check():
                con.execute(self._create_sql())
            else:
                for column in columns_to_add(self.existing_columns() or {}):
                    con.execute(self._add_column_sql(column))
            con.execute(self._sql(delete), [job, run_id])
            if rows:
                con.executemany(self._sql(insert), [[r[n] for n in COLUMN_NAMES] for r in rows])
            con.commit()
        except BaseException as error:
            con.rollback()
            if _interrupted(error):
                raise KeyboardInterrupt from None
            if isinstance(error, duckdb.Error):
                raise HistoryError(
                    f"writing to {self.destination.table} in {self.destination.display} failed, "
                    f"nothing was written: {first_line(error)}"
                ) from None
            raise
        return len(rows)

    def runs(self, job: str) -> list[RunInfo]:
        if self.existing_columns() is None:
            return []
        assert self.connection is not None
        query = (
            exp.select(_col("run_id"), exp.func("MAX", _col("run_at")).as_("run_at"),
                       exp.func("COUNT", exp.Star()).as_("n"))
            .from_(self.table.copy())
            .where(_col("job").eq(exp.Placeholder()))
            .group_by(_col("run_id"))
        )
        with _ctrl_c_as_interrupt():
            result = self.connection.execute(self._sql(query), [job]).fetchall()
        return _newest_first(RunInfo(r[0], r[1], int(r[2])) for r in result)

    def read(self, job: str, run_ids: Iterable[str]) -> list[dict[str, Any]]:
        ids = list(run_ids)
        if not ids or self.existing_columns() is None:
            return []
        assert self.connection is not None
        existing = {name.lower() for name in self.existing_columns() or {}}
        # A table of an older schema version, not yet migrated: those columns read as NULL.
        query = (
            exp.select(*(_col(n) if n in existing else exp.Null().as_(n)
                         for n in COLUMN_NAMES))
            .from_(self.table.copy())
            .where(exp.and_(_col("job").eq(exp.Placeholder()),
                            _col("run_id").isin(*(exp.Placeholder() for _ in ids))))
        )
        with _ctrl_c_as_interrupt():
            fetched = self.connection.execute(self._sql(query), [job, *ids]).fetchall()
        return _rows_to_dicts(COLUMN_NAMES, fetched)

    def jobs(self) -> list[str]:
        if self.existing_columns() is None:
            return []
        assert self.connection is not None
        query = exp.select(_col("job")).distinct().from_(self.table.copy())
        with _ctrl_c_as_interrupt():
            fetched = self.connection.execute(self._sql(query)).fetchall()
        return sorted(str(r[0]) for r in fetched)

    def tables(self) -> list[str]:
        if self.connection is None:
            return []
        query = ("SELECT table_name FROM information_schema.tables "
                 "WHERE lower(table_schema) = lower(?)")
        fetched = self.connection.execute(query, [self.table.db or "main"]).fetchall()
        return sorted(str(r[0]) for r in fetched)

    def close(self) -> None:
        if self.connection is not None:
            self.connection.close()
        self.connection = None
