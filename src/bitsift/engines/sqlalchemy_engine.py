"""Any SQLAlchemy engine: URL, Engine or Connection; dialect mapped to bitsift's capability table."""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import URL, make_url
from sqlglot import exp

from bitsift.dialects import SQLALCHEMY_DIALECTS, capabilities
from bitsift.engines.base import Engine, FetchResult, resolve_name
from bitsift.errors import (
    MissingDriverError,
    QueryError,
    QueryTimeoutError,
    SourceError,
    TableNotFoundError,
    unknown_names_message,
)
from bitsift.schema import Column, Family

#: Which pip extra brings the driver of a SQLAlchemy backend.
DRIVER_EXTRAS: dict[str, str] = {
    "postgresql": "postgres",
    "mysql": "mysql",
    "mariadb": "mysql",
}

#: Environment variable that may hold the password instead of the URL.
PASSWORD_VARIABLE = "BITSIFT_PASSWORD"

_TIMEOUT_PATTERNS = re.compile(
    r"statement timeout|max_statement_time|max_execution_time|query execution was interrupted"
    r"|canceling statement due to statement timeout",
    re.IGNORECASE,
)


def _family(sa_type: Any) -> Family:
    if isinstance(sa_type, sa.Boolean):
        return "boolean"
    if isinstance(sa_type, sa.Integer):
        return "integer"
    if isinstance(sa_type, sa.Float):
        return "float"
    if isinstance(sa_type, sa.Numeric):
        return "decimal"
    if isinstance(sa_type, sa.DateTime):
        return "timestamp"
    if isinstance(sa_type, sa.Date):
        return "date"
    if isinstance(sa_type, sa.String | sa.Enum):
        return "text"
    return "other"


def safe_url(url: str | URL) -> str:
    """The URL with its password masked, for messages."""
    try:
        return make_url(url).render_as_string(hide_password=True)
    except Exception:  # noqa: BLE001 - an unparsable URL still must not leak
        return re.sub(r"(://[^:/@]*:)[^@]*@", r"\1***@", str(url))


@dataclass
class SqlAlchemyEngine(Engine):
    connection: sa.Connection | None = None
    engine: sa.Engine | None = None
    owned: bool = True
    secret: str | None = None

    @classmethod
    def open_url(cls, url: str) -> SqlAlchemyEngine:
        try:
            parsed = make_url(url)
        except Exception:  # noqa: BLE001
            raise SourceError(f"not a valid database URL: {safe_url(url)}") from None
        if parsed.password is None and os.environ.get(PASSWORD_VARIABLE):
            parsed = parsed.set(password=os.environ[PASSWORD_VARIABLE])
        secret = parsed.password if isinstance(parsed.password, str) else None
        backend = parsed.get_backend_name()
        try:
            engine = sa.create_engine(parsed, poolclass=sa.pool.NullPool)
        except (ModuleNotFoundError, ImportError, sa.exc.NoSuchModuleError) as error:
            extra = DRIVER_EXTRAS.get(backend)
            hint = f": pip install 'bitsift[{extra}]'" if extra else ""
            raise MissingDriverError(
                f"the driver for {parsed.drivername} is not installed{hint} ({_line(error)})"
            ) from None
        self = cls._from_engine(engine, owned=True, secret=secret)
        return self

    @classmethod
    def wrap(cls, source: sa.Engine | sa.Connection) -> SqlAlchemyEngine:
        """An Engine or Connection the caller keeps ownership of."""
        if isinstance(source, sa.Connection):
            return cls._connected(source, engine=None, owned=False, secret=None)
        return cls._from_engine(source, owned=False, secret=None)

    @classmethod
    def _from_engine(cls, engine: sa.Engine, owned: bool, secret: str | None) -> SqlAlchemyEngine:
        try:
            connection = engine.connect()
        except Exception as error:  # noqa: BLE001 - any driver error
            message = _scrub(_line(error), secret)
            raise SourceError(
                f"cannot connect to {safe_url(engine.url)}: {message}"
            ) from None
        self = cls._connected(connection, engine=engine if owned else None, owned=True,
                              secret=secret)
        self._make_read_only()
        return self

    @classmethod
    def _connected(cls, connection: sa.Connection, engine: sa.Engine | None, owned: bool,
                   secret: str | None) -> SqlAlchemyEngine:
        dialect = connection.dialect
        name = SQLALCHEMY_DIALECTS.get(dialect.name)
        if name == "mysql" and getattr(dialect, "is_mariadb", False):
            name = "mariadb"
        if name is None:
            raise SourceError(
                f"bitsift has no SQL dialect for SQLAlchemy's {dialect.name!r} engines"
            )
        return cls(caps=capabilities(name), connection=connection, engine=engine, owned=owned,
                   secret=secret)

    @property
    def con(self) -> sa.Connection:
        assert self.connection is not None, "engine is closed"
        return self.connection

    def _session(self, statement: str) -> None:
        self.statements.append(statement)
        self.con.exec_driver_sql(statement)

    def _make_read_only(self) -> None:
        if self.caps.read_only_statement:
            self._session(self.caps.read_only_statement)
        self.con.commit()

    def columns(self, table: exp.Expression, display: str) -> list[Column]:
        assert isinstance(table, exp.Table)
        schema, name = table.db or None, table.name
        inspector = sa.inspect(self.con)
        try:
            tables = inspector.get_table_names(schema=schema) + inspector.get_view_names(
                schema=schema
            )
        except Exception as error:  # noqa: BLE001 - unknown schema and friends
            raise TableNotFoundError(
                f"cannot list tables of schema {schema!r}: {_scrub(_line(error), self.secret)}"
            ) from None
        real = resolve_name(name, tables)
        if real is None:
            raise TableNotFoundError(unknown_names_message("table", [display], tables))
        table.set("this", exp.to_identifier(real, quoted=True))
        columns = inspector.get_columns(real, schema=schema)
        self.con.rollback()
        return [
            Column(name=c["name"], family=_family(c["type"]), type_name=str(c["type"]))
            for c in columns
        ]

    def set_timeout(self, seconds: float | None) -> None:
        if not seconds:
            return
        if self.caps.timeout_statement is None:
            self.notes.append(
                f"{self.caps.name} has no statement timeout; --timeout {seconds:g} is not applied"
            )
            return
        statement = self.caps.timeout_statement.format(
            ms=max(1, round(seconds * 1000)), seconds=max(1, round(seconds))
        )
        self._session(statement)
        self.con.commit()

    def fetch(self, sql: str) -> FetchResult:
        self.statements.append(sql)
        try:
            result = self.con.exec_driver_sql(sql)
            names = list(result.keys())
            rows = [tuple(r) for r in result.fetchall()]
            self.con.rollback()
        except sa.exc.DBAPIError as error:
            self._rollback_quietly()
            message = _scrub(_line(error.orig or error), self.secret)
            if _TIMEOUT_PATTERNS.search(message):
                raise QueryTimeoutError(
                    f"the query hit the --timeout and was cancelled by the server ({message})"
                ) from None
            raise QueryError(f"{self.caps.name} error: {message}") from None
        return FetchResult(columns=names, rows=rows)

    def _rollback_quietly(self) -> None:
        try:
            self.con.rollback()
        except Exception:  # noqa: BLE001, S110 - connection may be gone
            pass

    def close(self) -> None:
        if self.connection is not None and self.owned:
            self.connection.close()
        if self.engine is not None:
            self.engine.dispose()
        self.connection = None
        self.engine = None


def _scrub(text: str, secret: str | None) -> str:
    if secret:
        text = text.replace(secret, "***")
    return re.sub(r"(://[^:/@\s]*:)[^@\s]*@", r"\1***@", text)


def _line(error: BaseException) -> str:
    text = str(error).strip()
    return text.splitlines()[0] if text else type(error).__name__
