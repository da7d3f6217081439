"""The results history table: one row per (run, ranking, segment, attribute), written in one
transaction per run.

The schema is :data:`COLUMNS` (documented in docs/scheduled-runs.md) with version
:data:`SCHEMA_VERSION`, stored in every row. A missing table is created; an existing table whose
columns differ is an error and is never altered. Destinations are a DuckDB file (written through
DuckDB, SQL built by sqlglot) or a SQLAlchemy URL (written through SQLAlchemy Core).

Writers of one history table take turns: a DuckDB file admits one writing process (the others
wait for it, up to :data:`WRITE_WAIT_SECONDS`), PostgreSQL and MySQL/MariaDB writers hold a lock
named after the table (an advisory lock, ``GET_LOCK``) for the whole write, and SQLite writers
start with ``BEGIN IMMEDIATE``. Two runs with one run id therefore replace each other's rows
instead of both inserting. The key columns (job, run id) compare byte for byte on every engine,
also where the column's collation ignores case or trailing spaces (MySQL/MariaDB).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import os
import time
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

from bitsift import jsonout
from bitsift.dialects import SQLALCHEMY_DIALECTS, capabilities
from bitsift.engines.sqlalchemy_engine import sqlalchemy_family
from bitsift.errors import BitsiftError, Option, Problem, SpecError, first_line, parameter_name
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
#: How long a run waits for another run writing the same history table (or holding the DuckDB
#: file) before it gives up with one line. A write itself takes well under a second.
WRITE_WAIT_SECONDS = 60.0
#: SQLAlchemy dialects whose text comparison follows a collation that may ignore case and
#: trailing spaces (``'Sales' = 'sales '`` is true): their keys are compared as UTF-8 bytes.
_COLLATING_DIALECTS = ("mysql", "mariadb")
#: SQLAlchemy dialects that understand CREATE TABLE IF NOT EXISTS.
_IF_NOT_EXISTS_DIALECTS = ("postgresql", "mysql", "mariadb", "sqlite", "duckdb")


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
    # Names come from the source, which may allow any length: stored unbounded.
    HistoryColumn("source_table", "text", "the table (or file) that was ranked"),
    HistoryColumn("target", "text", "the target column"),
    HistoryColumn("segment", "text", "segment values as a JSON object; empty (or NULL) for an "
                  "unsegmented ranking", nullable=True),
    HistoryColumn("attribute", "text", "the ranked column"),
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
        # SQLALCHEMY_DIALECTS names bitsift's dialects ("mariadb"); sqlglot's may differ.
        name = SQLALCHEMY_DIALECTS.get(backend)
        return capabilities(name).sqlglot_dialect if name else ""

    def table_name(self) -> exp.Table:
        """The table as ``[schema.]table``, every part quoted by sqlglot."""
        table = parse_table_name(self.table, self.sqlglot_dialect())
        if table.catalog and self.is_url:
            raise SpecError(f"results table must be [schema.]table, not {self.table!r}")
        return table

    def problems(self) -> list[str]:
        """Everything wrong with the destination that can be told without connecting."""
        return [p.message for p in self.keyed_problems()]

    def keyed_problems(self) -> list[Problem]:
        """:meth:`problems`, each about its key of a job's [results]: destination or table."""
        found = []
        if self.is_url and raw_at_in_password(self.location):
            # SQLAlchemy would read the rest of the password as the host: refuse it unsent.
            found.append(Problem.of(f"the password in {self.display} contains '@': write it "
                                    "as %40", key="destination"))
        elif self.is_url:
            try:
                sa.engine.make_url(self.location)
            except Exception:  # noqa: BLE001 - any parse failure
                found.append(Problem.of(f"not a valid database URL: {self.display}",
                                        key="destination"))
        elif not self.path.parent.is_dir():
            found.append(Problem.of(f"folder of the results file does not exist: "
                                    f"{self.path.parent}", key="destination"))
        try:
            self.table_name()
        except SpecError as error:
            found += [Problem.of(line, key="table") for line in
                      error.lines(_results_table_spelling)]
        return found


def _results_table_spelling(option: Option) -> str:
    """The table option, in a destination's problems, is the results table."""
    return "results table" if option.name == "table" else parameter_name(option)


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
    settings = jsonout.dumps(dict(options), sort_keys=True, separators=(",", ":"), default=str)
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
    return jsonout.dumps(dict(segment), separators=(",", ":"), ensure_ascii=False, default=str)


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
        """In one transaction, with the table's other writers waiting: create the table if
        missing, delete the run, insert ``rows``."""

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
            # The write would create the table there: a missing schema would fail it after
            # the ranking work.
            if not self.schema_exists():
                raise HistoryError(
                    f"results table {self.destination.table} in {self.destination.display}: "
                    f"schema {self.table.db} does not exist; create it, or choose another "
                    "results table"
                )
            return False
        self._verify(existing, self.newest_schema_version)
        return True

    def schema_exists(self) -> bool:
        """Whether the table's schema exists (True for an unqualified table)."""
        return True

    def column_widths(self) -> dict[str, int]:
        """Column name -> the most characters it holds, for the columns that have a limit."""
        return {}

    @staticmethod
    def _check_keys(job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> None:
        """Refuse rows of another job or run: they would not replace the run being deleted
        but sit beside it, and be doubled by the next rerun."""
        for row in rows:
            if row["job"] != job or row["run_id"] != run_id:
                raise HistoryError(
                    f"rows of job {row['job']!r}, run {row['run_id']!r} cannot be written as "
                    f"job {job!r}, run {run_id!r}; nothing was written"
                )

    def width_problems(self, values: Mapping[str, Iterable[str]]) -> list[str]:
        """One line per column that a value to be written does not fit (checked before the
        ranking work, which such a write would throw away); empty when everything fits."""
        widths = self.column_widths()
        problems = []
        for name in COLUMN_NAMES:
            limit = widths.get(name)
            if limit is None or name not in values:
                continue
            # sorted first: of equally long values, always the same one is named.
            longest = max(sorted(values[name]), key=len, default="")
            if len(longest) > limit:
                shown = longest if len(longest) <= 40 else longest[:40] + "..."
                problems.append(
                    f"results table {self.destination.table} in {self.destination.display}: "
                    f"column {name} holds at most {limit} characters, but {shown!r} has "
                    f"{len(longest)}; widen the column (for example to TEXT) or choose "
                    "another results table"
                )
        return problems

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


def _wait_until(attempt: Callable[[], bool], seconds: float) -> bool:
    """Call ``attempt`` until it returns True (then True), pausing a little longer each time,
    or until ``seconds`` have passed (then False)."""
    deadline = time.monotonic() + seconds
    pause = 0.01
    while not attempt():
        if time.monotonic() >= deadline:
            return False
        time.sleep(pause)
        pause = min(pause * 2, 0.25)
    return True


def _interrupted(error: BaseException) -> bool:
    """Whether ``error`` is DuckDB reporting Ctrl-C during a statement: it raises
    ``RuntimeError("Query interrupted")`` (or InterruptException), not KeyboardInterrupt."""
    return isinstance(error, duckdb.InterruptException) or (
        isinstance(error, RuntimeError) and "interrupted" in str(error).lower()
    )


@contextmanager
def _ctrl_c_as_interrupt() -> Iterator[None]:
    """Turn DuckDB's report of Ctrl-C into KeyboardInterrupt, which the CLI reports as
    "Interrupted." with exit code 130."""
    try:
        yield
    except (duckdb.Error, RuntimeError) as error:
        if _interrupted(error):
            raise KeyboardInterrupt from None
        raise


def _connect_duckdb(path: Path, *, read_only: bool) -> duckdb.DuckDBPyConnection:
    """Open the results file, waiting up to :data:`WRITE_WAIT_SECONDS` while another process
    holds it: DuckDB lets one process write a file, and nobody else open it meanwhile."""
    opened: list[duckdb.DuckDBPyConnection] = []
    conflicts: list[duckdb.Error] = []

    def attempt() -> bool:
        try:
            opened.append(duckdb.connect(str(path), read_only=read_only))
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
                                                    expressions=definitions), kind="TABLE",
                                    exists=True))

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
        query = (
            exp.select(*(_col(n) for n in COLUMN_NAMES))
            .from_(self.table.copy())
            .where(exp.and_(_col("job").eq(exp.Placeholder()),
                            _col("run_id").isin(*(exp.Placeholder() for _ in ids))))
        )
        with _ctrl_c_as_interrupt():
            fetched = self.connection.execute(self._sql(query), [job, *ids]).fetchall()
        return _rows_to_dicts(COLUMN_NAMES, fetched)

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
        self.sa_table = sa.Table(
            self.table.name,
            sa.MetaData(),
            *(sa.Column(c.name, _sa_type(c), nullable=c.nullable) for c in COLUMNS),
            schema=self.schema,
            # Names in any script, emoji included (MySQL's older "utf8" stops at 3 bytes).
            mysql_charset="utf8mb4",
            mariadb_charset="utf8mb4",
        )
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
        if_not_exists = connection.dialect.name in _IF_NOT_EXISTS_DIALECTS
        connection.execute(sa.schema.CreateTable(self.sa_table, if_not_exists=if_not_exists))

    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        table = self.sa_table
        self._check_keys(job, run_id, rows)
        with self._connection(write=True) as connection:
            existing = self._existing(connection)
            if existing is None:
                self._create(connection)
            else:
                self._verify(existing, lambda: self._newest(connection))
            connection.execute(table.delete().where(self._same(table.c.job, job),
                                                    self._same(table.c.run_id, run_id)))
            if rows:
                connection.execute(table.insert(), [dict(r) for r in rows])
        return len(rows)

    def runs(self, job: str) -> list[RunInfo]:
        table = self.sa_table
        with self._connection(write=False) as connection:
            if self._existing(connection) is None:
                return []
            # Grouped by the bytes too, so that runs R1 and r1 stay two runs.
            groups = [table.c.run_id] + ([self._key(table.c.run_id)] if self._bytewise else [])
            result = connection.execute(
                sa.select(table.c.run_id, sa.func.max(table.c.run_at), sa.func.count())
                .where(self._same(table.c.job, job))
                .group_by(*groups)
            ).all()
        return _newest_first(RunInfo(r[0], r[1], int(r[2])) for r in result)

    def read(self, job: str, run_ids: Iterable[str]) -> list[dict[str, Any]]:
        ids = list(run_ids)
        table = self.sa_table
        with self._connection(write=False) as connection:
            if not ids or self._existing(connection) is None:
                return []
            keys = [self._key_value(run_id) for run_id in ids]
            result = connection.execute(
                sa.select(table).where(self._same(table.c.job, job),
                                       self._key(table.c.run_id).in_(keys))
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
    problems = destination.keyed_problems()
    if problems:
        raise HistoryError(problems=problems)
    if destination.is_url:
        return SqlAlchemyStore(destination)
    return DuckDBStore(destination, write=write)
