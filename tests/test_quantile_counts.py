"""Quantile bins counted from (bucket, class) cells (bitsift.run.quantile_counts) in run mode.

Two independent checks: the NumPy reference (numpy.quantile's cut points, rows binned one by
one in Python, metrics by the p log p formulas), and bitsift's own row-by-row binning (the
ranking statement's CASE over the cut points, run_quantile "buckets"). The columns are the
awkward ones of test_quantiles (heavy tail, point mass, ties, narrow range, mostly NULL,
constant, empty), with NULL targets and a text target. Data: seeded random, invented here.
"""

from __future__ import annotations

import math
import random
from typing import Any

import duckdb
import numpy as np
import pytest
from helpers import Dataset, assert_matches_reference, assert_same_ranking, loaded, rank_with
from test_quantiles import SHAPES, non_finite_dataset, shaped_dataset

import bitsift
from bitsift.engines.policy import run_policy
from bitsift.run import quantile_counts
from bitsift.run.result import Ranking

COUNTED = {"run_quantile": "counted"}
ROW_BY_ROW = {"run_quantile": "buckets"}


#: What a statement binning rows one by one contains: CASE WHEN CAST(x AS DOUBLE) < cut ...
ROW_BINNING = "as double) < "


#: What only the counted way's step 2 (quantile_cells.sql.j2) selects.
CELLS = "bucket_cells"


def _sent(ranking: Ranking) -> str:
    return "\n".join(ranking.statements).lower()


def _ranking_statements(ranking: Ranking) -> list[str]:
    """The ranking statements sent (counted attributes are measured in the client, in none)."""
    return [s.lower() for s in ranking.statements if "information_gain" in s]


def _assert_counted(ranking: Ranking) -> None:
    """The ranking went the counted way: cells counted, metrics computed from them in the
    client, no row binned by a CASE."""
    sent = _sent(ranking)
    assert CELLS in sent
    assert "quantile_cont" not in sent and ROW_BINNING not in sent


@pytest.mark.slow
@pytest.mark.parametrize("missing", ["category", "drop"])
@pytest.mark.parametrize("bins", [10, 3, 7])
def test_counted_bins_equal_the_numpy_reference(missing: str, bins: int,
                                                request: pytest.FixtureRequest) -> None:
    dataset = shaped_dataset(rows=3000, seed=23)
    # Dropping NULLs leaves the all-NULL column no row: the reference has no table for it
    # (the next test compares it with the row-by-row binning instead).
    shapes = [s for s in SHAPES if not (missing == "drop" and s == "empty")]
    with loaded("duckdb", dataset, request) as where:
        ranking = rank_with(where.source, where.table, "y", policy=COUNTED, missing=missing,
                            bins=bins, attributes=",".join(shapes))
    _assert_counted(ranking)
    assert_matches_reference(ranking, dataset, "y", numeric=shapes, missing=missing, bins=bins,
                             context=f"missing={missing} bins={bins}")


@pytest.mark.slow
@pytest.mark.parametrize("missing", ["category", "drop"])
def test_counted_shapes_equal_the_row_by_row_bins(missing: str,
                                                  request: pytest.FixtureRequest) -> None:
    dataset = shaped_dataset(rows=2000, seed=31)
    with loaded("duckdb", dataset, request) as where:
        counted = rank_with(where.source, where.table, "y", policy=COUNTED, missing=missing)
        row_by_row = rank_with(where.source, where.table, "y", policy=ROW_BY_ROW,
                               missing=missing)
    _assert_counted(counted)
    assert_same_ranking(counted, row_by_row, missing)
    for a, b in zip(counted.attributes, row_by_row.attributes, strict=True):
        assert a.cuts == b.cuts, a.attribute


def _tied_dataset(rows: int, seed: int) -> Dataset:
    """Few distinct values (many rows on each cut point), a boolean-ish and a text target
    with NULLs, and a column whose values cluster in one bucket with a far outlier."""
    rng = random.Random(seed)
    data = []
    for _ in range(rows):
        y = rng.choice(("late", "on time", "early")) if rng.random() < 0.95 else None
        few = float(rng.choice((1, 2, 2, 3, 3, 3, 10)))
        cluster = 5.0 + rng.random() * 1e-3 if rng.random() < 0.999 else 1e9
        halves = rng.choice((0.5, 1.5, None))
        data.append((y, rng.randint(0, 3), few, cluster, halves, None))
    # "nothing" has no value at all: its counts are NULL-valued rows only (PostgreSQL types a
    # VALUES column of NULLs as text unless told otherwise).
    return Dataset(columns=(("y", "text"), ("grp", "integer"), ("few", "float"),
                            ("cluster", "float"), ("halves", "float"), ("nothing", "float")),
                   rows=data)


@pytest.mark.slow
@pytest.mark.parametrize("options", [{}, {"where": "grp <> 2"}, {"missing": "drop", "bins": 4},
                                     {"bins": 2}, {"bins": 50}])
def test_counted_bins_equal_the_row_by_row_bins(options: dict[str, Any],
                                                request: pytest.FixtureRequest) -> None:
    # Ties on the cut points are where counting "below v" and "equal to v" must be exact.
    dataset = _tied_dataset(rows=4000, seed=5)
    with loaded("duckdb", dataset, request) as where:
        counted = rank_with(where.source, where.table, "y", policy=COUNTED, **options)
        row_by_row = rank_with(where.source, where.table, "y", policy=ROW_BY_ROW, **options)
    _assert_counted(counted)
    assert CELLS not in _sent(row_by_row) and ROW_BINNING in _sent(row_by_row)
    assert_same_ranking(counted, row_by_row, str(options))
    for a, b in zip(counted.attributes, row_by_row.attributes, strict=True):
        assert a.cuts == b.cuts, a.attribute  # the same floats, bit for bit


@pytest.mark.parametrize("engine", ["postgres", "sqlite", "mariadb"])
def test_the_counted_statements_run_on_other_engines(engine: str,
                                                     request: pytest.FixtureRequest) -> None:
    # DuckDB, PostgreSQL, SQLite and MariaDB count this way by default (measured); the
    # statements are plain SQL, and the metrics are computed in the client from their counts.
    dataset = _tied_dataset(rows=1500, seed=8)
    with loaded(engine, dataset, request) as where:
        counted = rank_with(where.source, where.table, "y", policy=COUNTED, bins=5)
    _assert_counted(counted)
    assert_matches_reference(counted, dataset, "y",
                             numeric=("few", "cluster", "halves", "nothing"),
                             bins=5, context=engine)


@pytest.mark.mariadb
@pytest.mark.parametrize("options", [{"where": "grp <> 2"}, {"missing": "drop", "bins": 4}])
def test_counted_bins_equal_the_row_by_row_bins_on_mariadb(
        options: dict[str, Any], request: pytest.FixtureRequest) -> None:
    # MariaDB groups text byte-exactly (BINARY keys): the classes arrive as bytes.
    dataset = _tied_dataset(rows=1500, seed=6)
    with loaded("mariadb", dataset, request) as where:
        counted = rank_with(where.source, where.table, "y", policy=COUNTED, **options)
        row_by_row = rank_with(where.source, where.table, "y", policy=ROW_BY_ROW, **options)
    _assert_counted(counted)
    assert_same_ranking(counted, row_by_row, str(options))
    for a, b in zip(counted.attributes, row_by_row.attributes, strict=True):
        assert a.cuts == b.cuts, a.attribute


def test_the_dialects_run_and_measured_here_count() -> None:
    # MySQL has no server in the tests: it keeps its one-statement quantile.
    counting = ("duckdb", "postgres", "sqlite", "mariadb")
    assert {run_policy(d).run_quantile for d in counting} == {"counted"}
    assert run_policy("mysql").run_quantile == "statement"


@pytest.mark.slow
def test_infinite_and_nan_values_are_ranked_the_usual_way(
        request: pytest.FixtureRequest) -> None:
    dataset = non_finite_dataset(rows=500, seed=4)
    with loaded("duckdb", dataset, request) as where:
        counted = rank_with(where.source, where.table, "y", policy=COUNTED)
        row_by_row = rank_with(where.source, where.table, "y", policy=ROW_BY_ROW)
    assert CELLS in _sent(counted)  # plain was counted ...
    (ranked,) = _ranking_statements(counted)  # ... the other two binned by rows
    assert ROW_BINNING in ranked and '"with_inf"' in ranked and '"with_nan"' in ranked
    assert '"plain"' not in ranked
    assert_same_ranking(counted, row_by_row)
    for a, b in zip(counted.attributes, row_by_row.attributes, strict=True):
        assert a.cuts == b.cuts, a.attribute


@pytest.mark.slow
def test_a_table_changing_between_the_steps_is_ranked_the_usual_way(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # Rows arrive after step 2 counted the buckets, on every cut point: step 3's bucket sizes
    # disagree, and the attribute is ranked again from the table as it now is, never from
    # mixed counts. (Rows landing only in buckets without a cut point change no bin; the
    # ranking is then that of the table as step 2 read it.)
    connection = duckdb.connect()
    # 3,000 distinct values in 1,024 buckets: the quantiles fall inside buckets of several
    # values, so step 3 runs (a cut point between two buckets is exact from step 2 alone).
    connection.execute("CREATE TABLE t AS SELECT i % 3 AS y, (i * 7919) % 3000 / 10.0 AS v "
                       "FROM range(3000) r(i)")
    values = [v for (v,) in connection.execute("SELECT v FROM t").fetchall()]
    cuts = [float(c) for c in np.quantile(values, [j / 10 for j in range(1, 10)])]
    splits = quantile_counts._splits

    def changed_then_split(*args: Any, **kwargs: Any) -> Any:
        for cut in cuts:
            connection.execute(f"INSERT INTO t SELECT 1, {cut!r} FROM range(40)")
        return splits(*args, **kwargs)

    monkeypatch.setattr(quantile_counts, "_splits", changed_then_split)
    try:
        ranking = rank_with(connection, "t", "y", policy=COUNTED)
        monkeypatch.setattr(quantile_counts, "_splits", splits)
        fresh = rank_with(connection, "t", "y", policy=ROW_BY_ROW)
    finally:
        connection.close()
    assert ROW_BINNING in _sent(ranking) and ranking.rows == 3360
    assert_same_ranking(ranking, fresh)


@pytest.mark.slow
def test_many_bins_and_classes_are_still_counted(request: pytest.FixtureRequest) -> None:
    # 50 bins x 400 classes x 2 attributes: about 25,000 non-empty (bin, class) cells. They
    # were sent back to the database as literal rows, capped at 20,000 (above, binned row by
    # row); computed in the client, nothing caps them.
    rng = random.Random(12)
    rows = [(f"c{rng.randrange(400)}", rng.gauss(0, 1), rng.expovariate(1.0))
            for _ in range(20_000)]
    dataset = Dataset(columns=(("y", "text"), ("normal", "float"), ("tail", "float")),
                      rows=rows)
    with loaded("duckdb", dataset, request) as where:
        counted = rank_with(where.source, where.table, "y", policy=COUNTED, bins=50,
                            max_classes=1000)  # many classes on purpose (issue 21 cap)
        row_by_row = rank_with(where.source, where.table, "y", policy=ROW_BY_ROW, bins=50,
                               max_classes=1000)
    _assert_counted(counted)
    assert_same_ranking(counted, row_by_row)
    for a, b in zip(counted.attributes, row_by_row.attributes, strict=True):
        assert a.cuts == b.cuts and len(a.cuts or []) == 49, a.attribute


@pytest.mark.slow
def test_a_file_source_counts_on_its_own_session(request: pytest.FixtureRequest) -> None:
    # A DuckDB file bitsift opens itself: categorical attributes on one session, the counted
    # numeric ones on another, at once; the merged rows equal one session's.
    dataset = shaped_dataset(rows=2000, seed=9)
    with loaded("duckdb", dataset, request, duckdb_file=True) as where:
        two = bitsift.rank(where.source, target="y", table=where.table)
        one = rank_with(where.source, where.table, "y", policy={"run_sessions": 1})
    _assert_counted(two)
    assert_same_ranking(two, one)
    assert_matches_reference(two, dataset, "y", numeric=SHAPES)


@pytest.mark.slow
def test_segments_and_weights_keep_the_row_by_row_binning(
        request: pytest.FixtureRequest) -> None:
    dataset = shaped_dataset(rows=600, seed=3)
    with loaded("duckdb", dataset, request) as where:
        segmented = bitsift.rank(where.source, target="y", table=where.table, by="grp",
                                 attributes="normal,ties")
        weighted = bitsift.rank(where.source, target="y", table=where.table, weight="grp",
                                attributes="normal,ties")
    for result in (segmented, weighted):
        assert CELLS not in _sent(result) and ROW_BINNING in _sent(result)


def test_bigger_tables_get_more_buckets(monkeypatch: pytest.MonkeyPatch) -> None:
    # Step 3 numbers the rows of a few buckets in memory: their size stays near
    # ROWS_PER_BUCKET as the table grows (here 1 row per bucket, capped at MAX_BUCKETS).
    from bitsift.run import quantiles

    monkeypatch.setattr(quantiles, "ROWS_PER_BUCKET", 1)
    monkeypatch.setattr(quantiles, "MAX_BUCKETS", 2000)
    connection = duckdb.connect()
    connection.execute("CREATE TABLE t AS SELECT i % 3 AS y, sqrt(i) AS v FROM range(3000) r(i)")
    try:
        counted = rank_with(connection, "t", "y", policy=COUNTED)
        row_by_row = rank_with(connection, "t", "y", policy=ROW_BY_ROW)
    finally:
        connection.close()
    scale = 2000 / math.sqrt(2999)  # buckets / (highest - lowest value)
    assert f"* {scale!r})" in _sent(counted)
    assert_same_ranking(counted, row_by_row)
    assert counted.attributes[0].cuts == row_by_row.attributes[0].cuts


@pytest.mark.slow
@pytest.mark.parametrize("options", [{}, {"missing": "drop", "bins": 7}])
def test_decimal_date_integer_and_timestamp_columns_count_like_floats(
        options: dict[str, Any]) -> None:
    # Every numeric kind is bucketed as the DOUBLE it is binned as (a date as epoch seconds).
    connection = duckdb.connect()
    connection.execute(
        "CREATE TABLE t AS SELECT (i * 7) % 3 AS y, "
        "CAST((i * 37) % 1000 / 7.0 AS DECIMAL(10, 2)) AS price, "
        "DATE '2020-01-01' + CAST((i * 13) % 900 AS INTEGER) AS sown, "
        "CAST((i * 11) % 97 AS BIGINT) AS count_, "
        "TIMESTAMP '2021-01-01' + INTERVAL (i % 5000) SECOND AS seen "
        "FROM range(20000) r(i)")
    try:
        numeric = "sown,count_,seen"
        counted = rank_with(connection, "t", "y", policy=COUNTED, numeric=numeric, **options)
        row_by_row = rank_with(connection, "t", "y", policy=ROW_BY_ROW, numeric=numeric,
                               **options)
    finally:
        connection.close()
    _assert_counted(counted)
    assert {a.kind for a in counted.attributes} == {"numeric"}
    assert_same_ranking(counted, row_by_row)
    for a, b in zip(counted.attributes, row_by_row.attributes, strict=True):
        assert a.cuts == b.cuts and len(a.cuts or []) > 1, a.attribute
