"""Stored counts counted in parts (docs/stored-counts.md): the attributes split over the run
policy's sessions, each part one counting statement, and the parts' results made one sorted
set of counts-table rows (bitsift.jobs.counts_rows)."""

from __future__ import annotations

import datetime as _dt
from pathlib import Path
from typing import Any

import duckdb
import pytest

from bitsift.engines.base import FetchResult
from bitsift.jobs.counts_build import build_counts
from bitsift.jobs.counts_rows import CountedPart, CountsRows, converted, counts_rows
from bitsift.spec.rankspec import AttributeSpec, RankSpec

COLUMNS = ["attr", "s1", "a1", "a2", "y", "n"]


def _spec(*names: str) -> RankSpec:
    spec = RankSpec.__new__(RankSpec)
    object.__setattr__(spec, "target", "outcome")
    object.__setattr__(spec, "attributes",
                       tuple(AttributeSpec(n, "categorical", "text") for n in names))
    return spec


def test_parts_become_one_sorted_set_of_rows_with_the_target_counted_once() -> None:
    day = _dt.date(2026, 3, 2)
    first = CountedPart([0, 2], FetchResult(COLUMNS, [
        (2, day, None, True, "ok", 4), (1, day, "b", None, "ok", 2), (0, day, None, None, "ok", 9),
        (1, day, None, None, "ok", 1), (1, _dt.date(2026, 3, 1), "a", None, None, 3),
        (2, day, None, 1, "ok", 5)]))
    second = CountedPart([1], FetchResult(COLUMNS[:3] + COLUMNS[4:], [
        (1, day, 2.5, "ok", 7), (0, day, None, "ok", 9)]))
    rows, partitions = counts_rows([first, second], _spec("zone", "size", "wet"), "date")
    assert partitions == ["2026-03-01", "2026-03-02"]
    assert rows.as_lists() == [
        ["2026-03-01", 1, "zone", "s:a", None, 3],
        ["2026-03-02", 0, "outcome", None, "s:ok", 9],
        ["2026-03-02", 1, "zone", "s:b", "s:ok", 2],
        ["2026-03-02", 1, "zone", None, "s:ok", 1],
        ["2026-03-02", 2, "size", "f:2.5", "s:ok", 7],
        ["2026-03-02", 3, "wet", "b:true", "s:ok", 4],
        ["2026-03-02", 3, "wet", "i:1", "s:ok", 5],
    ]
    assert len(rows) == 7
    assert CountsRows.from_lists(rows.as_lists(), "date").as_lists() == rows.as_lists()


def test_equal_values_of_other_types_stay_apart() -> None:
    assert converted([1, True, 1.0, None, 1], repr) == ["1", "True", "1.0", "None", "1"]
    assert converted([0.0, -0.0, float("nan")], lambda v: f"{v + 0.0!r}") == [
        "0.0", "0.0", "nan"]


def _trays(path: Path) -> None:
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE trays (day DATE, zone VARCHAR, grade INTEGER, wet DOUBLE, "
                    "flagged BOOLEAN, outcome VARCHAR)")
        con.execute("INSERT INTO trays SELECT DATE '2026-03-01' + CAST(i % 5 AS INTEGER), "
                    "['a', 'A', 'b', NULL][i % 4 + 1], i % 7, (i * 13 % 17) / 4.0, i % 3 = 0, "
                    "['thrived', 'stunted', NULL, 'failed'][i % 4 + 1] FROM range(600) r(i)")


@pytest.mark.slow
def test_counting_on_two_sessions_stores_what_one_statement_stores(tmp_path: Path) -> None:
    source = tmp_path / "src.duckdb"
    _trays(source)
    split_dest, whole_dest = tmp_path / "split.duckdb", tmp_path / "whole.duckdb"
    options: dict[str, Any] = {"table": "trays", "target": "outcome", "partition": "day"}
    # A file bitsift opens itself: its run policy's two sessions, a statement each.
    split = build_counts(str(source), into=str(split_dest), **options)
    # A caller's connection gets no sibling sessions: one statement.
    with duckdb.connect(str(source), read_only=True) as con:
        whole = build_counts(con, into=str(whole_dest), **options)
    counting = [[s for s in r.statements if "GROUPING SETS" in s] for r in (split, whole)]
    assert [len(c) for c in counting] == [2, 1]
    assert split.partitions == whole.partitions and split.rows == whole.rows > 0
    query = "SELECT * FROM bitsift_counts ORDER BY ALL"
    with duckdb.connect(str(split_dest), read_only=True) as a, duckdb.connect(
            str(whole_dest), read_only=True) as b:
        assert a.execute(query).fetchall() == b.execute(query).fetchall()
