"""The interface every engine implements."""

from __future__ import annotations

import threading
import weakref
from abc import ABC, abstractmethod
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from typing import Any, ClassVar

from sqlglot import exp

from bitsift.engines.policy import RunPolicy, run_policy
from bitsift.errors import (
    Option,
    Problem,
    QueryCancelledError,
    QueryError,
    QueryTimeoutError,
    SourceError,
    SpecError,
    TableNotFoundError,
    first_line,
    unknown_names_message,
)
from bitsift.names import resolve_name
from bitsift.spec.schema import Column, NumberHint
from bitsift.sql.dialects import Capabilities

#: Schemas searched for a table of the name that was not found (the error path only).
MAX_SCHEMAS_SEARCHED = 200


def tables_elsewhere(name: str, places: Sequence[tuple[str, Sequence[str]]]) -> list[str]:
    """``schema.table`` for every schema in ``places`` (schema, its tables) holding a table
    named ``name`` (by :func:`bitsift.names.resolve_name`), in the order given.

    >>> tables_elsewhere("Accounts", [("crm", ["accounts", "x"]), ("ops", ["y"])])
    ['crm.accounts']
    """
    found = []
    for schema, tables in places:
        real = resolve_name(name, list(tables))
        if real is not None:
            found.append(f"{_dotted(schema)}.{_dotted(real)}")
    return found


def _dotted(part: str) -> str:
    """A name part as ``--table`` takes it: double-quoted when it holds a dot or a quote."""
    if "." in part or '"' in part:
        return '"' + part.replace('"', '""') + '"'
    return part


def missing_table_error(message: str, elsewhere: Sequence[str]) -> TableNotFoundError:
    """"unknown table ..." plus, when a table of that name exists in other schemas, where
    (issue 21, item 12: the usual cause is a table in a schema not on the search path)."""
    if not elsewhere:
        return TableNotFoundError(message)
    listed = ", ".join(elsewhere)
    return TableNotFoundError(problems=[Problem("table", (
        f"{message}; a table of that name exists as {listed}: give that to ", Option("table")))])


@dataclass(frozen=True)
class FetchResult:
    """Column names and rows of an aggregate result (never raw table rows, except for `check`)."""

    columns: list[str]
    rows: list[tuple[Any, ...]]

    def records(self) -> list[dict[str, Any]]:
        return [dict(zip(self.columns, row, strict=True)) for row in self.rows]


@dataclass
class Engine(ABC):
    """An open, read-only connection to one source."""

    caps: Capabilities
    #: Notes for the user (e.g. "this engine has no statement timeout"), shown on stderr.
    notes: list[str] = field(default_factory=list)
    #: Every statement sent, in order (for --debug and for the tests' statement log).
    statements: list[str] = field(default_factory=list)
    #: Text columns of a data file whose values read as numbers (:attr:`Column.number_hint`),
    #: by name; :meth:`columns` hands them on.
    number_hints: dict[str, NumberHint] = field(default_factory=dict)
    #: Set by :meth:`cancel`: the session sends no further statement.
    cancelled: threading.Event = field(default_factory=threading.Event, repr=False,
                                       compare=False)
    #: bitsift opened this session itself (it closes it, and may open siblings of it); False
    #: for a connection the caller passed in, which stays as the caller left it.
    owned: bool = True
    #: Whether :meth:`open_sibling` can open another session on the same database.
    has_siblings: ClassVar[bool] = False
    #: The statement timeout in seconds (None: no limit), as :meth:`set_timeout` set it.
    timeout: float | None = None
    #: What the session does besides sending statements: the engine's entry in the run policy
    #: table (:func:`bitsift.engines.policy.run_policy`), looked up by :attr:`caps`' name.
    policy: RunPolicy = field(init=False, repr=False)

    def columns(self, table: exp.Expression, display: str) -> list[Column]:
        """The table's columns in catalog order, or :class:`TableNotFoundError`; those the
        database cannot group by marked ``groupable=False``, with a note naming each."""
        columns = self._mark_ungroupable(table, self.catalog_columns(table, display))
        if not self.number_hints:
            return columns
        return [replace(c, number_hint=self.number_hints[c.name])
                if c.name in self.number_hints else c for c in columns]

    @abstractmethod
    def catalog_columns(self, table: exp.Expression, display: str) -> list[Column]:
        """The table's columns in catalog order, as the catalog describes them."""

    def _mark_ungroupable(self, table: exp.Expression, columns: list[Column]) -> list[Column]:
        """Ask the database which columns of a type outside bitsift's families it can group.

        Which types have an equality the database can group by depends on the engine and its
        extensions (PostgreSQL json, xml and point cannot; jsonb and arrays of int can; DuckDB
        groups lists and structs; Spark cannot group maps), so each is tried on no rows:
        first all at once, then one by one when that fails.
        """
        unknown = [c for c in columns if c.family == "other"]
        if not unknown or self._groups(table, unknown):
            return columns
        refused = {c.name for c in unknown if not self._groups(table, [c])}
        for column in columns:
            note = (f"column {column.name!r} ({column.type_name or 'unknown type'}) is not "
                    f"ranked: {self.caps.name} cannot group its values")
            if column.name in refused and note not in self.notes:  # columns() may run twice
                self.notes.append(note)
        return [replace(c, groupable=False) if c.name in refused else c for c in columns]

    def _groups(self, table: exp.Expression, columns: Sequence[Column]) -> bool:
        """Whether a GROUP BY of each of ``columns``, and a window partitioned by it, run (on
        no rows)."""
        no_rows = exp.EQ(this=exp.Literal.number(1), expression=exp.Literal.number(0))
        probes = []
        for column in columns:
            name = exp.column(exp.to_identifier(column.name, quoted=True))
            # The ranking statement both groups by the column and partitions windows by it
            # (Spark groups a MAP but cannot partition by it).
            window = exp.Window(this=exp.Count(this=exp.Star()), partition_by=[name.copy()])
            probes.append(exp.select(exp.alias_(window, "g")).from_(table.copy())
                          .where(no_rows.copy()).group_by(name))
        statement = probes[0] if len(probes) == 1 else exp.union(*probes, distinct=False)
        try:
            self.fetch(statement.sql(self.caps.sqlglot_dialect))
        except QueryError:
            return False
        return True

    @abstractmethod
    def fetch(self, sql: str) -> FetchResult:
        """Run one SELECT and return its (small) result."""

    def set_timeout(self, seconds: float | None) -> None:
        """Set a statement timeout, or add a note saying the engine has none. By default the
        engine's :meth:`fetch` enforces :attr:`timeout` itself (a setting sent with each
        statement, or an interrupt from a timer)."""
        check_timeout_limit(self, seconds)
        self.timeout = seconds or None

    def timeout_error(self, detail: str | None = None) -> QueryTimeoutError:
        """A statement stopped at :attr:`timeout`; ``detail``: the database's own message."""
        return QueryTimeoutError(f"the query ran longer than --timeout {self.timeout:g} s and "
                                 "was cancelled" + (f" ({detail})" if detail else ""))

    def missing_table(self, display: str, table: exp.Expression | None = None
                      ) -> TableNotFoundError:
        """No table ``display`` in the catalog: the error, naming the other schemas holding a
        table of that name (:meth:`_tables_elsewhere`), else close matches among the catalog's
        tables (:meth:`_table_names`)."""
        elsewhere = self._tables_elsewhere(table) if table is not None else []
        if elsewhere:
            return missing_table_error(f"unknown table: {display!r}", elsewhere)
        return TableNotFoundError(unknown_names_message("table", [display], self._table_names()))

    def _tables_elsewhere(self, table: exp.Expression) -> list[str]:
        """``schema.table`` in other schemas holding a table named as ``table``; none by
        default (engines that can list other schemas say where)."""
        return []

    def _table_names(self) -> list[str]:
        """The tables (plain and schema-qualified) a missing table's name is matched against;
        none by default."""
        return []

    def __post_init__(self) -> None:
        self.policy = run_policy(self.caps.name)
        _LIVE[id(self)] = self

    def cancel(self) -> None:
        """From another thread: stop the statement running on this session (on the server
        where the engine has a cancel) and refuse the next ones. Engines that can stop a
        running statement extend this."""
        self.cancelled.set()

    def can_open_siblings(self) -> bool:
        """Whether run mode may spread statements over sibling sessions: only on sessions
        bitsift opened itself (a caller's connection may hold temporary tables, an open
        transaction or a DataFrame registered by name, none of which a sibling would see)."""
        return self.owned and self.has_siblings

    def open_sibling(self, timeout: float | None) -> Engine:
        """Another session on the same database, with the same capabilities and timeout.

        Its session statements and every statement it sends are logged in this engine's
        :attr:`statements`, so ``--debug`` and :attr:`~bitsift.run.result.Ranking.statements`
        show them all. The caller closes it.
        """
        sibling = self._new_session()
        self.statements.extend(sibling.statements)
        sibling.statements = self.statements
        sibling.policy = self.policy
        sibling.set_timeout(timeout)
        return sibling

    def _new_session(self) -> Engine:
        """A new session on the same database (engines with :attr:`has_siblings` extend this)."""
        raise TypeError(f"no second session for {type(self).__name__}")

    def refuse_if_cancelled(self) -> None:
        """:class:`QueryCancelledError` once :meth:`cancel` has run: a statement sent after
        the cancel would otherwise run to its end."""
        if self.cancelled.is_set():
            raise cancelled_error()

    @contextmanager
    def closed_on_failure(self) -> Iterator[None]:
        """Close this engine when the block fails: one opened for a source it cannot read is
        not handed to anyone who would close it."""
        try:
            yield
        except BaseException:
            self.close()
            raise

    def close(self) -> None:  # noqa: B027 - optional hook
        """Release what the engine opened (connections it does not own stay open)."""

    def __enter__(self) -> Engine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


#: Every engine not yet garbage-collected, for :func:`cancel_all` (weak: keeps none alive;
#: keyed by id because engines, as dataclasses that compare, are not hashable).
_LIVE: weakref.WeakValueDictionary[int, Engine] = weakref.WeakValueDictionary()


def cancel_all() -> None:
    """Cancel every open engine's running statement, from any thread (the CLI's signal
    watcher: the main thread may be inside a statement that only returns once cancelled)."""
    for engine in list(_LIVE.values()):
        try:
            engine.cancel()
        except Exception:  # noqa: BLE001 - best effort: one engine must not spare the others
            continue


def check_timeout_limit(engine: Engine, seconds: float | None) -> None:
    """:class:`SpecError` when ``seconds`` is longer than the engine's timeout can hold
    (instead of a driver's overflow, a server's range error, or a value silently cut)."""
    longest = engine.policy.timeout.longest
    if seconds is not None and seconds > longest:
        raise SpecError(f"--timeout {seconds:.15g} s is longer than {engine.caps.name} can "
                        f"enforce (at most {longest:.15g} s); give inf for no limit")


# Errors every engine raises in the same words (each engine decides when).


def cancelled_error(detail: str | None = None) -> QueryCancelledError:
    """A statement stopped by :meth:`Engine.cancel` (or on the server, ``detail`` saying so)."""
    return QueryCancelledError("the query was cancelled" + (f": {detail}" if detail else ""))


def query_error(database: str, message: str) -> QueryError:
    """Any other failed statement, named by the database that refused it."""
    return QueryError(f"{database} error: {message}")


def unreadable_table(display: str, error: BaseException) -> SourceError:
    """The table exists (or may) but the database cannot read it."""
    return SourceError(f"cannot read {display}: {first_line(error)}")
