"""One command's session: the source opened once, its columns read once, each request
resolved once, the timeout set, the statements and notes recorded.

Every entry point (:func:`bitsift.rank`, :func:`bitsift.check`, :func:`bitsift.statement` with
a source, the profile, report, redundancy and selection functions, and scheduled jobs) runs on
a :class:`Session`. A command that does several things on one source (``report --select``
ranks, drills down and measures pairs; a job checks its rankings, then runs them) passes the
open session on instead of opening the source again: every entry point takes a session
wherever it takes a source, and leaves a session it was given open.

>>> import duckdb
>>> from bitsift.spec.rankspec import RankOptions
>>> con = duckdb.connect()
>>> _ = con.execute("CREATE TABLE t AS SELECT i % 2 AS a, i % 2 = 0 AS y FROM range(10) r(i)")
>>> with Session.open(con, "t") as session:
...     spec = session.resolve(RankOptions(target="y"))
...     again = session.resolve(RankOptions(target="y"))
...     [a.name for a in spec.attributes], again is spec, session.display
(['a'], True, 't')
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, ClassVar, Protocol, TypeVar

from sqlglot import exp

from bitsift.engines import sources
from bitsift.engines.base import Engine
from bitsift.run.target_bins import bin_target
from bitsift.spec import rankspec as spec
from bitsift.spec.schema import Column

#: A progress callback: receives one short status message per step.
Progress = Callable[[str], None]


class _Provenanced(Protocol):
    """A result dataclass that lists the statements sent for it and the notes for the user."""

    __dataclass_fields__: ClassVar[dict[str, Any]]
    statements: list[str]
    notes: list[str]


_Result = TypeVar("_Result", bound=_Provenanced)


@dataclass(frozen=True)
class Record:
    """What one result on a session sent and has to say: taken once, by :meth:`Session.record`."""

    #: The statements sent for the result, in order.
    statements: list[str]
    #: The session's notes for the user (columns left out, a timeout not applied...).
    notes: list[str]

    def stamp(self, result: _Result) -> _Result:
        """``result`` built again with these statements, and these notes before its own."""
        return dataclasses.replace(result, statements=list(self.statements),
                                   notes=[*self.notes, *result.notes])


class Session:
    """An open source (engine and table) and what was resolved on it, for one command.

    Use it as a context manager: the engine closes at the end (a connection the caller passed
    in stays open, as :meth:`Engine.close` leaves it).
    """

    def __init__(self, opened: sources.OpenSource) -> None:
        self.engine: Engine = opened.engine
        self.table: exp.Expression = opened.table
        self.display: str = opened.display
        self._columns: list[Column] | None = None
        self._resolved: list[tuple[spec.RankOptions, spec.RankSpec]] = []
        self._timeout: tuple[float | None] | None = None
        #: How many of the engine's statements earlier records have taken.
        self._recorded = 0

    @classmethod
    def open(cls, source: Any, table: str | None = None) -> Session:
        """Open ``source`` read-only (anything :func:`bitsift.engines.sources.open_source`
        takes)."""
        return cls(sources.open_source(source, table))

    @property
    def columns(self) -> list[Column]:
        """The table's columns, read from the catalog on first use only."""
        if self._columns is None:
            self._columns = self.engine.columns(self.table, self.display)
        return self._columns

    @property
    def dialect(self) -> str:
        """The source's sqlglot dialect."""
        return self.engine.caps.sqlglot_dialect

    def resolve(self, options: spec.RankOptions) -> spec.RankSpec:
        """``options`` checked against the columns: resolved once per distinct request (a
        ``target_bins`` request also cuts its target then: :mod:`bitsift.run.target_bins`)."""
        for known, resolved in self._resolved:
            if known == options:
                return resolved
        resolved = spec.resolve(options, self.columns, self.table, self.display, self.dialect)
        resolved = bin_target(self.engine, resolved, self.columns)
        self._resolved.append((options, resolved))
        return resolved

    def prepare(self, options: spec.RankOptions) -> spec.RankSpec:
        """``options`` resolved, and their timeout set on the engine: ready to rank."""
        resolved = self.resolve(options)
        self.set_timeout(options.timeout)
        return resolved

    def set_timeout(self, seconds: float | None) -> None:
        """The engine's statement timeout (sent again only when it changes)."""
        if self._timeout != (seconds,):
            self.engine.set_timeout(seconds)
            self._timeout = (seconds,)

    def cancel(self) -> None:
        """From another thread: stop the running statement and refuse the next ones."""
        self.engine.cancel()

    @property
    def statements(self) -> list[str]:
        """Every statement sent so far, in order (a copy)."""
        return list(self.engine.statements)

    def record(self) -> Record:
        """The statements and notes of the result now being built, to build it with: the
        statements sent since the previous record (the first record of a session starts at
        the beginning: the statements that opened it, read-only settings and the catalog,
        were sent for it), and every note so far. Each statement is recorded once, so a
        session serving several results (a report's ranking, drill-down and selection) gives
        each its own."""
        statements = self.engine.statements[self._recorded:]
        self._recorded += len(statements)
        return Record(statements=list(statements), notes=list(self.engine.notes))

    @property
    def notes(self) -> list[str]:
        """The engine's notes for the user so far (a copy)."""
        return list(self.engine.notes)

    def close(self) -> None:
        self.engine.close()

    def __enter__(self) -> Session:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


@contextmanager
def session_for(source: Any, table: str | None = None) -> Iterator[Session]:
    """A session on ``source``: the one given (left open for its owner) or a new one
    (closed afterwards). ``table`` is the new session's; a given session has its own."""
    if isinstance(source, Session):
        yield source
        return
    with Session.open(source, table) as session:
        yield session
