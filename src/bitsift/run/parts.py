"""A ranking computed in parts, read back as if from one statement.

Run mode may cut a spec's attributes into parts (batches of a wide table, sessions at once,
quantile-counted attributes apart: :mod:`bitsift.run.concurrent`,
:mod:`bitsift.run.quantile_counts`); each part's statement numbers its attributes from 1. This is
the one place their rows are numbered back to the whole spec.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

Record = dict[str, Any]


def merge_parts(parts: Iterable[tuple[Sequence[int], Sequence[Record]]]) -> list[Record]:
    """The rows of every part, ``attribute_index`` renumbered to the whole spec.

    Each part is (the whole spec's attribute numbers, from 1, of the part's attributes in the
    part's order; the part's result rows). The target's rows (``attribute_index`` 0, and NULL
    for a segment without a target) are the same in every part: the first part's are kept.

    >>> merge_parts([([2, 3], [{"attribute_index": 0}, {"attribute_index": 1}]),
    ...              ([1], [{"attribute_index": 0}, {"attribute_index": 1}])])
    [{'attribute_index': 0}, {'attribute_index': 2}, {'attribute_index': 1}]
    """
    merged: list[Record] = []
    for number, (positions, records) in enumerate(parts):
        for record in records:
            index = record["attribute_index"]
            if index is not None and int(index) > 0:
                merged.append({**record, "attribute_index": positions[int(index) - 1]})
            elif number == 0:
                merged.append(record)
    return merged
