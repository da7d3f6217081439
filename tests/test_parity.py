"""Parity: every engine and every count strategy / quantile method it can run gives the NumPy
reference's metrics (bitsift.run.reference) to 1e-9 on the same random table.

The table (tests/helpers.py, random_dataset) has NULLs in the target and the attributes, skewed
classes, text that differs only by case, a trailing space or an accent (MariaDB's default
collation merges those unless bitsift groups them byte-exactly), unicode, the empty string,
integers with ties (categorical, and binned when forced --numeric), floats and a DECIMAL(10, 2)
binned into quantiles (the cut points are checked against numpy.quantile too).
"""

from __future__ import annotations

import dataclasses

import pytest
from helpers import (
    NUMERIC_COLUMNS,
    assert_matches_reference,
    loaded,
    random_dataset,
    rank_with,
    run_sql,
)

import bitsift
from bitsift.sql import dialects

#: Count strategies each executed engine can run (no GROUPING SETS on SQLite and MariaDB).
STRATEGIES: dict[str, tuple[str, ...]] = {
    "duckdb": ("grouping_sets", "union_all", "cross_join", "union_scans"),
    "sqlite": ("union_all", "cross_join", "union_scans"),
    "postgres": ("grouping_sets", "union_all", "cross_join", "union_scans"),
    "mariadb": ("union_all", "cross_join", "union_scans"),
}
#: Quantile methods each executed engine can run (window: everywhere).
QUANTILES: dict[str, tuple[str, ...]] = {
    "duckdb": ("quantile_cont", "percentile_cont", "window"),
    "sqlite": ("window",),
    "postgres": ("percentile_cont", "window"),
    "mariadb": ("window",),
}
CASES = [(e, s) for e, strategies in STRATEGIES.items() for s in strategies]
NUMERIC = (*NUMERIC_COLUMNS, "level")


@pytest.mark.slow
@pytest.mark.parametrize(("engine", "strategy"), CASES)
def test_every_strategy_matches_the_reference(engine: str, strategy: str,
                                              request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=3, rows=1500)
    with loaded(engine, dataset, request) as where:
        for missing in ("category", "drop"):
            ranking = rank_with(where.source, where.table, "y", strategy=strategy,
                                missing=missing)
            assert_matches_reference(ranking, dataset, "y", numeric=NUMERIC_COLUMNS,
                                     missing=missing, context=f"{engine}/{strategy}/{missing}")


@pytest.mark.slow
@pytest.mark.parametrize("engine", list(QUANTILES))
def test_every_quantile_method_matches_numpy(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=5, rows=1200)
    with loaded(engine, dataset, request) as where:
        for method in QUANTILES[engine]:
            for bins in (4, 7):
                ranking = rank_with(where.source, where.table, "y", quantile=method,
                                    numeric="level", bins=bins,
                                    attributes=list(NUMERIC))
                assert_matches_reference(ranking, dataset, "y", numeric=NUMERIC, bins=bins,
                                         context=f"{engine}/{method}/{bins} bins")


@pytest.mark.parametrize("engine", list(STRATEGIES))
def test_case_and_padding_variants_stay_apart(engine: str, request: pytest.FixtureRequest) -> None:
    # 'a'/'A', 'x'/'x ' and 'e'/'é' are different values on every engine, target included.
    dataset = random_dataset(seed=8, rows=600)
    with loaded(engine, dataset, request) as where:
        ranking = rank_with(where.source, where.table, "y", attributes=["word"])
    present = {v for v in dataset.column("word")}
    assert ranking["word"].distinct == len(present)
    assert ranking.classes == len({v for v in dataset.column("y") if v is not None})


#: A pasted statement that computes its own cut points, as `bitsift sql` writes it (quantile,
#: best-split and equal-width bins, --where, --missing drop) and as `rank` runs it.
PASTED = {"attributes": "word,level,score,ratio,price", "numeric": "score,ratio,price", "bins": 4,
          "binning_for": "score=best-split,ratio=equal-width", "missing": "drop",
          "where": "level <> 3 OR word IS NULL"}
COMPARED = ("information_gain", "gain_ratio", "symmetric_uncertainty", "attribute_entropy",
            "information_gain_se", "information_gain_low", "information_gain_high")


@pytest.mark.slow
@pytest.mark.parametrize(("engine", "strategy"), CASES)
def test_every_pasted_strategy_equals_run_mode(engine: str, strategy: str,
                                               request: pytest.FixtureRequest,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    # Issue 21 item 8: whichever count strategy a dialect's pasted statement uses
    # (paste_count_strategy; union_scans joins each branch with its own attribute's bounds
    # part), the statement computes run mode's bins and gains.
    dataset = random_dataset(seed=6, rows=900)
    with loaded(engine, dataset, request) as where:
        ranking = bitsift.rank(where.source, table=where.table, target="y", **PASTED)
        forced = dataclasses.replace(dialects.CAPABILITIES[engine], paste_count_strategy=strategy)
        monkeypatch.setitem(dialects.CAPABILITIES, engine, forced)
        sql = bitsift.statement(where.source, table=where.table, target="y", dialect=engine,
                                **PASTED)
        assert ("AS rows_1" in sql) == (strategy == "union_scans")  # the override took hold
        rows = {r["attribute"]: r for r in run_sql(where, sql) if r["attribute_index"] != 0}
    assert isinstance(ranking, bitsift.Ranking)
    assert sorted(rows) == sorted(a.attribute for a in ranking.attributes)
    for scored in ranking.attributes:
        row = rows[scored.attribute]
        context = f"{engine}/{strategy}: {scored.attribute}"
        assert int(row["distinct_values"]) == scored.distinct, context
        assert int(row["rows_used"]) == scored.rows, context
        assert (int(row["rank_low"]), int(row["rank_high"])) == (scored.rank_low,
                                                                scored.rank_high), context
        for metric in COMPARED:
            got, want = float(row[metric]), getattr(scored, metric)
            assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), f"{context} {metric}"
