"""The results history in any SQLAlchemy database, through SQLAlchemy Core; writers take turns
through a lock named after the table (the writer lock)."""

from __future__ import annotations

import hashlib
import os
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from typing import Any

import sqlalchemy as sa
from sqlalchemy.dialects import mysql

from bitsift.engines.masking import (
    environment_secrets,
    mask_text,
    url_secrets,
)
from bitsift.engines.sqlalchemy_engine import sqlalchemy_family
from bitsift.errors import first_line
from bitsift.jobs.history import COLUMNS, Destination, HistoryColumn, HistoryError, columns_to_add
from bitsift.jobs.history_store import WRITE_WAIT_SECONDS, HistoryStore, _wait_until

#: Environment variable that may hold the destination's password instead of its URL.
PASSWORD_VARIABLE = "BITSIFT_RESULTS_PASSWORD"


#: SQLAlchemy dialects whose text comparison follows a collation that may ignore case and
#: trailing spaces (``'Sales' = 'sales '`` is true): their keys are compared as UTF-8 bytes.
_COLLATING_DIALECTS = ("mysql", "mariadb")
#: SQLAlchemy dialects that understand CREATE TABLE IF NOT EXISTS.
_IF_NOT_EXISTS_DIALECTS = ("postgresql", "mysql", "mariadb", "sqlite", "duckdb")


def _sa_type(column: HistoryColumn) -> Any:
    if column.family == "text":
        if column.length:
            return sa.String(column.length)
        # MySQL's TEXT holds 64 KB; a long options list or segment may need more.
        return sa.Text().with_variant(mysql.MEDIUMTEXT(), "mysql", "mariadb")
    if column.family == "integer":
        return sa.BigInteger()
    if column.family == "float":
        return sa.Double()
    # MySQL's DATETIME keeps whole seconds unless asked: runs a second apart must still order.
    return sa.DateTime().with_variant(mysql.DATETIME(fsp=6), "mysql", "mariadb")


def history_table(name: str, schema: str | None) -> sa.Table:
    """The history table as SQLAlchemy Core defines it (its DDL is what a run creates)."""
    return sa.Table(
        name,
        sa.MetaData(),
        *(sa.Column(c.name, _sa_type(c), nullable=c.nullable) for c in COLUMNS),
        schema=schema,
        # Names in any script, emoji included (MySQL's older "utf8" stops at 3 bytes).
        mysql_charset="utf8mb4",
        mariadb_charset="utf8mb4",
    )


def create_table(table: sa.Table, dialect: sa.Dialect) -> sa.schema.CreateTable:
    """The CREATE TABLE a run sends to create ``table`` on ``dialect`` (IF NOT EXISTS where the
    dialect understands it)."""
    if_not_exists = dialect.name in _IF_NOT_EXISTS_DIALECTS
    return sa.schema.CreateTable(table, if_not_exists=if_not_exists)


class SqlAlchemyStore(HistoryStore):
    """History in any SQLAlchemy database, through SQLAlchemy Core (Table, insert, delete)."""

    def __init__(self, destination: Destination) -> None:
        super().__init__(destination)
        url = sa.engine.make_url(destination.location)
        if url.password is None and os.environ.get(PASSWORD_VARIABLE):
            url = url.set(password=os.environ[PASSWORD_VARIABLE])
        self._secrets = url_secrets(url)
        # SQLite: a writer waits this long for another one's BEGIN IMMEDIATE (default 5 s).
        connect_args = {"timeout": WRITE_WAIT_SECONDS} if url.get_backend_name() == "sqlite" else {}
        try:
            self.engine = sa.create_engine(url, poolclass=sa.pool.NullPool,
                                           connect_args=connect_args)
        except (ImportError, sa.exc.NoSuchModuleError) as error:
            raise HistoryError(
                f"the driver for {url.drivername} is not installed ({first_line(error)})"
            ) from None
        self.schema = self.table.db or None
        self.sa_table = history_table(self.table.name, self.schema)
        self._bytewise = self.engine.dialect.name in _COLLATING_DIALECTS

    @contextmanager
    def _connection(self, *, write: bool) -> Iterator[sa.Connection]:
        try:
            connection = self.engine.connect()
        except Exception as error:  # noqa: BLE001 - any driver error
            raise HistoryError(
                f"cannot connect to {self.destination.display}: {self._scrub(error)}"
            ) from None
        try:
            if write:
                self._take_writer_turn(connection)
                with connection.begin():
                    if connection.dialect.name == "sqlite":
                        # Take SQLite's write lock now, not at the first write: a reader that
                        # later wants to write fails at once instead of waiting its turn.
                        connection.exec_driver_sql("BEGIN IMMEDIATE")
                    yield connection
            else:
                yield connection
                connection.rollback()
        except sa.exc.DBAPIError as error:
            raise HistoryError(
                f"results table {self.destination.table} in {self.destination.display}: "
                + ("nothing was written: " if write else "")
                + self._scrub(error.orig or error)
            ) from None
        finally:
            connection.close()

    def _take_writer_turn(self, connection: sa.Connection) -> None:
        """Wait (up to :data:`WRITE_WAIT_SECONDS`) for a session lock named after the table.

        Without it two runs with one run id both delete (nothing, in READ COMMITTED) and then
        both insert, and two first runs both create the table. The lock is a session's, so it
        also covers a table created before the transaction; closing the connection (NullPool:
        at the end of every write) releases it, whatever happened.
        """
        name = connection.dialect.name
        identity = "\x1f".join(["bitsift history", str(self.engine.url.database or ""),
                                 self.schema or "", self.table.name])
        digest = hashlib.sha256(identity.encode("utf-8")).digest()
        if name == "postgresql":
            key = sa.literal(int.from_bytes(digest[:8], "big", signed=True), sa.BigInteger)
            take = sa.select(sa.func.pg_try_advisory_lock(key))
        elif name in _COLLATING_DIALECTS:
            # GET_LOCK names are at most 64 characters and global to the server.
            take = sa.select(sa.func.get_lock(sa.literal("bitsift_" + digest.hex()[:48]), 0))
        else:
            return
        if not _wait_until(lambda: bool(connection.execute(take).scalar()), WRITE_WAIT_SECONDS):
            raise HistoryError(
                f"results table {self.destination.table} in {self.destination.display}: "
                f"another run kept writing it for more than {WRITE_WAIT_SECONDS:g} s, so "
                "nothing was written"
            )
        connection.commit()  # ends the lock query's transaction; the session keeps the lock

    def _key(self, column: sa.ColumnElement[Any]) -> sa.ColumnElement[Any]:
        """``column`` as compared in keys: its UTF-8 bytes where the engine's collation would
        call ``'Sales'`` and ``'sales '`` equal, else the column itself."""
        if not self._bytewise:
            return column
        return sa.cast(sa.cast(column, mysql.CHAR(charset="utf8mb4")), sa.LargeBinary)

    def _key_value(self, text: str) -> str | bytes:
        """A value compared with :meth:`_key`."""
        return text.encode("utf-8") if self._bytewise else text

    def _same(self, column: sa.ColumnElement[Any], text: str) -> sa.ColumnElement[bool]:
        return self._key(column) == self._key_value(text)

    def _scrub(self, error: BaseException) -> str:
        return mask_text(first_line(error), (*self._secrets, *environment_secrets()))

    def _existing(self, connection: sa.Connection) -> dict[str, str] | None:
        inspector = sa.inspect(connection)
        if not inspector.has_table(self.table.name, schema=self.schema):
            return None
        return {c["name"]: sqlalchemy_family(c["type"])
                for c in inspector.get_columns(self.table.name, schema=self.schema)}

    def existing_columns(self) -> dict[str, str] | None:
        with self._connection(write=False) as connection:
            return self._existing(connection)

    def _newest(self, connection: sa.Connection) -> int | None:
        value = connection.execute(sa.select(sa.func.max(self.sa_table.c.schema_version))).scalar()
        return None if value is None else int(value)

    def newest_schema_version(self) -> int | None:
        with self._connection(write=False) as connection:
            return self._newest(connection)

    def schema_exists(self) -> bool:
        if not self.schema:
            return True
        with self._connection(write=False) as connection:
            return self.schema in sa.inspect(connection).get_schema_names()

    def column_widths(self) -> dict[str, int]:
        if self.engine.dialect.name == "sqlite":
            return {}  # SQLite stores text of any length whatever the declared type says
        with self._connection(write=False) as connection:
            inspector = sa.inspect(connection)
            if not inspector.has_table(self.table.name, schema=self.schema):
                return {c.name: c.length for c in COLUMNS if c.length}
            reflected = inspector.get_columns(self.table.name, schema=self.schema)
        return {c["name"].lower(): c["type"].length for c in reflected
                if isinstance(c["type"], sa.String) and c["type"].length}

    def _create(self, connection: sa.Connection) -> None:
        # IF NOT EXISTS where understood: with the writer lock held it is not needed, but a
        # writer of another bitsift version (without the lock) may create it meanwhile.
        connection.execute(create_table(self.sa_table, connection.dialect))

    def _add_column(self, connection: sa.Connection, column: HistoryColumn) -> None:
        """ALTER TABLE ... ADD COLUMN for a column an older version's table lacks (in the
        write's transaction; MySQL/MariaDB commit it at once, under the writer lock)."""
        preparer = connection.dialect.identifier_preparer
        name = preparer.format_table(self.sa_table)
        kind = _sa_type(column).compile(dialect=connection.dialect)
        connection.exec_driver_sql(
            f"ALTER TABLE {name} ADD COLUMN {preparer.quote(column.name)} {kind}")

    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        table = self.sa_table
        self._check_keys(job, run_id, rows)
        with self._connection(write=True) as connection:
            existing = self._existing(connection)
            if existing is None:
                self._create(connection)
            else:
                self._verify(existing, lambda: self._newest(connection))
                for column in columns_to_add(existing):
                    self._add_column(connection, column)
            connection.execute(table.delete().where(self._same(table.c.job, job),
                                                    self._same(table.c.run_id, run_id)))
            if rows:
                connection.execute(table.insert(), [dict(r) for r in rows])
        return len(rows)

    def _run_rows(self, job: str) -> Sequence[sa.Row[Any]]:
        table = self.sa_table
        with self._connection(write=False) as connection:
            if self._existing(connection) is None:
                return []
            # Grouped by the bytes too, so that runs R1 and r1 stay two runs.
            groups = [table.c.run_id] + ([self._key(table.c.run_id)] if self._bytewise else [])
            return connection.execute(
                sa.select(table.c.run_id, sa.func.max(table.c.run_at), sa.func.count())
                .where(self._same(table.c.job, job))
                .group_by(*groups)
            ).all()

    def _read_rows(self, job: str, run_ids: Sequence[str]) -> Sequence[sa.Row[Any]]:
        table = self.sa_table
        with self._connection(write=False) as connection:
            existing = self._existing(connection)
            if existing is None:
                return []
            names = {name.lower() for name in existing}
            keys = [self._key_value(run_id) for run_id in run_ids]
            # A table of an older schema version, not yet migrated: those columns read as NULL.
            columns = [c if c.name in names else sa.null().label(c.name) for c in table.c]
            return connection.execute(
                sa.select(*columns).where(self._same(table.c.job, job),
                                          self._key(table.c.run_id).in_(keys))
            ).all()

    def _job_rows(self) -> Sequence[sa.Row[Any]]:
        table = self.sa_table
        with self._connection(write=False) as connection:
            if self._existing(connection) is None:
                return []
            # Grouped by the bytes too, so that jobs "sales" and "Sales" stay two jobs.
            groups = [table.c.job] + ([self._key(table.c.job)] if self._bytewise else [])
            return connection.execute(sa.select(table.c.job).group_by(*groups)).all()

    def tables(self) -> list[str]:
        with self._connection(write=False) as connection:
            return sorted(sa.inspect(connection).get_table_names(schema=self.schema))

    def close(self) -> None:
        self.engine.dispose()
