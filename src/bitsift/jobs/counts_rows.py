"""The counting statements' results as counts-table rows (docs/stored-counts.md): (partition,
attribute index, attribute, tagged value, tagged class, n), sorted, with the partitions seen.

The conversion works column by column: each distinct partition, value and class is converted
once, and the rows are ordered by one NumPy sort of integer ranks, so that a day of a wide
table (thousands of result rows) costs a few milliseconds, not a Python call per value.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from bitsift.engines.base import FetchResult
from bitsift.run.counts_values import encode, partition_value
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.counts_sql import COUNTS_COLUMNS

#: Types whose equal values convert alike (unlike, say, datetimes of one instant in two
#: time zones, or True and 1, which are equal): a column of one of them alone (and NULLs)
#: is converted once per distinct value.
_PLAIN_TYPES = frozenset((str, int, float, _dt.date))


@dataclass(frozen=True)
class CountedPart:
    """One counting statement's result and the attributes it counted: ``positions[i - 1]``
    is the spec's position (from 0) of the statement's attribute ``a<i>``."""

    positions: Sequence[int]
    fetched: FetchResult


def converted(values: Sequence[Any], convert: Callable[[Any], Any]) -> list[Any]:
    """``convert`` of each value, run once per distinct value where that is safe: the values
    (NULLs aside) all of one plain type; otherwise once per value, or per distinct value of
    a plain type.

    >>> converted([3, None, 3, 4], lambda v: v and v * 10)
    [30, None, 30, 40]
    >>> converted([1, True, 1.0], repr)
    ['1', 'True', '1.0']
    """
    kinds = set(map(type, values))
    kinds.discard(type(None))
    if len(kinds) <= 1 and kinds <= _PLAIN_TYPES:
        seen = {value: convert(value) for value in set(values)}
        return list(map(seen.__getitem__, values))
    remembered: dict[tuple[type, Any], Any] = {}

    def one(value: Any) -> Any:
        if type(value) not in _PLAIN_TYPES:
            return convert(value)
        key = (type(value), value)
        if key not in remembered:
            remembered[key] = convert(value)
        return remembered[key]

    return list(map(one, values))


def _ranks(values: Sequence[Any]) -> np.ndarray:
    """Each value's place among the distinct values in sorted order, NULLs after them all."""
    distinct = sorted({v for v in values if v is not None})
    place = {value: rank for rank, value in enumerate(distinct)}
    place_of_null = len(distinct)
    return np.fromiter((place_of_null if v is None else place[v] for v in values),
                       dtype=np.int64, count=len(values))


@dataclass(frozen=True)
class CountsRows:
    """Counts-table rows held as one NumPy column per counts-table column (COUNTS_COLUMNS'
    order): integers as int64, everything else as Python objects. The DuckDB store inserts
    the columns as they are; other stores take :meth:`as_lists`."""

    columns: tuple[np.ndarray, ...]

    @classmethod
    def from_lists(cls, rows: Sequence[Sequence[Any]], kind: str) -> CountsRows:
        """Rows given one by one (partition, attribute index, attribute, value, class, n)."""
        columns = list(zip(*rows, strict=True)) if rows else [()] * len(COUNTS_COLUMNS)
        return cls(tuple(np.array(column, dtype=dtype)
                         for column, dtype in zip(columns, _dtypes(kind), strict=True)))

    def __len__(self) -> int:
        return len(self.columns[0])

    def as_lists(self) -> list[list[Any]]:
        """The rows one by one, of plain Python values."""
        return [list(row) for row in zip(*(c.tolist() for c in self.columns), strict=True)]


def _dtypes(kind: str) -> tuple[type, ...]:
    """The NumPy type of each counts-table column (the partition is an integer or text)."""
    return (np.int64 if kind == "integer" else object, np.int64, object, object, object,
            np.int64)


def counts_rows(parts: Sequence[CountedPart], spec: RankSpec, kind: str,
                ) -> tuple[CountsRows, list[str | int]]:
    """The counting statements' rows as counts-table rows, sorted by (partition, attribute
    index, value, class; NULLs last), and the partitions in order. Every part holds the
    target's own counts (attribute 0): the first part's are kept."""
    partitions: list[Any] = []
    indexes: list[int] = []
    values: list[Any] = []
    classes: list[Any] = []
    counts: list[int] = []
    for number, part in enumerate(parts):
        _collect(part, number == 0, partitions, indexes, values, classes, counts)
    keys = converted(partitions, lambda raw: partition_value(raw, kind))
    value_tags = _tags_by_attribute(indexes, values)
    class_tags = converted(classes, encode)
    order = np.lexsort((_ranks(class_tags), _ranks(value_tags),
                        np.asarray(indexes, dtype=np.int64), _ranks(keys)))
    names = np.array([spec.target, *(a.name for a in spec.attributes)], dtype=object)
    index_column = np.asarray(indexes, dtype=np.int64)
    columns = (keys, index_column, names[index_column], value_tags,
               class_tags, counts)
    return CountsRows(tuple(np.asarray(column, dtype=dtype)[order]
                            for column, dtype in zip(columns, _dtypes(kind), strict=True))
                      ), sorted(set(keys))


def _collect(part: CountedPart, with_target: bool, partitions: list[Any], indexes: list[int],
             values: list[Any], classes: list[Any], counts: list[int]) -> None:
    """One part's rows appended column by column, its attribute numbers made the spec's
    (1-based positions); the target's own rows only ``with_target``."""
    fetched = part.fetched
    if not fetched.rows:
        return
    at = {name: i for i, name in enumerate(fetched.columns)}
    table = list(zip(*fetched.rows, strict=True))
    local = [int(i) for i in table[at["attr"]]]
    kept = [r for r, i in enumerate(local) if i or with_target]
    global_index = [0, *(p + 1 for p in part.positions)]
    value_columns = [(), *(table[at[f"a{i}"]] for i in range(1, len(part.positions) + 1))]
    partition, cls, n = table[at["s1"]], table[at["y"]], table[at["n"]]
    partitions.extend(partition[r] for r in kept)
    indexes.extend(global_index[local[r]] for r in kept)
    values.extend(value_columns[local[r]][r] if local[r] else None for r in kept)
    classes.extend(cls[r] for r in kept)
    counts.extend(int(n[r]) for r in kept)


def _tags_by_attribute(indexes: Sequence[int], values: Sequence[Any]) -> list[str | None]:
    """The values' tagged text, converted attribute by attribute (one attribute's values share
    a type, so each distinct one is converted once)."""
    tags: list[str | None] = [None] * len(values)
    by_attribute: dict[int, list[int]] = {}
    for row, index in enumerate(indexes):
        if index:
            by_attribute.setdefault(index, []).append(row)
    for rows in by_attribute.values():
        for row, tag in zip(rows, converted([values[r] for r in rows], encode), strict=True):
            tags[row] = tag
    return tags
