"""A DuckDB results file, shared by the history and the counts store: opened while another
process may hold it, written in one transaction, Ctrl-C reported as Ctrl-C."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import duckdb

from bitsift.engines.duckdb_engine import connect
from bitsift.errors import first_line
from bitsift.jobs.history import HistoryError
from bitsift.jobs.history_store import WRITE_WAIT_SECONDS, _wait_until


def connect_file(path: Path, *, read_only: bool) -> duckdb.DuckDBPyConnection:
    """Open the results file, waiting up to :data:`WRITE_WAIT_SECONDS` while another process
    holds it: DuckDB lets one process write a file, and nobody else open it meanwhile."""
    opened: list[duckdb.DuckDBPyConnection] = []
    conflicts: list[duckdb.Error] = []

    def attempt() -> bool:
        try:
            opened.append(connect(str(path), read_only=read_only))
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


def _interrupted(error: BaseException) -> bool:
    """Whether ``error`` is DuckDB reporting Ctrl-C during a statement: it raises
    ``RuntimeError("Query interrupted")`` (or InterruptException), not KeyboardInterrupt."""
    return isinstance(error, duckdb.InterruptException) or (
        isinstance(error, RuntimeError) and "interrupted" in str(error).lower()
    )


@contextmanager
def ctrl_c_as_interrupt() -> Iterator[None]:
    """Turn DuckDB's report of Ctrl-C into KeyboardInterrupt, which the CLI reports as
    "Interrupted." with exit code 130."""
    try:
        yield
    except (duckdb.Error, RuntimeError) as error:
        if _interrupted(error):
            raise KeyboardInterrupt from None
        raise


@contextmanager
def write_transaction(con: duckdb.DuckDBPyConnection, where: str) -> Iterator[None]:
    """One transaction on ``con``, committed when the block ends. On any error it is rolled
    back: Ctrl-C leaves as KeyboardInterrupt, a DuckDB error as one :class:`HistoryError` line
    naming ``where`` ("writing to <where> failed, nothing was written: ..."), anything else as
    itself. The caller holds the file alone (:func:`connect_file`): writers take turns."""
    con.begin()
    try:
        yield
        con.commit()
    except BaseException as error:
        con.rollback()
        if _interrupted(error):
            raise KeyboardInterrupt from None
        if isinstance(error, duckdb.Error):
            raise HistoryError(f"writing to {where} failed, nothing was written: "
                               f"{first_line(error)}") from None
        raise
