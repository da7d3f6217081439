"""Exceptions raised by bitsift's library code.

The CLI turns every :class:`BitsiftError` into one line on stderr and exit code 1.
Messages name every offending item and, where it helps, suggest close matches.
"""

from __future__ import annotations

import difflib
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, replace
from typing import ClassVar, Self

from bitsift.names import ambiguity_note

#: How an option is spelled for one reader: the library's parameter name (``binning_for``),
#: the CLI's flag (``--binning-for``) or the job file's TOML key (the parameter name).
Spelling = Callable[["Option"], str]


@dataclass(frozen=True)
class Option:
    """An option named in a problem's message, spelled for whoever reads it (see
    :data:`Spelling`). ``flag`` is given only where the CLI's flag is not ``--`` and the
    parameter name with dashes (``k`` is ``--select`` in ``bitsift report``)."""

    name: str
    flag: str | None = None


def parameter_name(option: Option) -> str:
    """The library's (and the job file's) spelling: ``binning_for``."""
    return option.name


def flag_name(option: Option) -> str:
    """The CLI's spelling: ``--binning-for``."""
    return option.flag or "--" + option.name.replace("_", "-")


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a request: the option (parameter name) or job-file key it is about
    (``None``: no single one), its message as text and :class:`Option` parts, and for a job
    file the line that sets it."""

    key: str | None
    parts: tuple[str | Option, ...]
    line: int | None = None

    @classmethod
    def of(cls, text: str, key: str | None = None, line: int | None = None) -> Problem:
        """A problem whose message names no option (or names it the same for every reader)."""
        return cls(key, (text,), line)

    @classmethod
    def option(cls, key: str, text: str, flag: str | None = None) -> Problem:
        """A problem about option ``key``, its message the option's name then ``text``.

        >>> Problem.option("bins", " must be between 2 and 1000, not 1").message
        'bins must be between 2 and 1000, not 1'
        """
        return cls(key, (Option(key, flag), text))

    def render(self, spell: Spelling = parameter_name) -> str:
        """The message with every option spelled by ``spell``.

        >>> p = Problem("by", ("the target 'y' cannot also be a segment (", Option("by"), ")"))
        >>> p.render()
        "the target 'y' cannot also be a segment (by)"
        >>> p.render(flag_name)
        "the target 'y' cannot also be a segment (--by)"
        """
        return "".join(p if isinstance(p, str) else spell(p) for p in self.parts)

    @property
    def message(self) -> str:
        """The message as the library shows it (parameter names)."""
        return self.render()

    def at(self, line: int | None) -> Problem:
        """This problem at ``line`` of a job file."""
        return replace(self, line=line)


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
    """Base class of every error bitsift reports to its user.

    :attr:`problems` lists what is wrong, each naming the option it is about; ``str()`` is one
    readable line with the library's parameter names (problems joined with ``"; "``); the CLI
    renders the same line with its flag names (``render(flag_name)``), the job loader one line
    per problem at the line setting its key.
    """

    #: Shown one line per problem (a job file's, each at its line) instead of one line.
    line_per_problem: ClassVar[bool] = False

    def __init__(self, message: str | None = None, *, problems: Sequence[Problem] = ()) -> None:
        # A message alone is one problem about no single option (str(): drivers' messages
        # are passed on as they come).
        self.problems: list[Problem] = list(problems) or [Problem.of(str(message or ""))]
        super().__init__(message if message is not None else self.render())

    @classmethod
    def option(cls, key: str, text: str, flag: str | None = None) -> Self:
        """An error with one problem about option ``key`` (see :meth:`Problem.option`)."""
        return cls(problems=[Problem.option(key, text, flag)])

    def lines(self, spell: Spelling = parameter_name) -> list[str]:
        """One line per problem, options spelled by ``spell``."""
        return [p.render(spell) for p in self.problems]

    def render(self, spell: Spelling = parameter_name) -> str:
        """Every problem on one line, joined with ``"; "``."""
        return "; ".join(self.lines(spell))


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


def install_extra(extra: str) -> str:
    """How to install one of bitsift's extras: the same advice in every message and the README
    (bitsift is installed from its checkout, not from a public package index).

    >>> install_extra("postgres")
    "install the extra in the bitsift checkout: .venv/bin/pip install -e '.[postgres]'"
    """
    return f"install the extra in the bitsift checkout: .venv/bin/pip install -e '.[{extra}]'"


def unknown_names_message(what: str, names: Iterable[str], candidates: Iterable[str]) -> str:
    """Build one line naming every unknown name with a suggestion for each."""
    pool = list(candidates)
    parts = [f"{n!r}{ambiguity_note(n, pool) or suggest(n, pool)}" for n in names]
    plural = "s" if len(parts) > 1 else ""
    return f"unknown {what}{plural}: " + ", ".join(parts)
