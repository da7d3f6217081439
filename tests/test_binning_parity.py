"""Every binning on DuckDB, SQLite, PostgreSQL and MariaDB gives the same bins: the cut points
of each method equal an independent NumPy computation on every engine (so they equal each
other), in run mode and in the pasted statement, and the metrics are the reference's.

The table has the traps of the other parity tests: NULLs in the values and the target, ties,
a DECIMAL, an integer binned with --numeric, target classes that differ only by case or a
trailing space (MariaDB's collation would merge them unless bitsift groups byte-exactly, in
the best-split and MDL histograms too), plus a date and a timestamp (whole seconds: SQLite's
and MariaDB's epoch functions drop fractions).
"""

from __future__ import annotations

import datetime as dt
import functools
import random
from typing import Any

import numpy as np
import pytest
from helpers import ENGINES, Dataset, loaded, run_sql
from test_binning import (
    IRIS_FEATURES,
    brute_force_split,
    date_part,
    epoch,
    iris_dataset,
    numpy_mdl,
)
from test_discretize import paper_mdl

import bitsift
from bitsift.run import reference

METHODS = ("quantile", "equal-width", "best-split", "mdl")
BINS = 5
NUMERIC = ("f", "price", "level", "day", "at")
CLASSES = ("yes", "no", "No", "no ")
SEED = 21


@functools.cache
def parity_dataset(seed: int, rows: int = 600) -> Dataset:
    rng = random.Random(seed)
    start = dt.datetime(2025, 1, 1)
    data = []
    for _ in range(rows):
        f = rng.randint(-20, 60) / 4 if rng.random() > 0.08 else None
        price = round(rng.uniform(0, 30), 2) if rng.random() > 0.05 else None
        level = rng.choice((1, 2, 2, 3, 5, 8)) if rng.random() > 0.05 else None
        moment = start + dt.timedelta(seconds=rng.randint(0, 200 * 86400))
        day = moment.date() if rng.random() > 0.05 else None
        at = moment if rng.random() > 0.05 else None
        weights = [4.0, 3.0, 1.0, 1.0]
        if f is not None and f > 8:
            weights[1] += 6
        if moment.month == 3:
            weights[2] += 3
        if price is not None and price < 5:
            weights[3] += 3
        y = rng.choices(CLASSES, weights)[0] if rng.random() > 0.03 else None
        data.append((y, f, price, level, day, at))
    return Dataset(columns=(("y", "text"), ("f", "float"), ("price", "decimal"),
                            ("level", "integer"), ("day", "date"), ("at", "timestamp")),
                   rows=data)


def as_number(value: Any) -> float | None:
    if isinstance(value, dt.date):
        return epoch(value)
    return None if value is None else float(value)


@functools.cache
def expected_cuts(seed: int, column: str, method: str) -> list[float]:
    """The cut points of ``method`` computed in NumPy on the rows of ``parity_dataset(seed)``
    with a value and a target (cached: every engine compares with them)."""
    dataset = parity_dataset(seed)
    kept = [(as_number(v), t) for v, t in zip(dataset.column(column), dataset.column("y"),
                                              strict=True) if v is not None and t is not None]
    x = np.array([v for v, _ in kept], dtype=float)
    y = np.array([t for _, t in kept], dtype=object)
    if method == "quantile":
        levels = [round(j / BINS, 12) for j in range(1, BINS)]
        return sorted(set(np.quantile(x, levels).tolist()))
    if method == "equal-width":
        lo, hi = float(x.min()), float(x.max())
        return sorted({lo + (hi - lo) * j / BINS for j in range(1, BINS)})
    if method == "best-split":
        return [brute_force_split(x, y)[0]]
    return numpy_mdl(x, y)


def assert_cuts(got: list[float] | None, want: list[float], where: str) -> None:
    assert got is not None, where
    assert len(got) == len(want), f"{where}: {got} != {want}"
    for a, b in zip(got, want, strict=True):
        assert abs(a - b) <= 1e-12 * max(1.0, abs(b)), f"{where}: {got} != {want}"


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_every_binning_gives_the_same_bins_on_every_engine(
        engine: str, request: pytest.FixtureRequest) -> None:
    dataset = parity_dataset(SEED)
    with loaded(engine, dataset, request) as where:
        for method in METHODS:
            options: dict[str, Any] = {"binning": method, "bins": BINS, "numeric": "level,day,at"}
            ranking = bitsift.rank(where.source, table=where.table, target="y", **options)
            pasted = {r["attribute"]: r for r in run_sql(where, bitsift.statement(
                where.source, table=where.table, target="y", dialect=engine, **options))}
            for column in NUMERIC:
                context = f"{engine}/{method}/{column}"
                scored = ranking[column]
                assert scored.binning == method, context
                assert_cuts(scored.cuts, expected_cuts(SEED, column, method), context)
                values = reference.bin_values([as_number(v) for v in dataset.column(column)],
                                              scored.cuts or [])
                expected = reference.metrics(reference.contingency(values, dataset.column("y")))
                assert scored.distinct == expected["distinct"], context
                assert abs(scored.information_gain - expected["information_gain"]) <= 1e-9, context
                # The pasted statement computes the same bins itself (mdl: cut points inlined).
                row = pasted[column]
                assert int(row["distinct_values"]) == scored.distinct, context
                assert abs(float(row["information_gain"]) - scored.information_gain) <= 1e-9, (
                    context)


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_mdl_on_iris_equals_the_paper_on_every_engine(
        engine: str, request: pytest.FixtureRequest) -> None:
    dataset = iris_dataset()
    labels = np.array(dataset.column("species"))
    with loaded(engine, dataset, request, table="iris") as where:
        ranking = bitsift.rank(where.source, table=where.table, target="species",
                               binning="mdl")
    for feature in IRIS_FEATURES:
        expected = paper_mdl(np.array(dataset.column(feature)), labels)
        assert_cuts(ranking[feature].cuts, expected, f"{engine}/{feature}")


@pytest.mark.parametrize("engine", ENGINES)
def test_date_parts_give_the_same_categories_on_every_engine(
        engine: str, request: pytest.FixtureRequest) -> None:
    dataset = parity_dataset(seed=4, rows=400)
    with loaded(engine, dataset, request) as where:
        for parts in ("at=hour,day=month", "at=year,dow"):
            ranking = bitsift.rank(where.source, table=where.table, target="y",
                                   attributes="day,at", date_part=parts)
            named = dict(p.split("=") for p in parts.split(",") if "=" in p)
            for column in ("day", "at"):
                part = named.get(column, "dow")
                values = [date_part(v, part) for v in dataset.column(column)]
                expected = reference.metrics(reference.contingency(values, dataset.column("y")))
                scored = ranking[column]
                context = f"{engine}/{column}={part}"
                assert scored.distinct == expected["distinct"], context
                assert abs(scored.information_gain - expected["information_gain"]) <= 1e-9, (
                    context)


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_check_compares_binned_dates_with_the_reference(
        engine: str, request: pytest.FixtureRequest) -> None:
    # `check` pulls the values as ranked (epoch seconds, parts), not the raw dates.
    dataset = parity_dataset(seed=6, rows=300)
    with loaded(engine, dataset, request) as where:
        report = bitsift.check(where.source, table=where.table, target="y",
                               attributes="day,at,f", numeric="day", binning="best-split",
                               date_part="at=month")
    assert report.whole_table and report.ok, report.relative_differences
