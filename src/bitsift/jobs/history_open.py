"""Opening a results destination: the store of its engine family."""

from __future__ import annotations

from bitsift.jobs.history import Destination, HistoryError
from bitsift.jobs.history_duckdb import DuckDBStore
from bitsift.jobs.history_sqlalchemy import SqlAlchemyStore
from bitsift.jobs.history_store import HistoryStore


def open_store(destination: Destination, *, write: bool = False) -> HistoryStore:
    """Open the results destination. Reading a DuckDB file that does not exist gives an empty
    history; writing creates it."""
    problems = destination.keyed_problems()
    if problems:
        raise HistoryError(problems=problems)
    if destination.is_url:
        return SqlAlchemyStore(destination)
    return DuckDBStore(destination, write=write)
