"""ClickHouse, embedded (chdb): Parquet files read in place, or tables of a chdb database directory.

A caller's :class:`chdb.session.Session` is used as it is and never closed. Settings are
scoped to each statement by a trailing ``SETTINGS`` clause (the run policy's
``statement_settings`` and its ``setting`` timeout: ``readonly = 2`` and ``max_execution_time``),
so no session, a caller's included, keeps any state from bitsift.
"""

from __future__ import annotations

import contextlib
import re
import uuid
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlglot import exp

from bitsift.engines.base import Engine, FetchResult, query_error, unreadable_table
from bitsift.engines.policy import RunPolicy
from bitsift.errors import MissingDriverError, SourceError, SpecError, first_line, install_extra
from bitsift.spec.schema import Column, Family, family_of
from bitsift.sql.dialects import capabilities

#: ClickHouse error codes bitsift tells apart (``Code: N. DB::Exception ...``).
_UNKNOWN_TABLE_CODES = frozenset({60, 81})  # UNKNOWN_TABLE, UNKNOWN_DATABASE
_TIMEOUT_CODES = frozenset({159})  # TIMEOUT_EXCEEDED
_CODE = re.compile(r"Code:\s*(\d+)")
#: Wrappers that do not change what a value is: LowCardinality(T) and Nullable(T) hold T.
_WRAPPER = re.compile(r"^(LowCardinality|Nullable)\((.*)\)$")


def import_chdb() -> Any:
    """The ``chdb.session`` module, or :class:`MissingDriverError` naming the extra."""
    try:
        import chdb.session
    except ImportError:
        raise MissingDriverError(
            f"the ClickHouse engine needs chdb: {install_extra('clickhouse')}"
        ) from None
    return chdb.session


def clickhouse_family(type_name: str) -> Family:
    """The bitsift type family of a ClickHouse type as ``DESCRIBE`` prints it.

    >>> clickhouse_family("LowCardinality(Nullable(String))")
    'text'
    >>> clickhouse_family("Nullable(Decimal(10, 2))")
    'decimal'
    """
    inner = type_name.strip()
    while match := _WRAPPER.match(inner):
        inner = match.group(2).strip()
    if inner.startswith(("Enum8(", "Enum16(", "FixedString(")):
        return "text"
    return family_of(inner, "clickhouse")


def settings_clause(policy: RunPolicy, timeout: float | None) -> str:
    """The trailing ``SETTINGS`` clause for one statement, or ``""``.

    >>> from bitsift.engines.policy import run_policy
    >>> settings_clause(run_policy("clickhouse"), 2.5)
    '\\nSETTINGS readonly = 2, max_execution_time = 2.500000'
    """
    settings = list(policy.statement_settings)
    if timeout and policy.timeout.how == "setting":
        settings.append(policy.timeout.filled(timeout))
    # On its own line: the statement may end with a comment.
    return "\nSETTINGS " + ", ".join(settings) if settings else ""


@dataclass
class ChdbEngine(Engine):
    """Runs bitsift's statements in an embedded ClickHouse session."""

    session: Any = None
    #: The ``tmp/`` folder chdb made in a database directory on opening it, removed on close:
    #: bitsift leaves the directory as it found it.
    made_tmp: Path | None = None

    @classmethod
    def wrap(cls, session: Any) -> ChdbEngine:
        """A chdb Session the caller keeps ownership of (never closed by bitsift)."""
        return cls(caps=capabilities("clickhouse"), session=session, owned=False)

    @classmethod
    def in_memory(cls) -> ChdbEngine:
        """A new in-memory session (for Parquet files read in place)."""
        return cls(caps=capabilities("clickhouse"), session=import_chdb().Session(":memory:"))

    @classmethod
    def open_directory(cls, path: str) -> ChdbEngine:
        """An existing chdb database directory; every statement runs with ``readonly = 2``."""
        directory = Path(path)
        if not directory.is_dir():
            raise SourceError(f"no such chdb database directory: {path}")
        if not (directory / "metadata").is_dir():
            # chdb would turn any folder into a database (tmp/, data/, ...): never create one.
            raise SourceError(f"{path} is not a chdb database directory (it has no metadata/)")
        text = str(directory.resolve())
        if "?" in text:
            # chdb reads '?key=value' after a path as engine start-up arguments.
            raise SourceError(f"a chdb database path may not contain '?': {path}")
        tmp = directory / "tmp"
        made_tmp = None if tmp.exists() else tmp
        try:
            session = import_chdb().Session(text)
        except MissingDriverError:
            raise
        except Exception as error:  # noqa: BLE001 - chdb raises RuntimeError subclasses
            _remove_empty(made_tmp)
            message = f"cannot open {path} as a chdb database: {first_line(error)}"
            raise SourceError(message) from None
        return cls(caps=capabilities("clickhouse"), session=session, made_tmp=made_tmp)

    def read_parquet(self, path: str) -> exp.Table:
        """A Parquet file (or glob) as a uniquely named view over ``file(path, 'Parquet')``.

        Only on a session bitsift owns (in memory, gone at close). The path is a sqlglot string
        literal; the view gives the templates a plain quoted name to read from.
        """
        assert self.owned, "views go only into bitsift's own session"
        view = exp.Table(this=exp.to_identifier(f"bitsift_{uuid.uuid4().hex}", quoted=True))
        reader = exp.Table(this=exp.Anonymous(
            this="file", expressions=[exp.Literal.string(path), exp.Literal.string("Parquet")]
        ))
        create = exp.Create(kind="VIEW", this=view,
                            expression=exp.select(exp.Star()).from_(reader))
        statement = create.sql("clickhouse")
        self.statements.append(statement)
        try:
            self._query(statement)
        except Exception as error:  # noqa: BLE001 - chdb raises RuntimeError subclasses
            raise SourceError(f"ClickHouse cannot read {path}: {first_line(error)}") from None
        return view

    def _query(self, sql: str) -> Any:
        assert self.session is not None, "engine is closed"
        return self.session.query(sql, "ArrowTable")

    def catalog_columns(self, table: exp.Expression, display: str) -> list[Column]:
        query = "DESCRIBE TABLE " + table.sql("clickhouse") + settings_clause(self.policy, None)
        try:
            described = self._query(query).to_pylist()
        except Exception as error:  # noqa: BLE001
            if _code(error) in _UNKNOWN_TABLE_CODES:
                raise self.missing_table(display) from None
            raise unreadable_table(display, error) from None
        return [
            Column(name=row["name"], family=clickhouse_family(row["type"]),
                   type_name=row["type"])
            for row in described
        ]

    def _table_names(self) -> list[str]:
        query = ("SELECT database, name FROM system.tables WHERE NOT is_temporary "
                 "AND database NOT IN ('system', 'INFORMATION_SCHEMA', 'information_schema')")
        try:
            rows = self._query(query + settings_clause(self.policy, None)).to_pylist()
        except Exception:  # noqa: BLE001 - no suggestions then
            rows = []
        return [r["name"] for r in rows] + [f"{r['database']}.{r['name']}" for r in rows]

    def fetch(self, sql: str) -> FetchResult:
        # The timeout: ClickHouse's own max_execution_time, set per statement.
        text = sql + settings_clause(self.policy, self.timeout)
        self.statements.append(text)
        try:
            result = self._query(text)
        except Exception as error:  # noqa: BLE001 - chdb raises RuntimeError subclasses
            if _code(error) in _TIMEOUT_CODES:
                self._drain_aborted_output()
                raise self.timeout_error() from None
            raise query_error("ClickHouse", first_line(error)) from None
        names = list(result.column_names)
        columns = [result.column(i).to_pylist() for i in range(result.num_columns)]
        rows = list(zip(*columns, strict=True)) if columns else []
        return FetchResult(columns=names, rows=rows)

    def _drain_aborted_output(self) -> None:
        """Read away what a statement aborted mid-run left in the session's output.

        With chdb 4.4, the statement after a timed-out one returns the partial output of the
        aborted one (pyarrow then fails with "Invalid flatbuffers message"); one throw-away
        query takes it, and the session is usable again (tests/test_clickhouse.py).
        """
        for _ in range(2):
            with contextlib.suppress(Exception):
                if self._query("SELECT 1 AS ok").to_pylist() == [{"ok": 1}]:
                    return

    def close(self) -> None:
        if self.session is not None and self.owned:
            self.session.close()
            _remove_empty(self.made_tmp)  # chdb makes it again when the folder is reopened
        self.session = None


def open_chdb_location(location: str, table: str | None) -> tuple[ChdbEngine, exp.Table | None]:
    """``--engine clickhouse``: a Parquet file (glob) read in place, or with ``table`` a chdb
    database directory."""
    if table:
        return ChdbEngine.open_directory(location), None
    if Path(location).is_dir():
        raise SpecError(f"{location} is a directory: name a table in it with --table")
    if not any(ch in location for ch in "*?[{") and not Path(location).exists():
        raise SourceError(f"no such file: {location}")
    path = location if location.startswith("/") else str(Path(location).absolute())
    engine = ChdbEngine.in_memory()
    with engine.closed_on_failure():
        return engine, engine.read_parquet(path)


def _remove_empty(folder: Path | None) -> None:
    """Remove ``folder`` if it exists and is empty; anything in it is left alone."""
    if folder is not None:
        with contextlib.suppress(OSError):
            folder.rmdir()


def _code(error: BaseException) -> int | None:
    match = _CODE.search(str(error))
    return int(match.group(1)) if match else None
