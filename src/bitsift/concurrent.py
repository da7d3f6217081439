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
class AttributeResult:
    """What one attribute's job returns: its boundaries (numeric only) and its result rows."""

    cuts: list[float] | None
    records: list[Record]


def _attribute_job(engine: Engine, spec: RankSpec) -> AttributeResult:
    """Boundaries (if numeric) and the ranking statement of a spec holding one attribute."""
    from bitsift.api import fetch_cuts  # api imports this module: import at call time

    cuts = fetch_cuts(engine, spec)
    records = engine.fetch(rank_statement(spec, engine.caps, cuts).sql).records()
    name = spec.attributes[0].name
    return AttributeResult(cuts=cuts.get(name), records=records)


def _on_pool(pool: queue.Queue[Engine], spec: RankSpec) -> AttributeResult:
    member = pool.get()
    try:
        return _attribute_job(member, spec)
    finally:
        pool.put(member)


def _longest_first(attributes: tuple[AttributeSpec, ...]) -> list[int]:
    """Job order: numeric attributes (two statements each) first, so the tail stays short."""
    return sorted(range(len(attributes)), key=lambda i: attributes[i].kind != "numeric")


def per_attribute(engine: Engine, spec: RankSpec, connections: int,
                  ) -> tuple[dict[str, list[float]], list[Record]]:
    """The boundaries and the result rows of the one-statement ranking, one attribute per job.

    Returns ``(cuts, records)`` as :func:`bitsift.api.fetch_cuts` and the ranking statement
    would: the target row (``attribute_index`` 0) once, then one row per attribute with its
    index in ``spec.attributes`` (1-based).
    """
    narrowed = [replace(spec, attributes=(a,)) for a in spec.attributes]
    order = _longest_first(spec.attributes)
    results: dict[int, AttributeResult] = {}
    if connections <= 1:
        for i in order:
            results[i] = _attribute_job(engine, narrowed[i])
    else:
        size = min(connections, len(narrowed))
        with engine_pool(engine, size, spec.options.timeout) as pool, ThreadPoolExecutor(
            max_workers=size, thread_name_prefix="bitsift"
        ) as executor:
            futures = {i: executor.submit(_on_pool, pool, narrowed[i]) for i in order}
            try:
                results = {i: future.result() for i, future in futures.items()}
            except BaseException:
                for future in futures.values():
                    future.cancel()
                raise
    return _merge(spec, results)


def _merge(spec: RankSpec, results: dict[int, AttributeResult],
           ) -> tuple[dict[str, list[float]], list[Record]]:
    cuts = {
        spec.attributes[i].name: result.cuts
        for i, result in results.items()
        if result.cuts is not None
    }
    # Every job computed the same target row; take the first attribute's.
    records = [r for r in results[0].records if r["attribute_index"] == 0]
    for i in range(len(spec.attributes)):
        records += [
            {**r, "attribute_index": i + 1}
            for r in results[i].records
            if r["attribute_index"] == 1
        ]
    return cuts, records
