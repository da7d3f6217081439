"""Run mode over a small connection pool: one attribute per statement, statements in parallel.

Each attribute is one job on one connection: its quantile boundaries (numeric attributes),
then bitsift's own ranking statement for a spec narrowed to that attribute. The jobs run on
``connections`` sessions at once, so the engine works on several statements together (on
DuckDB they share its thread pool; on PostgreSQL each is a server process). The numbers are
those of the one-statement ranking; only the cutting of the work differs. Paste mode
(``bitsift sql``) stays one statement.

Why and where it is the default: benchmarks/RESULTS.md (the ``run_connections`` field of the
capability table).
"""

from __future__ import annotations

import queue
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, replace
from typing import Any

from bitsift.engines.base import Engine
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.sqlalchemy_engine import SqlAlchemyEngine
from bitsift.spec import AttributeSpec, RankSpec
from bitsift.sqlbuild import rank_statement

Record = dict[str, Any]


def open_sibling(engine: Engine, timeout: float | None) -> Engine:
    """A second session on the same database, with the same capabilities and timeout.

    Its session statements (read-only, timeout) and every statement it sends are logged in
    ``engine.statements``, so ``--debug`` and :attr:`Ranking.statements` show them all.
    """
    sibling: Engine
    if isinstance(engine, DuckDBEngine):
        # cursor(): a new connection to the same database instance, read-only if it is.
        sibling = DuckDBEngine(caps=engine.caps, connection=engine.con.cursor(), owned=True)
    elif isinstance(engine, SqlAlchemyEngine):
        # A new connection from the same SQLAlchemy engine, made read-only like the first.
        sibling = SqlAlchemyEngine.wrap(engine.con.engine)
        sibling.caps = engine.caps
    else:  # pragma: no cover - every engine bitsift has is listed above
        raise TypeError(f"no second session for {type(engine).__name__}")
    engine.statements.extend(sibling.statements)
    sibling.statements = engine.statements
    sibling.set_timeout(timeout)
    return sibling


@contextmanager
def engine_pool(engine: Engine, size: int, timeout: float | None) -> Iterator[queue.Queue[Engine]]:
    """``engine`` and ``size - 1`` sibling sessions in a queue; the siblings close afterwards."""
    siblings: list[Engine] = []
    try:
        for _ in range(size - 1):
            siblings.append(open_sibling(engine, timeout))
        pool: queue.Queue[Engine] = queue.Queue()
        for member in [engine, *siblings]:
            pool.put(member)
        yield pool
    finally:
        for sibling in siblings:
            sibling.close()


@dataclass(frozen=True)
class PartResult:
    """What one part's job returns: its boundaries and its result rows (indices local to it)."""

    cuts: dict[str, list[float]]
    records: list[Record]


def _part_job(engine: Engine, spec: RankSpec) -> PartResult:
    """Boundaries of the part's numeric attributes, then its ranking statement."""
    from bitsift.api import fetch_cuts  # api imports this module: import at call time

    cuts = fetch_cuts(engine, spec)
    records = engine.fetch(rank_statement(spec, engine.caps, cuts).sql).records()
    return PartResult(cuts=cuts, records=records)


def _on_pool(pool: queue.Queue[Engine], spec: RankSpec) -> PartResult:
    member = pool.get()
    try:
        return _part_job(member, spec)
    finally:
        pool.put(member)


#: Relative cost of an attribute in a job: a numeric one adds a quantile pre-pass and binning.
_WEIGHT = {"numeric": 4, "categorical": 1}


def split(attributes: tuple[AttributeSpec, ...], parts: int) -> list[list[int]]:
    """Attribute positions cut into at most ``parts`` groups of about equal cost.

    Heaviest first onto the lightest group (the LPT rule); each group keeps table order.

    >>> from bitsift.spec import AttributeSpec
    >>> a = tuple(AttributeSpec(n, k, "") for n, k in
    ...           [("a", "numeric"), ("b", "categorical"), ("c", "categorical"),
    ...            ("d", "numeric")])
    >>> split(a, 2)
    [[0, 1], [2, 3]]
    """
    groups: list[list[int]] = [[] for _ in range(min(parts, len(attributes)))]
    loads = [0] * len(groups)
    order = sorted(range(len(attributes)), key=lambda i: -_WEIGHT[attributes[i].kind])
    for i in order:
        lightest = loads.index(min(loads))
        groups[lightest].append(i)
        loads[lightest] += _WEIGHT[attributes[i].kind]
    return [sorted(g) for g in groups if g]


def run_parts(engine: Engine, spec: RankSpec, parts: int, sessions: int,
              ) -> tuple[dict[str, list[float]], list[Record]]:
    """The boundaries and result rows of the one-statement ranking, computed in ``parts`` jobs.

    Each job is the boundaries pre-pass and the ranking statement of a spec narrowed to a
    group of attributes (:func:`split`); jobs run on ``sessions`` sessions at once. Returns
    ``(cuts, records)`` as :func:`bitsift.api.fetch_cuts` and the one ranking statement
    would: the target row (``attribute_index`` 0) once, then one row per attribute with its
    position in ``spec.attributes`` (1-based).
    """
    groups = split(spec.attributes, parts)
    narrowed = [replace(spec, attributes=tuple(spec.attributes[i] for i in g)) for g in groups]
    sessions = max(1, min(sessions, len(narrowed)))
    if sessions == 1:
        results = [_part_job(engine, part) for part in narrowed]
    else:
        with engine_pool(engine, sessions, spec.options.timeout) as pool, ThreadPoolExecutor(
            max_workers=sessions, thread_name_prefix="bitsift"
        ) as executor:
            futures = [executor.submit(_on_pool, pool, part) for part in narrowed]
            try:
                results = [future.result() for future in futures]
            except BaseException:
                for future in futures:
                    future.cancel()
                raise
    return _merge(groups, results)


def _merge(groups: list[list[int]], results: list[PartResult],
           ) -> tuple[dict[str, list[float]], list[Record]]:
    cuts: dict[str, list[float]] = {}
    for result in results:
        cuts.update(result.cuts)
    # Every job computed the same target row; take the first job's.
    records = [r for r in results[0].records if r["attribute_index"] == 0]
    for group, result in zip(groups, results, strict=True):
        for r in result.records:
            local = r["attribute_index"]
            if local:
                records.append({**r, "attribute_index": group[local - 1] + 1})
    records[1:] = sorted(records[1:], key=lambda r: r["attribute_index"])
    return cuts, records
