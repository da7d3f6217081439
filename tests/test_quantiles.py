"""Exact quantile cut points from bucket counts (bitsift.run.quantiles) against numpy.quantile.

The reference is numpy's default ("linear") quantile of the values in the rows the ranking
reads (target present, --where true), computed here from the rows themselves; the method
under test never sorts a whole column, so the columns below are built to make its buckets
awkward: heavy tails (most values in one bucket), a point mass, ties, a range that is
narrow next to its magnitude, negative values, mostly NULL, one value, no value. Data:
seeded random, invented for these tests.
"""

from __future__ import annotations

import math
import random
from dataclasses import replace
from typing import Any

import numpy as np
import pytest
from helpers import Dataset, loaded, numpy_cuts

from bitsift.run import quantiles
from bitsift.run.api import fetch_cuts, make_options
from bitsift.run.session import Session
from bitsift.sql.sqlbuild import quantile_levels

SHAPES = ("normal", "heavy_tail", "point_mass", "ties", "narrow", "negative", "mostly_null",
          "constant", "empty")


def _value(shape: str, rng: random.Random) -> float | None:
    if shape == "normal":
        return rng.gauss(10, 3)
    if shape == "heavy_tail":
        return math.exp(rng.gauss(0, 4))  # lognormal, sigma 4: ~all values in bucket 0
    if shape == "point_mass":
        return 7.25 if rng.random() < 0.9 else rng.uniform(0, 100)
    if shape == "ties":
        return float(rng.randint(0, 5))
    if shape == "narrow":
        return 1e6 + rng.random() * 1e-7
    if shape == "negative":
        return -rng.expovariate(1e-3)
    if shape == "mostly_null":
        return rng.uniform(-1, 1) if rng.random() < 0.05 else None
    if shape == "constant":
        return 3.5
    return None  # empty


def shaped_dataset(rows: int, seed: int) -> Dataset:
    rng = random.Random(seed)
    data = []
    for _ in range(rows):
        y = rng.choice(("a", "b", "c", None)) if rng.random() < 0.9 else None
        data.append((y, rng.randint(0, 9), *(_value(s, rng) for s in SHAPES)))
    columns = (("y", "text"), ("grp", "integer"), *((s, "float") for s in SHAPES))
    return Dataset(columns=columns, rows=data)


def bucketed(source: Any, table: str, buckets: int, **options: Any) -> dict[str, list[float]]:
    with Session.open(source, table) as session:
        spec = session.resolve(make_options("y", **options))
        return quantiles.bucketed_cuts(session.engine, spec, buckets=buckets)


def expected(dataset: Dataset, shape: str, bins: int, keep: Any = None) -> list[float]:
    y = dataset.column("y")
    if keep is not None:
        y = [t if keep(row) else None for t, row in zip(y, dataset.rows, strict=True)]
    return numpy_cuts(dataset.column(shape), y, bins)


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres", "mariadb", "sqlite"])
def test_cut_points_equal_numpy_bit_for_bit(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = shaped_dataset(rows=3000, seed=11)
    with loaded(engine, dataset, request) as where:
        for buckets in (1024, 7):  # 7: big buckets, many rows numbered in step 3
            found = bucketed(where.source, where.table, buckets)
            assert set(found) == set(SHAPES)  # every column served, none left to fallback
            for shape in SHAPES:
                assert sorted(set(found[shape])) == expected(dataset, shape, 10), (shape, buckets)
        # --where and other bin counts: the rows the ranking reads, nothing else.
        found = bucketed(where.source, where.table, 1024, where="grp < 4", bins=4)
        for shape in SHAPES:
            assert sorted(set(found[shape])) == expected(
                dataset, shape, 4, keep=lambda row: row[1] < 4), shape


def non_finite_dataset(rows: int, seed: int) -> Dataset:
    """Gaussian columns "with_inf" (one +inf), "with_nan" (one NaN) and "plain"."""
    rng = random.Random(seed)
    data = [(rng.choice("xy"), rng.gauss(0, 1), rng.gauss(0, 1), rng.gauss(0, 1))
            for _ in range(rows)]
    data[3] = (data[3][0], math.inf, data[3][2], data[3][3])
    data[9] = (data[9][0], data[9][1], math.nan, data[9][3])
    return Dataset(columns=(("y", "text"), ("with_inf", "float"), ("with_nan", "float"),
                            ("plain", "float")), rows=data)


@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_infinite_and_nan_values_fall_back_to_the_engines_quantile(
        engine: str, request: pytest.FixtureRequest) -> None:
    dataset = non_finite_dataset(rows=400, seed=5)
    with loaded(engine, dataset, request) as where:
        found = bucketed(where.source, where.table, 1024)
        assert set(found) == {"plain"}  # the other two are left to the bounds pre-pass
        assert sorted(set(found["plain"])) == expected(dataset, "plain", 10)
        with Session.open(where.source, where.table) as session:
            opened_engine = session.engine
            spec = session.resolve(make_options("y"))
            by_statement = fetch_cuts(opened_engine, spec)
            opened_engine.policy = replace(opened_engine.policy, run_quantile="buckets")
            mixed = fetch_cuts(opened_engine, spec)
        # The whole run-mode result: same cut points as the one-statement quantile, within
        # the last bit (the engines' own interpolation rounds differently from numpy).
        assert set(mixed) == set(by_statement) == {"with_inf", "with_nan", "plain"}
        for name, cuts in mixed.items():
            assert len(cuts) == len(by_statement[name])
            assert all(math.isclose(a, b, rel_tol=1e-15, abs_tol=1e-300)
                       for a, b in zip(cuts, by_statement[name], strict=True)), name


def test_the_interpolation_is_numpys() -> None:
    # numpy.quantile's linear method computes from the nearer order statistic; a plain
    # low + t (high - low) differs from it in the last bit about one time in ten.
    rng = np.random.default_rng(3)
    for _ in range(300):
        values = np.sort(rng.random(int(rng.integers(2, 60))) * 10.0 ** int(rng.integers(-3, 4)))
        for level in quantile_levels(10) + quantile_levels(7):
            h = (len(values) - 1) * level
            k = math.floor(h)
            upper = float(values[min(k + 1, len(values) - 1)])
            got = quantiles.interpolate(float(values[k]), upper, h - k)
            assert got == float(np.quantile(values, level))


def test_a_ranking_reads_no_whole_column_sort_on_duckdb() -> None:
    # DuckDB finds cut points with the bucket statements, never quantile_cont (whose memory
    # grows with the column); `bitsift sql` still pastes one statement with quantile_cont.
    import duckdb

    import bitsift

    connection = duckdb.connect()
    connection.execute("CREATE TABLE t AS SELECT i % 3 AS y, sin(i) AS s FROM range(5000) r(i)")
    try:
        with Session.open(connection, "t") as session:
            engine = session.engine
            spec = session.resolve(make_options("y"))
            assert engine.policy.run_quantile == "counted"  # buckets for cut points, too
            fetch_cuts(engine, spec)
            sent = " ".join(engine.statements).lower()
        assert "quantile_cont" not in sent and "row_number" in sent
        pasted = bitsift.statement(connection, target="y", table="t").lower()
        assert "quantile_cont" in pasted
    finally:
        connection.close()
