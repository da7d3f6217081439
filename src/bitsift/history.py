"""The results history table: one row per (run, ranking, segment, attribute), written in one
transaction per run.

The schema is :data:`COLUMNS` (documented in docs/scheduled-runs.md) with version
:data:`SCHEMA_VERSION`, stored in every row. A missing table is created; an existing table whose
columns differ is an error and is never altered. Destinations are a DuckDB file (written through
DuckDB, SQL built by sqlglot) or a SQLAlchemy URL (written through SQLAlchemy Core).
"""

from __future__ import annotations

import datetime as _dt
import json
import os
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import sqlalchemy as sa
from sqlalchemy.dialects import mysql
from sqlglot import exp

from bitsift.dialects import SQLALCHEMY_DIALECTS
from bitsift.engines.sqlalchemy_engine import sqlalchemy_family
from bitsift.errors import BitsiftError, SpecError
from bitsift.masking import (
    environment_secrets,
    mask_text,
    mask_url,
    raw_at_in_password,
    url_secrets,
)
from bitsift.result import Ranking
from bitsift.schema import family_of
from bitsift.sources import parse_table_name
from bitsift.version import __version__

#: Bumped whenever :data:`COLUMNS` changes; a table holding newer rows is refused.
SCHEMA_VERSION = 1
DEFAULT_TABLE = "bitsift_history"
#: Environment variable that may hold the destination's password instead of its URL.
PASSWORD_VARIABLE = "BITSIFT_RESULTS_PASSWORD"


class HistoryError(BitsiftError):
    """The results destination cannot be used: unreachable, incompatible table, failed write."""


@dataclass(frozen=True)
class HistoryColumn:
    """One column of the history table: its name, type family and meaning."""

    name: str
    #: "text", "integer", "float" or "timestamp".
    family: str
    description: str
    nullable: bool = False
    #: VARCHAR length where an engine needs one (MySQL); ``None`` means unbounded text.
    length: int | None = None


COLUMNS: tuple[HistoryColumn, ...] = (
    HistoryColumn("schema_version", "integer", "version of this table layout (currently 1)"),
    HistoryColumn("run_id", "text", "the run's id (`--run-id`, or generated from the time)",
                  length=100),
    HistoryColumn("run_at", "timestamp", "when the run started, UTC (stored without a zone)"),
    HistoryColumn("job", "text", "the job's name (`job` in the job file)", length=200),
    HistoryColumn("ranking", "text", "the ranking's name within the job", length=200),
    HistoryColumn("source_table", "text", "the table (or file) that was ranked", length=1000),
    HistoryColumn("target", "text", "the target column", length=255),
    HistoryColumn("segment", "text", "segment values as a JSON object; empty (or NULL) for an "
                  "unsegmented ranking", nullable=True),
    HistoryColumn("attribute", "text", "the ranked column", length=255),
    HistoryColumn("position", "integer", "1-based place in the ranking's sort order"),
    HistoryColumn("kind", "text", "`categorical` or `numeric` (quantile-binned)", length=20),
    HistoryColumn("distinct_values", "integer", "distinct values (bins for numeric attributes)"),
    HistoryColumn("rows_used", "integer", "rows in this attribute's counts"),
    HistoryColumn("rows_excluded", "integer", "rows left out because the target is NULL"),
    HistoryColumn("classes", "integer", "distinct target values"),
    HistoryColumn("target_entropy", "float", "H(Y) over the rows used, bits"),
    HistoryColumn("information_gain", "float", "IG = H(Y) - H(Y|X), bits"),
    HistoryColumn("gain_ratio", "float", "IG / H(X)"),
    HistoryColumn("symmetric_uncertainty", "float", "2 IG / (H(X) + H(Y))"),
    HistoryColumn("conditional_entropy", "float", "H(Y|X), bits"),
    HistoryColumn("attribute_entropy", "float", "H(X), bits"),
    HistoryColumn("g_statistic", "float", "G = 2 N ln2 IG"),
    HistoryColumn("dof", "integer", "degrees of freedom of the G-test"),
    HistoryColumn("p_value", "float", "chi-square survival function of G; NULL when the "
                  "weights are not whole numbers", nullable=True),
    HistoryColumn("flags", "text", "trust flags, comma-separated; empty (or NULL) when none",
                  nullable=True, length=255),
    HistoryColumn("options", "text", "the ranking's settings from the job file, as JSON"),
    HistoryColumn("bitsift_version", "text", "version of bitsift that wrote the row", length=32),
)
COLUMN_NAMES: tuple[str, ...] = tuple(c.name for c in COLUMNS)

_DUCKDB_TYPES = {"text": "VARCHAR", "integer": "BIGINT", "float": "DOUBLE",
                 "timestamp": "TIMESTAMP"}


def _sa_type(column: HistoryColumn) -> Any:
    if column.family == "text":
        return sa.String(column.length) if column.length else sa.Text()
    if column.family == "integer":
        return sa.BigInteger()
    if column.family == "float":
        return sa.Double()
    # MySQL's DATETIME keeps whole seconds unless asked: runs a second apart must still order.
    return sa.DateTime().with_variant(mysql.DATETIME(fsp=6), "mysql", "mariadb")


@dataclass(frozen=True)
class Destination:
    """Where results go: a DuckDB file or a SQLAlchemy URL, and a table (schema-qualified)."""

    location: str
    table: str = DEFAULT_TABLE

    @property
    def is_url(self) -> bool:
        return "://" in self.location and not self.location.startswith("duckdb:///")

    @property
    def path(self) -> Path:
        return Path(self.location.removeprefix("duckdb:///"))

    @property
    def display(self) -> str:
        """The location without a password, for messages."""
        if not self.is_url:
            return str(self.path)
        return mask_url(self.location)

    def sqlglot_dialect(self) -> str:
        if not self.is_url:
            return "duckdb"
        try:
            backend = sa.engine.make_url(self.location).get_backend_name()
        except Exception:  # noqa: BLE001 - reported by validate()
            return ""
        return SQLALCHEMY_DIALECTS.get(backend, "")

    def table_name(self) -> exp.Table:
        """The table as ``[schema.]table``, every part quoted by sqlglot."""
        table = parse_table_name(self.table, self.sqlglot_dialect())
        if table.catalog and self.is_url:
            raise SpecError(f"results table must be [schema.]table, not {self.table!r}")
        return table

    def problems(self) -> list[str]:
        """Everything wrong with the destination that can be told without connecting."""
        found = []
        if self.is_url and raw_at_in_password(self.location):
            # SQLAlchemy would read the rest of the password as the host: refuse it unsent.
            found.append(f"the password in {self.display} contains '@': write it as %40")
        elif self.is_url:
            try:
                sa.engine.make_url(self.location)
            except Exception:  # noqa: BLE001 - any parse failure
                found.append(f"not a valid database URL: {self.display}")
        elif not self.path.parent.is_dir():
            found.append(f"folder of the results file does not exist: {self.path.parent}")
        try:
            self.table_name()
        except SpecError as error:
            found.append(str(error).replace("--table", "results table"))
        return found


@dataclass(frozen=True)
class RunInfo:
    """One run of a job as the history table knows it."""

    run_id: str
    run_at: _dt.datetime
    rows: int


def ranking_rows(ranking: Ranking, *, run_id: str, run_at: _dt.datetime, job: str,
                 ranking_name: str, options: Mapping[str, Any], segment: str = ""
                 ) -> list[dict[str, Any]]:
    """The history rows of one ranking, one per attribute, in the ranking's order."""
    stamp = _utc_naive(run_at)
    settings = json.dumps(dict(options), sort_keys=True, separators=(",", ":"), default=str)
    rows = []
    for position, scored in enumerate(ranking.attributes, start=1):
        rows.append({
            "schema_version": SCHEMA_VERSION,
            "run_id": run_id,
            "run_at": stamp,
            "job": job,
            "ranking": ranking_name,
            "source_table": ranking.table,
            "target": ranking.target,
            "segment": segment,
            "attribute": scored.attribute,
            "position": position,
            "kind": scored.kind,
            "distinct_values": scored.distinct,
            "rows_used": scored.rows,
            "rows_excluded": ranking.rows_excluded,
            "classes": ranking.classes,
            "target_entropy": scored.target_entropy,
            "information_gain": scored.information_gain,
            "gain_ratio": scored.gain_ratio,
            "symmetric_uncertainty": scored.symmetric_uncertainty,
            "conditional_entropy": scored.conditional_entropy,
            "attribute_entropy": scored.attribute_entropy,
            "g_statistic": scored.g_statistic,
            "dof": scored.dof,
            "p_value": scored.p_value,
            "flags": ",".join(scored.flags),
            "options": settings,
            "bitsift_version": __version__,
        })
    return rows


def segment_json(segment: Mapping[str, Any] | None) -> str:
    """The history's ``segment`` value: the segment's values as a JSON object in ``--by``
    order, ``""`` for an unsegmented ranking.

    >>> segment_json({"region": "north", "tier": None}), segment_json(None)
    ('{"region":"north","tier":null}', '')
    """
    if segment is None:
        return ""
    return json.dumps(dict(segment), separators=(",", ":"), ensure_ascii=False, default=str)


def _utc_naive(moment: _dt.datetime) -> _dt.datetime:
    if moment.tzinfo is not None:
        moment = moment.astimezone(_dt.UTC).replace(tzinfo=None)
    return moment


def compatibility_problems(existing: Mapping[str, str]) -> list[str]:
    """What makes an existing table (column name -> type family) unusable; empty when fine."""
    by_lower = {name.lower(): family for name, family in existing.items()}
    problems = []
    missing = [c.name for c in COLUMNS if c.name not in by_lower]
    if missing:
        problems.append("missing column(s) " + ", ".join(missing))
    expected = set(COLUMN_NAMES)
    extra = sorted(name for name in by_lower if name not in expected)
    if extra:
        problems.append("unexpected column(s) " + ", ".join(extra))
    for column in COLUMNS:
        family = by_lower.get(column.name)
        if family is None:
            continue
        accepted = {column.family} | ({"decimal"} if column.family == "float" else set())
        if family not in accepted:
            problems.append(f"column {column.name} holds {family}, expected {column.family}")
    return problems


class HistoryStore(ABC):
    """A results destination, open. Use :func:`open_store`."""

    def __init__(self, destination: Destination) -> None:
        self.destination = destination
        self.table = destination.table_name()

    @abstractmethod
    def existing_columns(self) -> dict[str, str] | None:
        """Column name -> type family of the existing table, or None when there is none."""

    @abstractmethod
    def newest_schema_version(self) -> int | None:
        """The highest schema_version stored, or None for an empty table."""

    @abstractmethod
    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        """In one transaction: create the table if missing, delete the run, insert ``rows``."""

    @abstractmethod
    def runs(self, job: str) -> list[RunInfo]:
        """The job's runs, newest first."""

    @abstractmethod
    def read(self, job: str, run_ids: Iterable[str]) -> list[dict[str, Any]]:
        """Every row of the given runs of ``job``."""

    def close(self) -> None:  # noqa: B027 - optional hook
        """Release the connection."""

    def __enter__(self) -> HistoryStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def check(self) -> bool:
        """Raise :class:`HistoryError` if the table exists and is incompatible.

        Returns whether the table exists.
        """
        existing = self.existing_columns()
        if existing is None:
            return False
        self._verify(existing, self.newest_schema_version)
        return True

    def _verify(self, existing: Mapping[str, str], newest_version: Callable[[], int | None]
                ) -> None:
        problems = compatibility_problems(existing)
        where = f"{self.destination.table} in {self.destination.display}"
        if problems:
            raise HistoryError(
                f"results table {where} is not a bitsift history table of schema version "
                f"{SCHEMA_VERSION}: " + "; ".join(problems)
                + ". bitsift never alters an existing table: choose another results table, "
                "or migrate this one yourself (the schema is in docs/scheduled-runs.md)"
            )
        newest = newest_version()
        if newest is not None and newest > SCHEMA_VERSION:
            raise HistoryError(
                f"results table {where} holds rows of schema version {newest}, written by a "
                f"newer bitsift; this is bitsift {__version__} (schema version {SCHEMA_VERSION})"
            )


def _rows_to_dicts(names: Sequence[str], rows: Iterable[Sequence[Any]]) -> list[dict[str, Any]]:
    return [dict(zip(names, row, strict=True)) for row in rows]


def _ident(name: str) -> exp.Identifier:
    return exp.to_identifier(name, quoted=True)


def _col(name: str) -> exp.Column:
    return exp.column(_ident(name))


class DuckDBStore(HistoryStore):
    """History in a DuckDB database file; SQL built by sqlglot with ``?`` parameters."""

    def __init__(self, destination: Destination, *, write: bool) -> None:
        super().__init__(destination)
        path = destination.path
        self.connection: duckdb.DuckDBPyConnection | None = None
        if not write and not path.exists():
            return
        try:
            self.connection = duckdb.connect(str(path), read_only=not write)
        except duckdb.Error as error:
            raise HistoryError(f"cannot open results file {path}: {_line(error)}") from None

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

    def newest_schema_version(self) -> int | None:
        assert self.connection is not None
        query = exp.select(exp.func("MAX", _col("schema_version"))).from_(self.table.copy())
        row = self.connection.execute(self._sql(query)).fetchone()
        return None if row is None or row[0] is None else int(row[0])

    def _create_sql(self) -> str:
        definitions = [
            exp.ColumnDef(
                this=_ident(c.name),
                kind=exp.DataType.build(_DUCKDB_TYPES[c.family]),
                constraints=[] if c.nullable else [
                    exp.ColumnConstraint(kind=exp.NotNullColumnConstraint())
                ],
            )
            for c in COLUMNS
        ]
        return self._sql(exp.Create(this=exp.Schema(this=self.table.copy(),
                                                    expressions=definitions), kind="TABLE"))

    def _run_filter(self) -> exp.Condition:
        return exp.and_(_col("job").eq(exp.Placeholder()), _col("run_id").eq(exp.Placeholder()))

    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        assert self.connection is not None, "opened for reading only"
        con = self.connection
        delete = exp.delete(self.table.copy(), where=self._run_filter())
        insert = exp.insert(
            exp.Values(expressions=[exp.tuple_(*(exp.Placeholder() for _ in COLUMNS))]),
            self.table.copy(),
            columns=[_ident(n) for n in COLUMN_NAMES],
        )
        con.begin()
        try:
            if not self.check():
                con.execute(self._create_sql())
            con.execute(self._sql(delete), [job, run_id])
            if rows:
                con.executemany(self._sql(insert), [[r[n] for n in COLUMN_NAMES] for r in rows])
            con.commit()
        except BaseException as error:
            con.rollback()
            if isinstance(error, duckdb.Error):
                raise HistoryError(
                    f"writing to {self.destination.table} in {self.destination.display} failed, "
                    f"nothing was written: {_line(error)}"
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
        result = self.connection.execute(self._sql(query), [job]).fetchall()
        return _newest_first(RunInfo(r[0], r[1], int(r[2])) for r in result)

    def read(self, job: str, run_ids: Iterable[str]) -> list[dict[str, Any]]:
        ids = list(run_ids)
        if not ids or self.existing_columns() is None:
            return []
        assert self.connection is not None
        query = (
            exp.select(*(_col(n) for n in COLUMN_NAMES))
            .from_(self.table.copy())
            .where(exp.and_(_col("job").eq(exp.Placeholder()),
                            _col("run_id").isin(*(exp.Placeholder() for _ in ids))))
        )
        cursor = self.connection.execute(self._sql(query), [job, *ids])
        return _rows_to_dicts(COLUMN_NAMES, cursor.fetchall())

    def close(self) -> None:
        if self.connection is not None:
            self.connection.close()
        self.connection = None


class SqlAlchemyStore(HistoryStore):
    """History in any SQLAlchemy database, through SQLAlchemy Core (Table, insert, delete)."""

    def __init__(self, destination: Destination) -> None:
        super().__init__(destination)
        url = sa.engine.make_url(destination.location)
        if url.password is None and os.environ.get(PASSWORD_VARIABLE):
            url = url.set(password=os.environ[PASSWORD_VARIABLE])
        self._secrets = url_secrets(url)
        try:
            self.engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
        except (ImportError, sa.exc.NoSuchModuleError) as error:
            raise HistoryError(
                f"the driver for {url.drivername} is not installed ({_line(error)})"
            ) from None
        self.schema = self.table.db or None
        self.sa_table = sa.Table(
            self.table.name,
            sa.MetaData(),
            *(sa.Column(c.name, _sa_type(c), nullable=c.nullable) for c in COLUMNS),
            schema=self.schema,
        )

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
                with connection.begin():
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

    def _scrub(self, error: BaseException) -> str:
        return mask_text(_line(error), (*self._secrets, *environment_secrets()))

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

    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        table = self.sa_table
        with self._connection(write=True) as connection:
            existing = self._existing(connection)
            if existing is None:
                table.create(connection)
            else:
                self._verify(existing, lambda: self._newest(connection))
            connection.execute(table.delete().where(table.c.job == job, table.c.run_id == run_id))
            if rows:
                connection.execute(table.insert(), [dict(r) for r in rows])
        return len(rows)

    def runs(self, job: str) -> list[RunInfo]:
        table = self.sa_table
        with self._connection(write=False) as connection:
            if self._existing(connection) is None:
                return []
            result = connection.execute(
                sa.select(table.c.run_id, sa.func.max(table.c.run_at), sa.func.count())
                .where(table.c.job == job)
                .group_by(table.c.run_id)
            ).all()
        return _newest_first(RunInfo(r[0], r[1], int(r[2])) for r in result)

    def read(self, job: str, run_ids: Iterable[str]) -> list[dict[str, Any]]:
        ids = list(run_ids)
        table = self.sa_table
        with self._connection(write=False) as connection:
            if not ids or self._existing(connection) is None:
                return []
            result = connection.execute(
                sa.select(table).where(table.c.job == job, table.c.run_id.in_(ids))
            ).all()
        return _rows_to_dicts(COLUMN_NAMES, result)

    def close(self) -> None:
        self.engine.dispose()


def _newest_first(runs: Iterable[RunInfo]) -> list[RunInfo]:
    # Ties on run_at (coarse clocks) fall back to the run id, which is time-based by default.
    return sorted(runs, key=lambda r: (r.run_at, r.run_id), reverse=True)


def open_store(destination: Destination, *, write: bool = False) -> HistoryStore:
    """Open the results destination. Reading a DuckDB file that does not exist gives an empty
    history; writing creates it."""
    problems = destination.problems()
    if problems:
        raise HistoryError("; ".join(problems))
    if destination.is_url:
        return SqlAlchemyStore(destination)
    return DuckDBStore(destination, write=write)


def _line(error: BaseException) -> str:
    text = str(error).strip()
    return text.splitlines()[0] if text else type(error).__name__
