"""The results history in a DuckDB file: one writing process at a time, SQL built by sqlglot."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import duckdb
import sqlglot
from sqlglot import exp

from bitsift.jobs.duckdb_file import connect_file, ctrl_c_as_interrupt, write_transaction
from bitsift.jobs.history import COLUMN_NAMES, COLUMNS, Destination, HistoryColumn, columns_to_add
from bitsift.jobs.history_store import HistoryStore
from bitsift.spec.schema import family_of

_DUCKDB_TYPES = {"text": "VARCHAR", "integer": "BIGINT", "float": "DOUBLE",
                 "timestamp": "TIMESTAMP"}


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
        self.connection = connect_file(path, read_only=not write)

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
        where = f"{self.destination.table} in {self.destination.display}"
        with write_transaction(con, where):
            if not self.check():
                con.execute(self._create_sql())
            else:
                for column in columns_to_add(self.existing_columns() or {}):
                    con.execute(self._add_column_sql(column))
            con.execute(self._sql(delete), [job, run_id])
            if rows:
                con.executemany(self._sql(insert), [[r[n] for n in COLUMN_NAMES] for r in rows])
        return len(rows)

    def _run_rows(self, job: str) -> list[tuple[Any, ...]]:
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
        with ctrl_c_as_interrupt():
            return self.connection.execute(self._sql(query), [job]).fetchall()

    def _read_rows(self, job: str, run_ids: Sequence[str]) -> list[tuple[Any, ...]]:
        existing = self.existing_columns()
        if existing is None:
            return []
        assert self.connection is not None
        names = {name.lower() for name in existing}
        # A table of an older schema version, not yet migrated: those columns read as NULL.
        query = (
            exp.select(*(_col(n) if n in names else exp.Null().as_(n) for n in COLUMN_NAMES))
            .from_(self.table.copy())
            .where(exp.and_(_col("job").eq(exp.Placeholder()),
                            _col("run_id").isin(*(exp.Placeholder() for _ in run_ids))))
        )
        with ctrl_c_as_interrupt():
            return self.connection.execute(self._sql(query), [job, *run_ids]).fetchall()

    def _job_rows(self) -> list[tuple[Any, ...]]:
        if self.existing_columns() is None:
            return []
        assert self.connection is not None
        query = exp.select(_col("job")).distinct().from_(self.table.copy())
        with ctrl_c_as_interrupt():
            return self.connection.execute(self._sql(query)).fetchall()

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
