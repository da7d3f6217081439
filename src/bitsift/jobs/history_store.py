"""The open results destination's common part: the store interface, its schema checks, the
reading every engine family's store shares (runs, rows, jobs), and the waiting for a turn to
write."""

from __future__ import annotations

import time
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any

from bitsift.jobs.history import (
    COLUMN_NAMES,
    SCHEMA_VERSION,
    Destination,
    HistoryError,
    RunInfo,
    compatibility_problems,
)
from bitsift.version import __version__

#: How long a run waits for another run writing the same history table (or holding the DuckDB
#: file) before it gives up with one line. A write itself takes well under a second.
WRITE_WAIT_SECONDS = 60.0


class HistoryStore(ABC):
    """A results destination, open. Use :func:`open_store`."""

    def __init__(self, destination: Destination) -> None:
        self.destination = destination
        self.table = destination.table_name()

    @abstractmethod
    def existing_columns(self) -> dict[str, str] | None:
        """Column name -> type family of the existing table, or None when there is none."""

    @abstractmethod
    def newest_schema_version(self) -> int | None:
        """The highest schema_version stored, or None for an empty table."""

    @abstractmethod
    def replace_run(self, job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> int:
        """In one transaction, with the table's other writers waiting: create the table if
        missing, delete the run, insert ``rows``."""

    def runs(self, job: str) -> list[RunInfo]:
        """The job's runs, newest first."""
        runs = (RunInfo(r[0], r[1], int(r[2])) for r in self._run_rows(job))
        # Ties on run_at (coarse clocks) fall back to the run id, which is time-based by default.
        return sorted(runs, key=lambda r: (r.run_at, r.run_id), reverse=True)

    def read(self, job: str, run_ids: Iterable[str]) -> list[dict[str, Any]]:
        """Every row of the given runs of ``job``."""
        ids = list(run_ids)
        if not ids:
            return []
        return [dict(zip(COLUMN_NAMES, row, strict=True)) for row in self._read_rows(job, ids)]

    def jobs(self) -> list[str]:
        """The names of the jobs with runs in the table, sorted (none when it does not exist)."""
        return sorted(str(r[0]) for r in self._job_rows())

    @abstractmethod
    def _run_rows(self, job: str) -> Sequence[Sequence[Any]]:
        """(run_id, newest run_at, rows) of each of the job's runs, in any order (none when
        the table does not exist)."""

    @abstractmethod
    def _read_rows(self, job: str, run_ids: Sequence[str]) -> Sequence[Sequence[Any]]:
        """The values of :data:`COLUMN_NAMES`, in that order, of every row of the given runs
        (NULL for a column a schema version 1 table lacks; none when there is no table)."""

    @abstractmethod
    def _job_rows(self) -> Sequence[Sequence[Any]]:
        """One row per job with runs in the table, its name first, in any order."""

    @abstractmethod
    def tables(self) -> list[str]:
        """The names of the tables in the table's schema, sorted."""

    def close(self) -> None:  # noqa: B027 - optional hook
        """Release the connection."""

    def __enter__(self) -> HistoryStore:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def check(self) -> bool:
        """Raise :class:`HistoryError` if the table exists and is incompatible.

        Returns whether the table exists.
        """
        existing = self.existing_columns()
        if existing is None:
            # The write would create the table there: a missing schema would fail it after
            # the ranking work.
            if not self.schema_exists():
                raise HistoryError(
                    f"results table {self.destination.table} in {self.destination.display}: "
                    f"schema {self.table.db} does not exist; create it, or choose another "
                    "results table"
                )
            return False
        self._verify(existing, self.newest_schema_version)
        return True

    def schema_exists(self) -> bool:
        """Whether the table's schema exists (True for an unqualified table)."""
        return True

    def column_widths(self) -> dict[str, int]:
        """Column name -> the most characters it holds, for the columns that have a limit."""
        return {}

    @staticmethod
    def _check_keys(job: str, run_id: str, rows: Sequence[Mapping[str, Any]]) -> None:
        """Refuse rows of another job or run: they would not replace the run being deleted
        but sit beside it, and be doubled by the next rerun."""
        for row in rows:
            if row["job"] != job or row["run_id"] != run_id:
                raise HistoryError(
                    f"rows of job {row['job']!r}, run {row['run_id']!r} cannot be written as "
                    f"job {job!r}, run {run_id!r}; nothing was written"
                )

    def width_problems(self, values: Mapping[str, Iterable[str]]) -> list[str]:
        """One line per column that a value to be written does not fit (checked before the
        ranking work, which such a write would throw away); empty when everything fits."""
        widths = self.column_widths()
        problems = []
        for name in COLUMN_NAMES:
            limit = widths.get(name)
            if limit is None or name not in values:
                continue
            # sorted first: of equally long values, always the same one is named.
            longest = max(sorted(values[name]), key=len, default="")
            if len(longest) > limit:
                shown = longest if len(longest) <= 40 else longest[:40] + "..."
                problems.append(
                    f"results table {self.destination.table} in {self.destination.display}: "
                    f"column {name} holds at most {limit} characters, but {shown!r} has "
                    f"{len(longest)}; widen the column (for example to TEXT) or choose "
                    "another results table"
                )
        return problems

    def _verify(self, existing: Mapping[str, str], newest_version: Callable[[], int | None]
                ) -> None:
        problems = compatibility_problems(existing)
        where = f"{self.destination.table} in {self.destination.display}"
        if problems:
            raise HistoryError(
                f"results table {where} is not a bitsift history table of schema version "
                f"{SCHEMA_VERSION}: " + "; ".join(problems)
                + ". bitsift never alters an existing table (but adds the columns of later "
                "schema versions to a table of an older one): choose another results table, "
                "or migrate this one yourself (the schema is in docs/scheduled-runs.md)"
            )
        newest = newest_version()
        if newest is not None and newest > SCHEMA_VERSION:
            raise HistoryError(
                f"results table {where} holds rows of schema version {newest}, written by a "
                f"newer bitsift; this is bitsift {__version__} (schema version {SCHEMA_VERSION})"
            )


def _wait_until(attempt: Callable[[], bool], seconds: float) -> bool:
    """Call ``attempt`` until it returns True (then True), pausing a little longer each time,
    or until ``seconds`` have passed (then False)."""
    deadline = time.monotonic() + seconds
    pause = 0.01
    while not attempt():
        if time.monotonic() >= deadline:
            return False
        time.sleep(pause)
        pause = min(pause * 2, 0.25)
    return True
