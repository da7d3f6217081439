"""The interface every engine implements."""

from __future__ import annotations

import threading
import weakref
from abc import ABC, abstractmethod
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlglot import exp

from bitsift.dialects import Capabilities
from bitsift.errors import QueryCancelledError, SpecError
from bitsift.schema import Column


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
    #: Set by :meth:`cancel`: the session sends no further statement.
    cancelled: threading.Event = field(default_factory=threading.Event, repr=False,
                                       compare=False)

    @abstractmethod
    def columns(self, table: exp.Expression, display: str) -> list[Column]:
        """The table's columns in catalog order, or :class:`TableNotFoundError`."""

    @abstractmethod
    def fetch(self, sql: str) -> FetchResult:
        """Run one SELECT and return its (small) result."""

    @abstractmethod
    def set_timeout(self, seconds: float | None) -> None:
        """Set a statement timeout, or add a note saying the engine has none."""

    def __post_init__(self) -> None:
        _LIVE[id(self)] = self

    def cancel(self) -> None:
        """From another thread: stop the statement running on this session (on the server
        where the engine has a cancel) and refuse the next ones. Engines that can stop a
        running statement extend this."""
        self.cancelled.set()

    def refuse_if_cancelled(self) -> None:
        """:class:`QueryCancelledError` once :meth:`cancel` has run: a statement sent after
        the cancel would otherwise run to its end."""
        if self.cancelled.is_set():
            raise QueryCancelledError("the query was cancelled")

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
        engine.cancel()


def check_timeout_limit(caps: Capabilities, seconds: float | None) -> None:
    """:class:`SpecError` when ``seconds`` is longer than the engine's timeout can hold
    (instead of a driver's overflow, a server's range error, or a value silently cut)."""
    if seconds is not None and seconds > caps.timeout_max:
        raise SpecError(f"--timeout {seconds:.15g} s is longer than {caps.name} can enforce "
                        f"(at most {caps.timeout_max:.15g} s); give inf for no limit")


def resolve_name(name: str, names: Sequence[str]) -> str | None:
    """Catalog spelling of ``name``: exact match, else a unique case-insensitive match."""
    if name in names:
        return name
    folded = [n for n in names if n.lower() == name.lower()]
    return folded[0] if len(folded) == 1 else None
