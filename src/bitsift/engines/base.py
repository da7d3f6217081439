"""The interface every engine implements."""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from typing import Any

from sqlglot import exp

from bitsift.dialects import Capabilities
from bitsift.names import resolve_name  # noqa: F401 - engines and jobs import it from here
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

    @abstractmethod
    def columns(self, table: exp.Expression, display: str) -> list[Column]:
        """The table's columns in catalog order, or :class:`TableNotFoundError`."""

    @abstractmethod
    def fetch(self, sql: str) -> FetchResult:
        """Run one SELECT and return its (small) result."""

    @abstractmethod
    def set_timeout(self, seconds: float | None) -> None:
        """Set a statement timeout, or add a note saying the engine has none."""

    def close(self) -> None:  # noqa: B027 - optional hook
        """Release what the engine opened (connections it does not own stay open)."""

    def __enter__(self) -> Engine:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
