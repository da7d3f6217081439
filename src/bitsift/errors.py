"""Exceptions raised by bitsift's library code.

The CLI turns every :class:`BitsiftError` into one line on stderr and exit code 1.
Messages name every offending item and, where it helps, suggest close matches.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable

from bitsift.names import ambiguity_note


def first_line(error: BaseException) -> str:
    """The first line of ``error``'s message (a driver's may run to many), or its class name
    when it has none.

    >>> first_line(ValueError("bad value\\nLINE 1: SELECT ..."))
    'bad value'
    >>> first_line(KeyError())
    'KeyError'
    """
    text = str(error).strip()
    return text.splitlines()[0] if text else type(error).__name__


class BitsiftError(Exception):
    """Base class of every error bitsift reports to its user."""


class SpecError(BitsiftError):
    """The request itself is invalid (bad option value, contradictory options)."""


class SourceError(BitsiftError):
    """The data source cannot be opened or read (missing file, bad URL, missing driver)."""


class MissingDriverError(SourceError):
    """A SQLAlchemy dialect needs a driver that is not installed."""


class TableNotFoundError(SourceError):
    """The named table does not exist in the source."""


class ColumnError(BitsiftError):
    """One or more named columns do not exist, or cannot be used as asked."""


class DataError(BitsiftError):
    """The data cannot be ranked (empty table, a target with one class...)."""


class PredicateError(BitsiftError):
    """A ``--where`` predicate was rejected."""


class QueryError(BitsiftError):
    """The database refused or aborted a statement bitsift sent."""


class QueryTimeoutError(QueryError):
    """The statement timeout fired."""


class QueryCancelledError(QueryError):
    """The statement was cancelled: by bitsift (Ctrl-C, a failed sibling session) or on the
    server (``KILL QUERY``, ``pg_cancel_backend``), not by a timeout."""


class Terminated(KeyboardInterrupt):  # noqa: N818 - named after the signal, like KeyboardInterrupt
    """SIGTERM, raised in the main thread by the CLI's handler.

    A KeyboardInterrupt, so every path that cancels the running statement on Ctrl-C (psycopg's
    own cancel, bitsift's ``KILL QUERY``, the session pool's cancel) also runs on SIGTERM.
    """


#: The shortest identifier limit among SQL engines (PostgreSQL's 63 bytes): a suggestion that is
#: the start of a longer name, and at least this long, is that name cut by the database.
CUT_NAME_BYTES = 63


def suggest(name: str, candidates: Iterable[str]) -> str:
    """Return ``" (did you mean 'x'?)"`` for the closest candidate, or ``""``.

    >>> suggest("levle", ["level", "region"])
    " (did you mean 'level'?)"
    """
    pool = list(candidates)
    matches = difflib.get_close_matches(name, pool, n=1, cutoff=0.6)
    if not matches:
        lowered = {c.lower(): c for c in pool}
        if name.lower() in lowered:
            matches = [lowered[name.lower()]]
    if not matches:
        matches = [c for c in pool if len(c.encode()) >= CUT_NAME_BYTES and name.startswith(c)]
    if not matches:
        return ""
    kept = len(matches[0].encode())
    if kept >= CUT_NAME_BYTES and name.startswith(matches[0]) and len(name) > len(matches[0]):
        # PostgreSQL silently cuts longer names at creation: the table holds the cut name.
        return (f" (did you mean {matches[0]!r}? the database cut that name to its first "
                f"{kept} bytes)")
    return f" (did you mean {matches[0]!r}?)"


def unknown_names_message(what: str, names: Iterable[str], candidates: Iterable[str]) -> str:
    """Build one line naming every unknown name with a suggestion for each."""
    pool = list(candidates)
    parts = [f"{n!r}{ambiguity_note(n, pool) or suggest(n, pool)}" for n in names]
    plural = "s" if len(parts) > 1 else ""
    return f"unknown {what}{plural}: " + ", ".join(parts)
