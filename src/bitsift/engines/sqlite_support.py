"""What SQLite lacks and bitsift adds on the connection: math functions and a query timeout.

SQLite has no statement timeout, and its LN/FLOOR exist only in builds compiled with
SQLITE_ENABLE_MATH_FUNCTIONS (Python's own sqlite3 3.40 has them, some distributions' builds
do not). bitsift registers Python's ``math.log`` / ``math.floor`` under those names when the
connection lacks them (and always puts back a FLOOR that keeps SQLite's NULL and infinity
rules, because SQLAlchemy's pysqlite dialect replaces SQLite's own with ``math.floor``), and
enforces ``--timeout`` with a progress handler that aborts the
running statement once the deadline has passed (SQLite then raises "interrupted").
"""

from __future__ import annotations

import math
import sqlite3
import time
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import Any
from urllib.parse import parse_qs, unquote, urlsplit


def _floor(x: Any) -> Any:
    """SQLite's own FLOOR: NULL stays NULL, infinities stay infinite, integers stay integers."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return x
    return math.floor(x) if isinstance(x, int) else float(math.floor(x))


#: Functions the generated SQL calls that a bare SQLite build may lack, and Python stand-ins.
MATH_FUNCTIONS: dict[str, Callable[[Any], Any]] = {
    "ln": lambda x: math.log(x) if x is not None and x > 0 else None,
    "floor": _floor,
    "sqrt": lambda x: math.sqrt(x) if x is not None and x >= 0 else None,
}

#: Functions that SQLAlchemy's pysqlite dialect replaces on every connection with Python's own
#: (``floor`` becomes ``math.floor``, which raises on NULL and on infinities, so a quantile
#: pre-pass over an all-NULL column failed with "user-defined function raised exception"):
#: bitsift puts back stand-ins that behave like SQLite's.
REPLACED_BY_SQLALCHEMY: tuple[str, ...] = ("floor",)

#: How many SQLite virtual-machine steps run between two looks at the clock.
PROGRESS_STEPS = 10_000


def missing_math_functions(connection: sqlite3.Connection) -> list[str]:
    """Names from :data:`MATH_FUNCTIONS` the connection cannot call."""
    missing = []
    for name in MATH_FUNCTIONS:
        try:
            connection.execute(f"SELECT {name}(2.5)").fetchone()  # name from the table above
        except sqlite3.OperationalError:
            missing.append(name)
    return missing


def register_math_functions(connection: sqlite3.Connection, names: list[str] | None = None
                            ) -> list[str]:
    """Register Python stand-ins for the missing (or the given) math functions; returns them."""
    chosen = missing_math_functions(connection) if names is None else names
    for name in chosen:
        connection.create_function(name, 1, MATH_FUNCTIONS[name], deterministic=True)
    return chosen


def restore_functions(connection: sqlite3.Connection) -> None:
    """Register :data:`REPLACED_BY_SQLALCHEMY` again, with SQLite's NULL and infinity rules."""
    for name in REPLACED_BY_SQLALCHEMY:
        connection.create_function(name, 1, MATH_FUNCTIONS[name], deterministic=True)


@contextmanager
def deadline(connection: sqlite3.Connection, seconds: float | None) -> Iterator[Callable[[], bool]]:
    """Abort statements on ``connection`` that run past ``seconds``; yields "has it fired?"."""
    fired = {"yes": False}
    if not seconds:
        yield lambda: False
        return
    stop_at = time.monotonic() + seconds

    def check() -> int:
        if time.monotonic() > stop_at:
            fired["yes"] = True
            return 1
        return 0

    connection.set_progress_handler(check, PROGRESS_STEPS)
    try:
        yield lambda: fired["yes"]
    finally:
        connection.set_progress_handler(None, 0)


def missing_database(database: str, query: Mapping[str, Any]) -> str | None:
    """The file a SQLite URL names when it does not exist (SQLite would create it empty, and
    bitsift never creates a source), else None. ``database`` and ``query`` as SQLAlchemy parsed
    them: with ``uri=true`` the database is a ``file:`` URI whose path is checked, so that
    ``file:x.db?mode=rwc`` creates nothing either; in-memory databases are never missing.

    >>> missing_database("file:/no/such.db", {"uri": "true", "mode": "rwc"})
    '/no/such.db'
    >>> missing_database("file:shared?mode=memory", {"uri": "true"}) is None
    True
    """
    path = _file_path(database, query)
    return None if path is None or Path(path).exists() else path


def in_memory(database: str, query: Mapping[str, Any]) -> bool:
    """Whether a SQLite URL's database lives in its connection's memory: a second connection
    would open another one (run mode then stays on one session).

    >>> in_memory("", {}), in_memory("file:x?mode=memory", {"uri": "true"}), in_memory("x.db", {})
    (True, True, False)
    """
    return _file_path(database, query) is None


def _file_path(database: str, query: Mapping[str, Any]) -> str | None:
    """The file a SQLite URL's database names, or None for an in-memory database."""
    if database in ("", ":memory:"):
        return None
    path = database
    if str(query.get("uri", "")).lower() in ("true", "1") and database.startswith("file:"):
        location = urlsplit(database)
        modes = [*parse_qs(location.query).get("mode", []), *_listed(query.get("mode"))]
        if "memory" in modes:
            return None
        # file:x, file:/x and file:///x (or file://localhost/x) name a path; %-escapes decoded.
        path = unquote(location.path)
        if not path or path == ":memory:":
            return None
    return path


#: The first 16 bytes of every SQLite 3 database file (sqlite.org/fileformat.html, 1.3).
SQLITE_HEADER = b"SQLite format 3\x00"


def is_sqlite_file(path: str) -> bool:
    """Whether ``path`` is a readable file starting with the SQLite 3 header."""
    try:
        with open(path, "rb") as file:
            return file.read(len(SQLITE_HEADER)) == SQLITE_HEADER
    except OSError:
        return False


def _listed(value: Any) -> list[str]:
    if value is None:
        return []
    return [value] if isinstance(value, str) else [str(v) for v in value]
