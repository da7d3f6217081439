"""A DuckDB results file, shared by the history and the counts store: opened while another
process may hold it, written in one transaction, Ctrl-C reported as Ctrl-C."""

from __future__ import annotations

import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import duckdb

from bitsift.engines.duckdb_engine import connect
from bitsift.errors import first_line
from bitsift.jobs.history import HistoryError
from bitsift.jobs.history_store import WRITE_WAIT_SECONDS, _wait_until

#: Bytes DuckDB writes when it creates a database file: a main header and two database
#: headers of 4 KiB each. A shorter file is either being created or not DuckDB's.
HEADER_BYTES = 3 * 4096
#: How long a file that looks half-created (:func:`being_created`) is waited for before its
#: open error counts: another process writes the headers within milliseconds of creating it.
CREATION_WAIT_SECONDS = 2.0


def being_created(path: Path) -> bool:
    """Whether ``path`` looks like a DuckDB file another process has just created and not yet
    written its headers to: shorter than the headers, and empty, all zero bytes or starting
    with DuckDB's header (its magic bytes ``DUCK`` at offset 8). A short file of anything else
    (a text file given by mistake) is not waited for."""
    try:
        with path.open("rb") as file:
            head = file.read(HEADER_BYTES)
    except OSError:
        return False
    return len(head) < HEADER_BYTES and (head.count(0) == len(head) or head[8:12] == b"DUCK")


def connect_file(path: Path, *, read_only: bool) -> duckdb.DuckDBPyConnection:
    """Open the results file, waiting up to :data:`WRITE_WAIT_SECONDS` while another process
    holds it: DuckDB lets one process write a file, and nobody else open it meanwhile. A file
    another process has created but not yet written its headers to is waited for too (briefly:
    :data:`CREATION_WAIT_SECONDS`), since DuckDB calls it "not a valid DuckDB database file"."""
    opened: list[duckdb.DuckDBPyConnection] = []
    conflicts: list[duckdb.Error] = []
    first_half_created: list[float] = []

    def half_created() -> bool:
        """True while the file may still be getting its headers (:func:`being_created`), for
        at most :data:`CREATION_WAIT_SECONDS`: two runs racing on a new results file."""
        if not being_created(path):
            return False
        first_half_created[:] = first_half_created or [time.monotonic()]
        return time.monotonic() - first_half_created[0] < CREATION_WAIT_SECONDS

    def attempt() -> bool:
        try:
            opened.append(connect(str(path), read_only=read_only))
        except duckdb.IOException as error:
            if "lock" not in str(error).lower() and not half_created():
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
