"""Property tests (hypothesis): the SQL path against the NumPy reference, and invariants.

Random tables with NULLs, skewed classes and 1-50 attribute values; each example ranks a
fresh in-memory DuckDB table and compares with :mod:`bitsift.run.reference` (p·log p form) to
1e-9, absolute for entropies and relative for the G statistic.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import duckdb
import pyarrow as pa
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import bitsift
from bitsift.run import reference

TOLERANCE = 1e-9
PROPERTY_SETTINGS = settings(
    max_examples=40,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)
METRICS = ("target_entropy", "attribute_entropy", "conditional_entropy", "information_gain",
           "gain_ratio", "symmetric_uncertainty", "g_statistic", "p_value")


def close(got: float, expected: float) -> bool:
    return math.isclose(got, expected, rel_tol=TOLERANCE, abs_tol=TOLERANCE)


@st.composite
def tables(draw: st.DrawFn, numeric: bool = False) -> dict[str, Any]:
    """A target with 2-5 skewed classes (and NULLs) and 1-3 attributes with 1-50 values."""
    n = draw(st.integers(2, 250))
    n_classes = draw(st.integers(2, 5))
    # Skew: a class drawn with weight w_k; weights may differ by two orders of magnitude.
    weights = draw(st.lists(st.integers(1, 100), min_size=n_classes, max_size=n_classes))
    class_pool = [c for c, w in enumerate(weights) for _ in range(w)]
    y: list[Any] = draw(st.lists(st.sampled_from(class_pool), min_size=n, max_size=n))
    null_target = draw(st.floats(0, 0.3))
    null_flags = draw(st.lists(st.floats(0, 1), min_size=n, max_size=n))
    y = [None if f < null_target else f"k{c}" for c, f in zip(y, null_flags, strict=True)]
    # Two rows with two different classes, so there is always something to rank.
    y[0], y[1] = "k0", "k1"
    attributes: dict[str, list[Any]] = {}
    for index in range(draw(st.integers(1, 3))):
        if numeric:
            value = st.one_of(
                st.floats(-1e6, 1e6, allow_nan=False),
                st.integers(-5, 5).map(float),  # ties across quantile boundaries
                st.sampled_from([math.nan, math.inf, -math.inf]),
            )
        else:
            cardinality = draw(st.integers(1, 50))
            value = st.integers(0, cardinality - 1)
        null_share = draw(st.sampled_from([0.0, 0.0, 0.1, 0.5]))
        values = draw(st.lists(value, min_size=n, max_size=n))
        nulls = draw(st.lists(st.floats(0, 1), min_size=n, max_size=n))
        attributes[f"x{index}"] = [None if u < null_share else v
                                   for v, u in zip(values, nulls, strict=True)]
    return {"y": y, "attributes": attributes}


def connect(table: dict[str, Any], numeric: bool = False) -> duckdb.DuckDBPyConnection:
    con = duckdb.connect()
    kind = pa.float64() if numeric else pa.int64()
    arrow = pa.table({
        "y": pa.array(table["y"], type=pa.string()),
        **{name: pa.array(v, type=kind) for name, v in table["attributes"].items()},
    })
    con.register("source_rows", arrow)
    con.execute("CREATE TABLE t AS SELECT * FROM source_rows")
    con.unregister("source_rows")
    return con


def assert_matches_reference(scored: bitsift.AttributeScore, values: Sequence[Any],
                             y: Sequence[Any], missing: str) -> None:
    table = reference.contingency(values, y, missing)
    if table.sum() == 0:
        # --missing drop with an attribute NULL on every row: nothing measured.
        assert (scored.rows, scored.distinct, scored.information_gain) == (0, 0, 0.0)
        return
    expected = reference.metrics(table)
    assert scored.rows == expected["rows"]
    assert scored.distinct == expected["distinct"]
    assert scored.dof == expected["dof"]
    wrong = {m: (getattr(scored, m), expected[m]) for m in METRICS
             if not close(getattr(scored, m), expected[m])}
    assert wrong == {}, scored.attribute


@pytest.mark.slow
@PROPERTY_SETTINGS
@given(table=tables(), missing=st.sampled_from(["category", "drop"]))
def test_sql_equals_numpy_reference_and_is_bounded(table: dict[str, Any], missing: str) -> None:
    with connect(table) as con:
        ranking = bitsift.rank(con, target="y", table="t", missing=missing)
    y = table["y"]
    present = [v for v in y if v is not None]
    assert (ranking.rows, ranking.rows_excluded) == (len(present), len(y) - len(present))
    assert close(ranking.target_entropy, reference.entropy_bits(
        [present.count(c) for c in set(present)]))
    assert len(ranking.attributes) == len(table["attributes"])
    for scored in ranking.attributes:
        assert_matches_reference(scored, table["attributes"][scored.attribute], y, missing)
        assert_bounded(scored)


def assert_bounded(s: bitsift.AttributeScore) -> None:
    """0 <= IG <= min(H(X), H(Y)), and the normalised metrics within [0, 1]."""
    assert 0.0 <= s.information_gain <= min(s.attribute_entropy, s.target_entropy) + 1e-12
    assert 0.0 <= s.gain_ratio <= 1.0 + 1e-12
    assert 0.0 <= s.symmetric_uncertainty <= 1.0 + 1e-12
    assert 0.0 <= s.p_value <= 1.0
    assert s.conditional_entropy <= s.target_entropy + 1e-12


@pytest.mark.slow
@PROPERTY_SETTINGS
@given(table=tables(), order=st.randoms(use_true_random=False), data=st.data())
def test_invariant_under_row_order_and_relabelling(table: dict[str, Any], order: Any,
                                                   data: st.DataObject) -> None:
    with connect(table) as con:
        before = bitsift.rank(con, target="y", table="t")
    rows = list(zip(table["y"], *table["attributes"].values(), strict=True))
    order.shuffle(rows)
    names = list(table["attributes"])
    # Relabel each attribute's values by a bijection onto other integers, and the classes too.
    relabelled: dict[str, list[Any]] = {}
    for position, name in enumerate(names, start=1):
        distinct = sorted({r[position] for r in rows if r[position] is not None})
        targets = data.draw(st.permutations(range(1000, 1000 + len(distinct))))
        mapping = dict(zip(distinct, targets, strict=True))
        relabelled[name] = [None if r[position] is None else mapping[r[position]] for r in rows]
    classes = sorted({r[0] for r in rows if r[0] is not None})
    class_labels = data.draw(st.permutations([f"z{c}" for c in classes]))
    class_map = dict(zip(classes, class_labels, strict=True))
    shuffled = {"y": [None if r[0] is None else class_map[r[0]] for r in rows],
                "attributes": relabelled}
    with connect(shuffled) as con:
        after = bitsift.rank(con, target="y", table="t")
    assert abs(after.target_entropy - before.target_entropy) <= 1e-12
    for name in names:
        a, b = before[name], after[name]
        assert (a.distinct, a.rows, a.dof) == (b.distinct, b.rows, b.dof)
        for metric in ("information_gain", "gain_ratio", "symmetric_uncertainty",
                       "attribute_entropy", "conditional_entropy"):
            assert abs(getattr(a, metric) - getattr(b, metric)) <= 1e-12, (name, metric)


@pytest.mark.slow
@PROPERTY_SETTINGS
@given(table=tables(numeric=True), bins=st.integers(2, 12),
       missing=st.sampled_from(["category", "drop"]))
def test_numeric_bins_match_reference_with_returned_cuts(table: dict[str, Any], bins: int,
                                                         missing: str) -> None:
    with connect(table, numeric=True) as con:
        ranking = bitsift.rank(con, target="y", table="t", bins=bins, missing=missing)
    y = table["y"]
    for scored in ranking.attributes:
        assert scored.kind == "numeric"
        cuts = scored.cuts
        assert cuts is not None and cuts == sorted(set(cuts))
        assert len(cuts) <= bins - 1 and all(math.isfinite(c) for c in cuts)
        values = table["attributes"][scored.attribute]
        assert_matches_reference(scored, reference.bin_values(values, cuts), y, missing)
        assert_bounded(scored)
