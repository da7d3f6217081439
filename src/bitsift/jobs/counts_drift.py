"""Drift between two windows of stored counts (``bitsift drift DEST --from-counts``,
docs/stored-counts.md): both windows ranked from the counts, inside the database holding them,
then compared with the rules of history drift (:func:`bitsift.jobs.drift.compare`): the gain
intervals by default, rank moves, attributes appearing or disappearing, flags."""

from __future__ import annotations

import datetime as _dt
from typing import Any

from bitsift.errors import Option, Problem, SpecError
from bitsift.jobs.drift import DriftReport, DriftThresholds, compare
from bitsift.jobs.history import ranking_rows
from bitsift.run.counts_meta import DEFAULT_COUNTS_TABLE
from bitsift.run.counts_rank import (
    display_of,
    open_window,
    parse_window,
    rank_window,
    read_meta,
    window_options,
)
from bitsift.run.result import Ranking
from bitsift.run.session import session_for

#: The ranking name the compared rows carry (the text report's first column).
WINDOW_RANKING = "window"


def previous_window(since: str | int | None, until: str | int | None, kind: str,
                    ) -> tuple[str | int, str | int]:
    """The window of the same length just before ``[since, until)`` (dates or integers).

    >>> previous_window("2025-12-02", "2026-01-01", "date")
    ('2025-11-02', '2025-12-02')
    >>> previous_window(10, 14, "integer")
    (6, 10)
    """
    if since is None or until is None or kind == "text":
        raise SpecError(problems=[Problem("against_since", (
            "name the window to compare with: ", Option("against_since"), " and ",
            Option("against_until"), " (the window before is found by itself only for a "
            "window of dates or whole numbers with both ends given)"))])
    if kind == "integer":
        low, high = int(since), int(until)
        return low - (high - low), low
    first, end = _dt.date.fromisoformat(str(since)), _dt.date.fromisoformat(str(until))
    return (first - (end - first)).isoformat(), first.isoformat()


def drift_counts(dest: Any, *, counts_table: str = DEFAULT_COUNTS_TABLE,
                 since: str | int | None = None, until: str | int | None = None,
                 against_since: str | int | None = None,
                 against_until: str | int | None = None,
                 thresholds: DriftThresholds | None = None, sort: str = "information_gain",
                 missing: str = "category", confidence: float = 0.95) -> DriftReport:
    """Compare the window ``[since, until)`` of the counts in ``dest`` with the window
    ``[against_since, against_until)`` (default: the window of the same length just before).
    Both are ranked on one session; an empty window or a window whose start is not before
    its end is an error, never "no drift"."""
    limits = thresholds or DriftThresholds()
    options = window_options(sort=sort, missing=missing, confidence=confidence)
    with session_for(dest, counts_table) as session:
        shown = display_of(dest, session.display)
        meta = read_meta(session.engine, session.table, shown)
        low, high = parse_window(since, until, meta.partition_kind)
        if against_since is None and against_until is None:
            against_since, against_until = previous_window(low, high, meta.partition_kind)
        newer = rank_window(session, open_window(session, low, high, counts_table, shown),
                            options, False)
        older = rank_window(session, open_window(
            session, against_since, against_until, counts_table, shown,
            ("against_since", "against_until")), options, False)
    assert isinstance(newer, Ranking) and isinstance(older, Ranking)
    changes, notes = compare(_rows(older, sort), _rows(newer, sort), limits)
    return DriftReport(job=counts_table, old=None, new=None, thresholds=limits,
                       changes=changes, notes=notes,
                       windows={"new": _window(newer), "old": _window(older)})


def _window(ranking: Ranking) -> dict[str, Any]:
    return {"table": ranking.table, "rows": ranking.rows}


def _rows(ranking: Ranking, sort: str) -> list[dict[str, Any]]:
    """The ranking as history rows (the form :func:`compare` reads)."""
    return ranking_rows(ranking, run_id="", run_at=_dt.datetime(1970, 1, 1, tzinfo=_dt.UTC),
                        job="", ranking_name=WINDOW_RANKING, options={"sort": sort})
