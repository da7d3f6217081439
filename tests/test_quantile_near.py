"""Quantile cut points on fine-bucket edges from the cells scan (bitsift.run.quantile_counts).

Above :data:`~bitsift.run.quantile_counts.EXACT_ROWS` rows (forced to 0 here, so that small
tables take the same way), a counted ranking reads one scan of (bucket, class) cells and
places each quantile's cut point on a bucket edge: the exact quantile where the cells alone
place it (between two buckets, or in a bucket of one value), else the lowest value of the
bucket holding it or of the next one. Three independent checks:

- every cut point lies within one fine bucket of ``numpy.quantile``'s (the bucket computed here
  in Python with the same IEEE formula ``floor((x - lo) * scale)`` the statement uses);
- the metrics equal the NumPy reference (scipy-free: ``bitsift.run.reference``, p log p) of the
  rows binned one by one in Python *at the cut points bitsift reports*: the bins are counted
  exactly and the reported cut points are the bins' true edges;
- where a bucket edge is too far from the exact quantile (heavy tails: most rows in one bucket)
  the exact quantile is found instead (step 3), equal to numpy's bit for bit.

Data: seeded random shapes invented here (lognormal, Pareto, ties, NaN/inf, NULLs...).
"""

from __future__ import annotations

import math
import random
from typing import Any

import numpy as np
import pytest
from helpers import COMPARED_METRICS, Dataset, loaded, numpy_cuts, rank_with

from bitsift.errors import DataError
from bitsift.run import quantile_counts, quantiles, reference
from bitsift.run.api import make_options
from bitsift.run.result import Ranking
from bitsift.run.session import Session
from bitsift.sql.sqlbuild import quantile_levels

COUNTED = {"run_quantile": "counted"}
#: Only step 3 (quantile_splits.sql.j2) selects this.
SPLITS = "n_less"
CELLS = "bucket_cells"

SHAPES = ("uniform", "normal", "lognormal", "pareto", "heavy_tail", "ties", "skewed_ties",
          "negative", "mostly_null", "constant", "empty")


def _value(shape: str, rng: random.Random) -> float | None:
    if shape == "uniform":
        return rng.uniform(-5, 5)
    if shape == "normal":
        return rng.gauss(10, 3)
    if shape == "lognormal":
        return math.exp(rng.gauss(0, 1))
    if shape == "pareto":
        return rng.paretovariate(1.2)  # heavy tail: nearly every row in the first bucket
    if shape == "heavy_tail":
        return math.exp(rng.gauss(0, 4))
    if shape == "ties":
        return float(rng.randint(0, 5))
    if shape == "skewed_ties":
        return float(min(int(rng.expovariate(0.3)), 40)) / 4
    if shape == "negative":
        return -rng.expovariate(1e-3)
    if shape == "mostly_null":
        return rng.uniform(-1, 1) if rng.random() < 0.05 else None
    if shape == "constant":
        return 3.5
    return None  # empty


def near_dataset(rows: int, seed: int) -> Dataset:
    rng = random.Random(seed)
    data = []
    for _ in range(rows):
        y = rng.choice(("a", "b", "c")) if rng.random() < 0.95 else None
        values = [_value(s, rng) for s in SHAPES]
        # A weak signal, so the bins matter to the gain.
        if y == "a" and values[0] is not None:
            values[0] = values[0] + 1.0
        data.append((y, *values))
    return Dataset(columns=(("y", "text"), *((s, "float") for s in SHAPES)), rows=data)


def _near_ranking(where: Any, monkeypatch: pytest.MonkeyPatch, **options: Any) -> Ranking:
    monkeypatch.setattr(quantile_counts, "EXACT_ROWS", 0)
    return rank_with(where.source, where.table, "y", policy=COUNTED, **options)


def _bucket(x: float, low: float, scale: float) -> int:
    return math.floor((x - low) * scale)


def assert_within_one_bucket(ranking: Ranking, dataset: Dataset, bins: int = 10) -> None:
    """Each cut point within one fine bucket of a numpy quantile, and each numpy quantile
    within one fine bucket of a cut point (duplicates merged on both sides)."""
    y = dataset.column("y")
    buckets = quantiles.bucket_count(len(dataset.rows))
    for scored in ranking.attributes:
        column = dataset.column(scored.attribute)
        present = [float(v) for v in column if v is not None]
        exact = numpy_cuts(column, y, bins)
        assert scored.cuts is not None, scored.attribute
        if not present or min(present) == max(present):
            assert scored.cuts == exact, scored.attribute
            continue
        low, high = min(present), max(present)  # over the whole source, as step 1
        scale = buckets / (high - low)
        got = [_bucket(c, low, scale) for c in scored.cuts]
        want = [_bucket(q, low, scale) for q in exact]
        assert len(scored.cuts) <= bins - 1, scored.attribute
        for b in got:
            assert any(abs(b - w) <= 1 for w in want), (scored.attribute, scored.cuts, exact)
        for w in want:
            assert any(abs(b - w) <= 1 for b in got), (scored.attribute, scored.cuts, exact)


def assert_counted_at_reported_cuts(ranking: Ranking, dataset: Dataset,
                                    missing: str = "category") -> None:
    """The metrics of the rows binned in Python at bitsift's own cut points (x < cut)."""
    y = dataset.column("y")
    for scored in ranking.attributes:
        assert scored.cuts is not None
        binned = reference.bin_values(dataset.column(scored.attribute), scored.cuts)
        expected = reference.metrics(reference.contingency(binned, y, missing))
        where = f"{scored.attribute} at {scored.cuts}"
        assert scored.rows == expected["rows"], where
        assert scored.distinct == expected["distinct"], where
        for metric in COMPARED_METRICS:
            got, want = getattr(scored, metric), expected[metric]
            assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), f"{where}: {metric}"


@pytest.mark.slow
@pytest.mark.parametrize(("bins", "missing"), [(10, "category"), (4, "drop"), (25, "category")])
def test_near_cut_points_are_within_one_bucket_and_counted_exactly(
        bins: int, missing: str, request: pytest.FixtureRequest,
        monkeypatch: pytest.MonkeyPatch) -> None:
    dataset = near_dataset(rows=20_000, seed=3)
    shapes = [s for s in SHAPES if not (missing == "drop" and s == "empty")]
    with loaded("duckdb", dataset, request) as where:
        ranking = _near_ranking(where, monkeypatch, bins=bins, missing=missing,
                                attributes=",".join(shapes))
    assert CELLS in "\n".join(ranking.statements)
    assert_within_one_bucket(ranking, dataset, bins)
    assert_counted_at_reported_cuts(ranking, dataset, missing)


def test_well_spread_columns_need_no_third_statement(request: pytest.FixtureRequest,
                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    # Uniform, normal and tied columns: every cut point from the cells scan. (Lognormal(0, 1)
    # is not among them: its lowest deciles fall in equal-width buckets of 1.5 % of the rows
    # each, more than NEAR_SHARE allows, so they are refined: the next test.)
    dataset = near_dataset(rows=20_000, seed=5)
    shapes = ["uniform", "normal", "ties", "skewed_ties", "constant", "empty"]
    with loaded("duckdb", dataset, request) as where:
        ranking = _near_ranking(where, monkeypatch, attributes=",".join(shapes))
    sent = "\n".join(ranking.statements)
    assert CELLS in sent and SPLITS not in sent
    assert "quantile_cont" not in sent
    uniform = next(a for a in ranking.attributes if a.attribute == "uniform")
    exact = numpy_cuts(dataset.column("uniform"), dataset.column("y"), 10)
    assert uniform.cuts != exact  # on bucket edges: not numpy's interpolated values ...
    assert_within_one_bucket(ranking, dataset)  # ... but within one bucket of them


def test_cut_points_the_cells_place_exactly_are_numpys(request: pytest.FixtureRequest,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    # Few distinct values: each bucket holds one value, so every quantile lies between two
    # buckets or on a bucket's only value, and the cells give numpy's cut point bit for bit.
    dataset = near_dataset(rows=20_000, seed=7)
    with loaded("duckdb", dataset, request) as where:
        ranking = _near_ranking(where, monkeypatch, attributes="ties,skewed_ties", bins=7)
    assert SPLITS not in "\n".join(ranking.statements)
    for scored in ranking.attributes:
        assert scored.cuts == numpy_cuts(dataset.column(scored.attribute),
                                         dataset.column("y"), 7), scored.attribute


def test_heavy_tails_find_the_exact_quantiles(request: pytest.FixtureRequest,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    # Pareto and lognormal(sigma 4): nearly every row in the first of 1,024 equal-width
    # buckets, so no bucket edge is near the quantiles; step 3 finds numpy's values, for
    # those attributes only. Lognormal(0, 1): its lowest deciles' buckets are too wide too.
    dataset = near_dataset(rows=20_000, seed=9)
    splits = quantile_counts._splits
    refined: list[str] = []

    def spy(engine: Any, spec: Any, searched: Any) -> Any:
        refined.extend(spec.attributes[i - 1].name for i in searched)
        return splits(engine, spec, searched)

    monkeypatch.setattr(quantile_counts, "_splits", spy)
    with loaded("duckdb", dataset, request) as where:
        ranking = _near_ranking(where, monkeypatch,
                                attributes="pareto,heavy_tail,lognormal,uniform")
    assert sorted(refined) == ["heavy_tail", "lognormal", "pareto"]
    y = dataset.column("y")
    for scored in ranking.attributes:
        if scored.attribute != "uniform":  # refined: exact
            assert scored.cuts == numpy_cuts(dataset.column(scored.attribute), y, 10)
    assert_within_one_bucket(ranking, dataset)
    assert_counted_at_reported_cuts(ranking, dataset)


@pytest.mark.parametrize("rows", [0, 1, 2])
def test_tiny_tables(rows: int, request: pytest.FixtureRequest,
                     monkeypatch: pytest.MonkeyPatch) -> None:
    # 0: rows whose target is NULL only (nothing ranked), 1 and 2 rows; the cut points as
    # rank_counted returns them (a ranking of one class is refused after that).
    monkeypatch.setattr(quantile_counts, "EXACT_ROWS", 0)
    dataset = near_dataset(rows=50, seed=2)
    dataset = Dataset(columns=dataset.columns,
                      rows=[("a" if rows else None, *r[1:]) for r in dataset.rows[:rows or 3]])
    with loaded("duckdb", dataset, request) as where, Session.open(where.source,
                                                                   where.table) as session:
        spec = session.resolve(make_options("y", attributes="uniform,constant,empty"))
        _, cuts = quantile_counts.rank_counted(session.engine, spec)
    y = dataset.column("y")
    for name in ("uniform", "constant", "empty"):
        assert cuts[name] == numpy_cuts(dataset.column(name), y, 10), name
    if rows:
        with loaded("duckdb", dataset, request) as where, pytest.raises(
                DataError, match="single class"):
            _near_ranking(where, monkeypatch)


def test_nan_and_infinities_are_ranked_the_usual_way(request: pytest.FixtureRequest,
                                                     monkeypatch: pytest.MonkeyPatch) -> None:
    # A NaN or an infinite value makes the buckets unusable: that attribute is binned row by
    # row at the engine's exact quantiles; the others stay on bucket edges.
    dataset = near_dataset(rows=5_000, seed=11)
    rows = [list(r) for r in dataset.rows]
    at = {name: i + 1 for i, name in enumerate(SHAPES)}
    rows[3][at["normal"]] = math.inf
    rows[5][at["lognormal"]] = -math.inf
    rows[8][at["skewed_ties"]] = math.nan
    dataset = Dataset(columns=dataset.columns, rows=[tuple(r) for r in rows])
    with loaded("duckdb", dataset, request) as where:
        ranking = _near_ranking(where, monkeypatch,
                                attributes="uniform,normal,lognormal,skewed_ties")
    y = dataset.column("y")
    for scored in ranking.attributes:
        if scored.attribute != "uniform":
            values = dataset.column(scored.attribute)
            finite = [v for v in values if v is None or math.isfinite(v)]
            # The engines sort NaN above every number: as +inf here (none near a decile).
            kept = [math.inf if math.isnan(v) else float(v)
                    for v, t in zip(values, y, strict=True) if v is not None and t is not None]
            levels = [round(j / 10, 12) for j in range(1, 10)]
            want = sorted({float(q) for q in np.quantile(np.asarray(kept), levels)
                           if math.isfinite(q)})
            # quantile_cont may differ from numpy in the last bit (bitsift.run.quantiles).
            assert len(finite) < len(values) and scored.cuts is not None
            assert scored.cuts == pytest.approx(want, rel=1e-12), scored.attribute
    assert_counted_at_reported_cuts(ranking, dataset)


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["postgres", "sqlite", "mariadb"])
def test_near_cut_points_on_other_engines(engine: str, request: pytest.FixtureRequest,
                                          monkeypatch: pytest.MonkeyPatch) -> None:
    # The same statements, plain SQL: the same cut points as DuckDB's, counted exactly.
    dataset = near_dataset(rows=4_000, seed=13)
    shapes = "uniform,normal,lognormal,pareto,ties,mostly_null,constant,empty"
    with loaded("duckdb", dataset, request) as where:
        on_duckdb = _near_ranking(where, monkeypatch, attributes=shapes)
    with loaded(engine, dataset, request) as where:
        ranking = _near_ranking(where, monkeypatch, attributes=shapes)
    assert CELLS in "\n".join(ranking.statements).lower()
    assert {a.attribute: a.cuts for a in ranking.attributes} == {
        a.attribute: a.cuts for a in on_duckdb.attributes}
    assert_within_one_bucket(ranking, dataset)
    assert_counted_at_reported_cuts(ranking, dataset)


def test_exact_below_the_threshold(request: pytest.FixtureRequest) -> None:
    # Up to EXACT_ROWS rows every cut point is numpy's (step 3 costs next to nothing there).
    dataset = near_dataset(rows=3_000, seed=17)
    with loaded("duckdb", dataset, request) as where:
        ranking = rank_with(where.source, where.table, "y", policy=COUNTED,
                            attributes="uniform,normal,lognormal")
    for scored in ranking.attributes:
        assert scored.cuts == numpy_cuts(dataset.column(scored.attribute),
                                         dataset.column("y"), 10), scored.attribute


def test_levels_are_the_ones_the_statement_uses() -> None:
    # The cut-selection rule walks the same quantile levels as the pasted statement.
    assert quantile_levels(4) == [0.25, 0.5, 0.75]
