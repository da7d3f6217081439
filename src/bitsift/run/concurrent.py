"""Run mode over a small pool of sessions: the attributes cut into parts, the parts in parallel.

Each part is a spec narrowed to some of the attributes; its job is bitsift's usual statements
for that spec (the quantile boundaries of its numeric attributes, then the ranking statement;
where the dialect counts quantile bins from cells, those attributes make a part of their own,
:mod:`bitsift.run.quantile_counts`), run on one session of the pool. The parts run on
``sessions`` sessions at once, so the engine works on several statements together: on DuckDB
they share its thread pool (and one part's round trips overlap another's statements); on
PostgreSQL each session is a server process. The numbers are those of the one-statement
ranking; only the cutting of the work differs.

Only run mode uses this (``bitsift sql`` prints one statement), and only on sessions bitsift
opened itself: a caller's connection may hold temporary tables, an open transaction or a
DataFrame scanned by name, none of which a second session would see.

The ``run_sessions`` field of the run policy (engines/policy.py) turns it on per engine; the
measurements behind each choice are in benchmarks/RESULTS.md.
"""

from __future__ import annotations

import queue
import time
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import FIRST_EXCEPTION, Future, ThreadPoolExecutor, wait
from contextlib import contextmanager
from dataclasses import dataclass, replace
from functools import partial
from typing import TypeVar

from bitsift.engines.base import Engine
from bitsift.run import quantile_counts, quantiles, value_counts
from bitsift.run.cuts import fetch_cuts
from bitsift.run.parts import Record, merge_parts
from bitsift.spec.rankspec import AttributeSpec, RankSpec
from bitsift.sql.sqlbuild import rank_statement

#: Seconds between two cancels of the sessions still running after a failure or Ctrl-C.
CANCEL_RETRY = 0.25
#: How long bitsift keeps cancelling before it leaves the sessions to end on their own.
STOP_WITHIN = 30.0

#: What one job on a session returns.
_Done = TypeVar("_Done")

#: Relative cost of an attribute in a part: a numeric one adds a quantile pre-pass and binning.
_WEIGHT = {"numeric": 4, "categorical": 1}
#: ... and a numeric attribute counted from cells (quantile_counts), against a categorical
#: one in the ranking statement. Measured 2026-12-05 (2 sessions, shared machine): DuckDB
#: 2M x 16, cells of 4 numeric 0.43-0.60 s, ranking statement of 12 categorical 0.52-0.75 s;
#: PostgreSQL 500k x 16, ranges + cells 0.80-0.87 s, ranking statement 1.0-1.13 s.
_COUNTED_WEIGHT = 2.3


def sessions_for(engine: Engine, spec: RankSpec) -> int:
    """How many sessions the ranking of ``spec`` runs on (1: one statement, as usual)."""
    if len(spec.attributes) < 2 or not engine.can_open_siblings():
        return 1
    return max(1, min(engine.policy.run_sessions, len(spec.attributes)))


@dataclass(frozen=True)
class SessionPool:
    """The sessions of one ranking, and a queue of the idle ones."""

    members: list[Engine]
    idle: queue.Queue[Engine]

    def cancel(self) -> None:
        """Cancel every session's running statement (DuckDB ``interrupt()``, PostgreSQL's
        cancel request, MariaDB ``KILL QUERY``) and make each refuse its next one."""
        for member in self.members:
            member.cancel()


@contextmanager
def session_pool(engine: Engine, size: int, timeout: float | None) -> Iterator[SessionPool]:
    """``engine`` and ``size - 1`` sibling sessions; the siblings close afterwards."""
    siblings: list[Engine] = []
    try:
        for _ in range(size - 1):
            siblings.append(engine.open_sibling(timeout))
        idle: queue.Queue[Engine] = queue.Queue()
        for member in [engine, *siblings]:
            idle.put(member)
        yield SessionPool(members=[engine, *siblings], idle=idle)
    finally:
        for sibling in siblings:
            sibling.close()


def split(attributes: Sequence[AttributeSpec], parts: int,
          max_size: int | None = None) -> list[list[int]]:
    """Attribute positions cut into at most ``parts`` groups of about equal cost.

    Heaviest first onto the lightest group that has room (the LPT rule); no group gets more
    than ``max_size`` attributes (give enough ``parts`` for them all); each keeps table order.

    >>> from bitsift.spec.rankspec import AttributeSpec
    >>> kinds = ["numeric", "categorical", "categorical", "numeric", "categorical"]
    >>> split([AttributeSpec(f"a{i}", k, "") for i, k in enumerate(kinds)], 2)
    [[0, 1, 4], [2, 3]]
    """
    count = max(1, min(parts, len(attributes)))
    if max_size is not None and count * max_size < len(attributes):
        raise ValueError(f"{len(attributes)} attributes do not fit in {count} x {max_size}")
    groups: list[list[int]] = [[] for _ in range(count)]
    loads = [0] * count
    for i in sorted(range(len(attributes)), key=lambda i: -_WEIGHT[attributes[i].kind]):
        room = [g for g in range(count) if max_size is None or len(groups[g]) < max_size]
        lightest = min(room, key=lambda g: loads[g])
        groups[lightest].append(i)
        loads[lightest] += _WEIGHT[attributes[i].kind]
    return [sorted(group) for group in groups if group]


@dataclass(frozen=True)
class PartResult:
    """One part's boundaries and result rows (``attribute_index`` local to the part)."""

    cuts: dict[str, list[float]]
    records: list[Record]


def rank_part(engine: Engine, spec: RankSpec) -> PartResult:
    """The statements of one part on one session: the boundaries pre-pass and the ranking
    statement, or, where the run policy's ``run_quantile`` is "counted", the attributes binned
    by quantile ranked from bucket counts (:mod:`bitsift.run.quantile_counts`), or, where its
    ``run_counts`` is "client", each attribute ranked from its bare counts
    (:mod:`bitsift.run.value_counts`)."""
    if engine.policy.run_quantile == "counted" and quantile_counts.counts_apply(spec):
        records, cuts = quantile_counts.rank_counted(engine, spec)
        return PartResult(cuts=cuts, records=records)
    if value_counts.counts_in_client(engine, spec):
        records, cuts = value_counts.rank_by_counts(engine, spec)
        return PartResult(cuts=cuts, records=records)
    cuts = fetch_cuts(engine, spec)
    records = engine.fetch(rank_statement(spec, engine.caps, cuts).sql).records()
    return PartResult(cuts=cuts, records=records)


def _run_on_pool(pool: SessionPool, job: Callable[[Engine], _Done]) -> _Done:
    member = pool.idle.get()
    try:
        return job(member)
    finally:
        pool.idle.put(member)


def run_on_sessions(engine: Engine, jobs: Sequence[Callable[[Engine], _Done]], sessions: int,
                    timeout: float | None) -> list[_Done]:
    """Each job run on one of ``sessions`` sessions (``engine`` and siblings of it), at most
    ``sessions`` at once, in the order given; their results in that order. The first failure
    (or Ctrl-C) cancels the statements still running and is raised once they have stopped.
    With one session, or one job, the jobs run one after another on ``engine``."""
    size = max(1, min(sessions, len(jobs)))
    if size == 1:
        return [job(engine) for job in jobs]
    with session_pool(engine, size, timeout) as pool, ThreadPoolExecutor(
        max_workers=size, thread_name_prefix="bitsift"
    ) as executor:
        futures = [executor.submit(_run_on_pool, pool, job) for job in jobs]
        return _results(futures, pool)


def _groups(engine: Engine, spec: RankSpec, sessions: int, max_size: int) -> list[list[int]]:
    """The parts' attribute positions. Where attributes binned by quantile are ranked from
    bucket counts, they make parts of their own (their statements read only their columns),
    the other attributes share the other sessions; where the run policy says
    ``balance_counted_part`` and everything fits in ``sessions`` statements, the part of
    the counted attributes also ranks as many of the others as even out the sessions'
    loads (:func:`_balanced`)."""
    counted: list[int] = []
    if engine.policy.run_quantile == "counted" and quantile_counts.counts_apply(spec):
        counted = [i - 1 for i in quantiles.quantile_indexes(spec)]
    others = [i for i in range(len(spec.attributes)) if i not in counted]
    if value_counts.counts_in_client(engine, spec):
        return _single_parts(spec, counted, others, sessions, max_size)
    if not counted or not others:
        parts = max(sessions, -(-len(spec.attributes) // max_size))
        return split(spec.attributes, parts, max_size)
    if (engine.policy.balance_counted_part and sessions > 1 and len(counted) <= max_size
            and len(others) <= (sessions - 1) * max_size):
        return _balanced(spec, counted, others, sessions, max_size)
    parts = max(sessions - 1, -(-len(others) // max_size))
    shared = split([spec.attributes[i] for i in others], parts, max_size)
    own = [counted[at:at + max_size] for at in range(0, len(counted), max_size)]
    return [[others[i] for i in group] for group in shared] + own


def _balanced(spec: RankSpec, counted: list[int], others: list[int], sessions: int,
              max_size: int) -> list[list[int]]:
    """``sessions`` parts: the counted attributes (:data:`_COUNTED_WEIGHT` each) in the
    last, the others onto the lightest part with room, heaviest first (the LPT rule), so
    that no session waits for another's long ranking statement (below: loads 9 against
    3 x 2.3 + 2). The counted part is submitted last: its first statements are the lighter
    ones.

    >>> from bitsift.spec.rankspec import AttributeSpec, RankSpec
    >>> kinds = ["categorical"] * 3 + ["numeric"] + ["categorical"] * 8 + ["numeric"] * 2
    >>> spec = RankSpec.__new__(RankSpec)
    >>> object.__setattr__(spec, "attributes",
    ...                    tuple(AttributeSpec(f"a{i}", k, "") for i, k in enumerate(kinds)))
    >>> _balanced(spec, [3, 12, 13], [0, 1, 2, 4, 5, 6, 7, 8, 9, 10, 11], 2, 64)
    [[0, 1, 2, 4, 5, 6, 7, 9, 11], [3, 8, 10, 12, 13]]
    """
    groups: list[list[int]] = [[] for _ in range(sessions - 1)] + [list(counted)]
    loads = [0.0] * (sessions - 1) + [_COUNTED_WEIGHT * len(counted)]
    ranked = [0] * sessions  # attributes of each part's ranking statement
    for i in sorted(others, key=lambda i: -_WEIGHT[spec.attributes[i].kind]):
        room = [g for g in range(sessions) if ranked[g] < max_size]
        lightest = min(room, key=lambda g: (loads[g], g))
        groups[lightest].append(i)
        ranked[lightest] += 1
        loads[lightest] += _WEIGHT[spec.attributes[i].kind]
    return [sorted(group) for group in groups if group]


def _single_parts(spec: RankSpec, counted: list[int], others: list[int], sessions: int,
                  max_size: int) -> list[list[int]]:
    """The parts where each attribute is counted on its own (run policy ``run_counts``
    "client"): the attributes ranked from quantile cells cut into one part per session
    (a part's statements run one after another: split, they run side by side), then one part per
    other attribute, heaviest first. Parts start in this order on whichever session is idle,
    so the long quantile parts start first and the short ones fill the gaps."""
    shares = -(-len(counted) // max_size) if counted else 0
    quantile_parts = split([spec.attributes[i] for i in counted],
                           max(sessions, shares), max_size) if counted else []
    single = sorted(others, key=lambda i: -_WEIGHT[spec.attributes[i].kind])
    return ([[counted[i] for i in part] for part in quantile_parts]
            + [[i] for i in single])


def fetch_records_in_parts(engine: Engine, spec: RankSpec, sessions: int, max_size: int,
                           ) -> tuple[list[Record], dict[str, list[float]]]:
    """Result rows and cut points of the ranking, as :func:`bitsift.run.api.fetch_records` returns
    them, computed in parts run at once on ``sessions`` sessions.

    The attributes are cut into ``sessions`` parts of about equal cost (more if one part would
    hold more than ``max_size`` attributes; see :func:`_groups`); each part is ranked by
    :func:`rank_part` on the spec narrowed to it.
    """
    groups = _groups(engine, spec, sessions, max_size)
    narrowed = [replace(spec, attributes=tuple(spec.attributes[i] for i in g)) for g in groups]
    jobs = [partial(rank_part, spec=part) for part in narrowed]
    return _merge(groups, run_on_sessions(engine, jobs, sessions, spec.options.timeout))


def _results(futures: list[Future[_Done]], pool: SessionPool) -> list[_Done]:
    """The parts' results in order, or the first part's failure once every other session's
    statement is stopped; on Ctrl-C or SIGTERM too (a KeyboardInterrupt in this thread).

    Waits for the first failure, not for the parts in order: a failed second session must not
    wait for the first one's statement to run to its end.
    """
    try:
        wait(futures, return_when=FIRST_EXCEPTION)
    except BaseException:
        _stop(futures, pool)
        raise
    failed = [f for f in futures if f.done() and not f.cancelled() and f.exception() is not None]
    if failed:
        _stop(futures, pool)
        raise failed[0].exception()  # type: ignore[misc]  # checked above: not None
    return [future.result() for future in futures]


def _stop(futures: Sequence[Future[_Done]], pool: SessionPool) -> None:
    """Drop the parts not started and cancel the running ones, again until they have ended:
    a cancel that lands while a session is between two statements stops neither."""
    for future in futures:
        future.cancel()
    deadline = time.monotonic() + STOP_WITHIN
    while time.monotonic() < deadline:
        pool.cancel()
        if not wait(futures, timeout=CANCEL_RETRY).not_done:
            return
def _merge(groups: list[list[int]], results: list[PartResult],
           ) -> tuple[list[Record], dict[str, list[float]]]:
    """One statement's rows and cut points from the parts' (``groups``: each part's attribute
    positions in the whole spec, from 0)."""
    cuts: dict[str, list[float]] = {}
    for result in results:
        cuts.update(result.cuts)
    records = merge_parts(([i + 1 for i in group], result.records)
                          for group, result in zip(groups, results, strict=True))
    return records, cuts
