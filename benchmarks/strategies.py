"""Candidate run-mode strategy: one ranking statement per attribute, run over a connection pool.

Each statement is bitsift's own (``rank_statement`` on a spec narrowed to one attribute), so the
numbers are the same as the one-statement ranking; only how the work is cut changes.
"""

from __future__ import annotations

import queue
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import replace
from typing import Any

from bitsift.engines.base import Engine
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.sqlalchemy_engine import SqlAlchemyEngine
from bitsift.spec import RankSpec
from bitsift.sqlbuild import rank_statement


def open_sibling(engine: Engine, timeout: float | None) -> Engine:
    """A second connection to the same database, with the same capabilities and timeout."""
    sibling: Engine
    if isinstance(engine, DuckDBEngine):
        # cursor() is a new connection to the same database instance (same read-only mode).
        sibling = DuckDBEngine(caps=engine.caps, connection=engine.con.cursor(), owned=True)
    elif isinstance(engine, SqlAlchemyEngine):
        sibling = SqlAlchemyEngine.wrap(engine.con.engine)
        sibling.caps = engine.caps
    else:  # pragma: no cover - every engine bitsift has is listed above
        raise TypeError(f"no sibling connections for {type(engine).__name__}")
    sibling.set_timeout(timeout)
    return sibling


@contextmanager
def engine_pool(engine: Engine, size: int, timeout: float | None) -> Iterator[queue.Queue[Engine]]:
    """``engine`` plus ``size - 1`` siblings in a queue; the siblings are closed afterwards."""
    siblings = [open_sibling(engine, timeout) for _ in range(size - 1)]
    pool: queue.Queue[Engine] = queue.Queue()
    for member in [engine, *siblings]:
        pool.put(member)
    try:
        yield pool
    finally:
        for sibling in siblings:
            sibling.close()


def _fetch_on_pool(pool: queue.Queue[Engine], sql: str) -> list[dict[str, Any]]:
    member = pool.get()
    try:
        return member.fetch(sql).records()
    finally:
        pool.put(member)


def per_attribute_records(engine: Engine, spec: RankSpec, cuts: dict[str, list[float]],
                          workers: int) -> list[dict[str, Any]]:
    """The rows of the one-statement ranking, computed one attribute per statement."""
    statements = [
        rank_statement(replace(spec, attributes=(attribute,)), engine.caps, cuts).sql
        for attribute in spec.attributes
    ]
    if workers <= 1:
        results = [engine.fetch(sql).records() for sql in statements]
    else:
        with engine_pool(engine, workers, spec.options.timeout) as pool, ThreadPoolExecutor(
            max_workers=workers
        ) as executor:
            results = list(executor.map(lambda sql: _fetch_on_pool(pool, sql), statements))
    merged = [r for r in results[0] if r["attribute_index"] == 0]
    for index, records in enumerate(results, start=1):
        merged += [
            {**r, "attribute_index": index} for r in records if r["attribute_index"] == 1
        ]
    return merged


def rank_per_attribute(engine: Engine, spec: RankSpec, cuts: dict[str, list[float]],
                       workers: int) -> Any:
    """A :class:`~bitsift.result.Ranking`-like object for the benchmark (scores only)."""
    from types import SimpleNamespace

    from bitsift.metrics import score

    records = per_attribute_records(engine, spec, cuts, workers)
    by_index = {r["attribute_index"]: r for r in records}
    scores = [
        score(by_index[i], a.name, a.kind, spec.options.thresholds, cuts.get(a.name))
        for i, a in enumerate(spec.attributes, start=1)
        if i in by_index
    ]
    return SimpleNamespace(attributes=scores)
