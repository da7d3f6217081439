"""Parity: every engine and every count strategy / quantile method it can run gives the NumPy
reference's metrics (bitsift.run.reference) to 1e-9 on the same random table.

The table (tests/helpers.py, random_dataset) has NULLs in the target and the attributes, skewed
classes, text that differs only by case, a trailing space or an accent (MariaDB's default
collation merges those unless bitsift groups them byte-exactly), unicode, the empty string,
integers with ties (categorical, and binned when forced --numeric), floats and a DECIMAL(10, 2)
binned into quantiles (the cut points are checked against numpy.quantile too).
"""

from __future__ import annotations

import pytest
from helpers import (
    NUMERIC_COLUMNS,
    assert_matches_reference,
    loaded,
    random_dataset,
    rank_with,
)

#: Count strategies each executed engine can run (no GROUPING SETS on SQLite and MariaDB).
STRATEGIES: dict[str, tuple[str, ...]] = {
    "duckdb": ("grouping_sets", "union_all", "cross_join"),
    "sqlite": ("union_all", "cross_join"),
    "postgres": ("grouping_sets", "union_all", "cross_join"),
    "mariadb": ("union_all", "cross_join"),
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
