"""Attributes ranked in run mode from bare per-attribute counts, the metrics computed in the client.

On engines whose run policy says ``run_counts = "client"`` (DuckDB, MariaDB, SQLite), each attribute
that is not ranked from quantile cells (:mod:`bitsift.run.quantile_counts`) is counted by one
statement of its own, ``SELECT value, class, COUNT(*) ... GROUP BY value, class``
(templates/value_counts.sql.j2): the least counting an exact ranking needs. Only those
aggregates leave the database; the ranking statement's formulas then run on them here
(:func:`bitsift.run.metrics.table_row`: the same n·ln n sums, summed exactly, then the same
snapping in :func:`bitsift.run.metrics.score`), so the result is the statement's to the last
snapped digit. :mod:`bitsift.run.concurrent` makes every such attribute a part of its own, and
the parts share the run policy's sessions.

Why: the ranking statement's window functions and derived tables cost these engines more than
the counting itself. On MariaDB 10.11 each reference to a plain CTE is evaluated again (the
statement read ``counts`` about five times: 5.2 s for 12 attributes of 200,000 rows, against
1.0 s for their 12 bare GROUP BYs one after the other); SQLite sorts the rows once per
attribute either way, and the statement's steps after the counting added 20-40 %; on DuckDB
the GROUPING SETS statement cost 1.3-1.45x the bare GROUP BYs (benchmarks/RESULTS.md, issue 20).

Bounded: an attribute whose counts have more than ``client_cells`` (value, class) cells (the
statement asks for one more, so the engine never sends more than that), or whose value x class
table would hold more than :data:`DENSE_CELLS` entries, is ranked by the ranking statement
instead, on the same session: an identifier-like column's cells stay in the database.
Segments (``--by``) and weights take the statement's way.
"""

from __future__ import annotations

import math
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass, replace
from typing import Any

from bitsift.engines.base import Engine
from bitsift.run.cuts import fetch_cuts
from bitsift.run.metrics import table_row
from bitsift.run.parts import Record, merge_parts
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.sqlbuild import rank_statement, value_counts_statement

#: The most entries of one attribute's dense value x class table (8 bytes each: 32 MiB).
DENSE_CELLS = 1 << 22

Key = Hashable
#: value -> class -> rows; the value None is NULL (a value of its own), the class None a row
#: without a target.
PerValue = dict[Key, dict[Key, int]]


class _NaN:
    """The one key of every NaN (NaN never equals itself in Python; engines group it as one)."""

    def __repr__(self) -> str:
        return "NaN"


_NAN = _NaN()


@dataclass(frozen=True)
class _Nested:
    """The key of a nested value (DuckDB's LIST and ARRAY arrive as lists, STRUCT and MAP as
    dicts: unhashable), its parts keyed in the order the engine gave them."""

    kind: str
    parts: tuple[Key, ...]


def key(value: Any) -> Key:
    """A value or class as the engine grouped it: every NaN one key (inside nested values
    too), a list or dict a hashable :class:`_Nested`, anything else itself.

    >>> key(float("nan")) is key(float("nan")), key(b"A") == key(b"a")
    (True, False)
    >>> key([1, float("nan")]) == key([1, float("nan")]), key({"a": [1]}) == key({"a": [2]})
    (True, False)
    """
    if isinstance(value, float) and math.isnan(value):
        return _NAN
    if isinstance(value, list | tuple):
        return _Nested("list", tuple(key(part) for part in value))
    if isinstance(value, dict):
        return _Nested("dict", tuple((key(k), key(v)) for k, v in value.items()))
    scalar: Key = value
    return scalar


def counts_in_client(engine: Engine, spec: RankSpec) -> bool:
    """Whether the run policy counts ``spec``'s attributes one by one for the client."""
    return engine.policy.run_counts == "client" and not spec.by and not spec.weight


def fetch_counts(engine: Engine, spec: RankSpec, index: int,
                 cuts: Mapping[str, Sequence[float]]) -> PerValue | None:
    """Attribute ``index``'s (value, class) counts, or None when it has more cells than the
    run policy's ``client_cells``."""
    most = engine.policy.client_cells
    statement = value_counts_statement(spec, engine.caps, index, cuts, limit=most + 1)
    rows = engine.fetch(statement.sql).rows
    if len(rows) > most:
        return None
    found: PerValue = {}
    for value, klass, n in rows:
        per_class = found.setdefault(key(value), {})
        per_class[key(klass)] = per_class.get(key(klass), 0) + int(n)
    return found


def _table(per_value: PerValue, classes: Sequence[Key], drop_missing: bool) -> list[list[int]]:
    """Value x class counts of the rows with a target (and, with ``drop_missing``, a value)."""
    return [[per_class.get(c, 0) for c in classes] for value, per_class in per_value.items()
            if not (drop_missing and value is None)]


def _records(spec: RankSpec, counted: Mapping[int, PerValue]) -> list[Record]:
    """The ranking statement's rows for the attributes in ``counted`` (numbered 1..K in
    ``spec.attributes`` order) and the target's, from the counts. The target's classes and
    the rows without one are read from the first attribute's counts (every attribute counts
    every row)."""
    first = counted[min(counted)]
    all_rows: dict[Key, int] = {}
    for per_class in first.values():
        for c, n in per_class.items():
            all_rows[c] = all_rows.get(c, 0) + n
    classes = [c for c in all_rows if c is not None]
    shared = {"rows_excluded": all_rows.get(None, 0)}
    target = table_row([[all_rows[c] for c in classes]])
    if target is None:  # no row has a target: the statement's one row, as readout expects
        return [{"attribute_index": None, **shared}]
    records = [{"attribute_index": 0, "attribute": spec.target, "kind": "target", **shared,
                **target}]
    drop = spec.options.missing == "drop"
    for index in sorted(counted):
        attribute = spec.attributes[index - 1]
        row = table_row(_table(counted[index], classes, drop))
        if row is not None:  # nothing counted: the statement has no row for it either
            records.append({"attribute_index": index, "attribute": attribute.name,
                            "kind": attribute.kind, **shared, **row})
    return records


def _dense(per_value: PerValue, classes: int) -> bool:
    return len(per_value) * max(classes, 1) <= DENSE_CELLS


def rank_by_counts(engine: Engine, spec: RankSpec,
                   ) -> tuple[list[Record], dict[str, list[float]]]:
    """Result rows (as the ranking statement returns them, the target's included) and cut
    points of every attribute of ``spec``: each counted by its own statement after the cut
    points of the numeric ones (:func:`bitsift.run.cuts.fetch_cuts`), metrics computed here;
    those with too many cells by the ranking statement."""
    cuts = fetch_cuts(engine, spec)
    counted: dict[int, PerValue] = {}
    rest: list[int] = []
    for index in range(1, len(spec.attributes) + 1):
        found = fetch_counts(engine, spec, index, cuts)
        classes = len({c for per_class in found.values() for c in per_class}) if found else 0
        if found is not None and _dense(found, classes):
            counted[index] = found
        else:
            rest.append(index)
    parts: list[tuple[list[int], list[Record]]] = []
    if counted:
        parts.append((list(range(1, len(spec.attributes) + 1)), _records(spec, counted)))
    if rest:
        narrowed = replace(spec, attributes=tuple(spec.attributes[i - 1] for i in rest))
        records = engine.fetch(rank_statement(narrowed, engine.caps, cuts).sql).records()
        parts.append((rest, records))
    return merge_parts(parts), cuts
