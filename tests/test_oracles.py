"""Reference libraries as oracles: bitsift's in-database metrics on random tables, to 1e-9.

- H(Y): ``scipy.stats.entropy(counts, base=2)``
- IG: ``sklearn.metrics.mutual_info_score`` (nats, divided by ln 2)
- symmetric uncertainty: ``normalized_mutual_info_score(average_method="arithmetic")``
- G and its p-value: ``scipy.stats.chi2_contingency(lambda_="log-likelihood", correction=False)``
- gain ratio: IG / H(X), with H(X) from ``scipy.stats.entropy``

With ``missing="drop"`` each attribute is compared on the rows where it is present, and its
H(Y) is the entropy of the target over those rows (``AttributeScore.target_entropy``); the
ranking's top-level ``target_entropy`` stays the entropy over every row with a target.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence
from typing import Any

import duckdb
import numpy as np
import pyarrow as pa
import pytest
from scipy import stats
from sklearn.metrics import (
    mutual_info_score,
    normalized_mutual_info_score,
)
from sklearn.metrics.cluster import contingency_matrix

import bitsift

TOLERANCE = 1e-9
LN2 = math.log(2.0)


def close(got: float, expected: float) -> bool:
    """Agreement to 1e-9: absolute for values up to 1, relative beyond (the G statistic)."""
    return math.isclose(got, expected, rel_tol=TOLERANCE, abs_tol=TOLERANCE)


def random_table(seed: int) -> dict[str, tuple[str, list[Any]]]:
    """Columns (DuckDB type, values) of a random table: skewed classes, NULLs, 1..50 values."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(200, 3000))
    n_classes = int(rng.integers(2, 7))
    # Skewed classes: geometric shares, the first class dominating.
    shares = 0.35 ** np.arange(n_classes) if seed % 2 else rng.dirichlet(np.full(n_classes, 0.7))
    shares = shares / shares.sum()
    y_codes = rng.choice(n_classes, size=n, p=shares)
    y: list[Any] = [f"class_{c}" for c in y_codes]
    for i in np.flatnonzero(rng.random(n) < 0.04):
        y[i] = None
    columns: dict[str, tuple[str, list[Any]]] = {"y": ("VARCHAR", y)}
    cardinalities = [1, 2, 3, 7, 20, 50, int(rng.integers(1, 51))]
    for k, card in enumerate(cardinalities):
        # Half the attributes follow the class with some noise, half are noise.
        noise = rng.integers(0, card, size=n)
        follows = rng.random(n) < (0.6 if k % 2 else 0.0)
        codes = np.where(follows, (y_codes * 3 + k) % card, noise)
        values: list[Any] = [int(c) for c in codes]
        null_share = [0.0, 0.1, 0.3][k % 3]
        for i in np.flatnonzero(rng.random(n) < null_share):
            values[i] = None
        columns[f"a{k}_card{card}"] = ("BIGINT", values)
    words = ["north", "south", "east", "west", "n'orth", "Ünïcode", ""]
    text = [words[int(c) % len(words)] for c in (y_codes + rng.integers(0, 3, size=n))]
    columns["region"] = ("VARCHAR", [None if rng.random() < 0.05 else t for t in text])
    columns["flag"] = ("BOOLEAN", [bool(c % 2) if rng.random() < 0.9 else None for c in y_codes])
    return columns


def load(con: duckdb.DuckDBPyConnection, name: str,
         columns: dict[str, tuple[str, list[Any]]]) -> None:
    arrow_types = {"VARCHAR": pa.string(), "BIGINT": pa.int64(), "BOOLEAN": pa.bool_(),
                   "DOUBLE": pa.float64()}
    arrow = pa.table({c: pa.array(v, type=arrow_types[t]) for c, (t, v) in columns.items()})
    con.register("bitsift_scratch_source", arrow)
    con.execute(f'CREATE TABLE "{name}" AS SELECT * FROM bitsift_scratch_source')
    con.unregister("bitsift_scratch_source")


def codes(values: Sequence[Any]) -> np.ndarray:
    """Integer labels for sklearn, NULL being one more label of its own."""
    index: dict[Any, int] = {}
    return np.array([index.setdefault(("null",) if v is None else ("v", v), len(index))
                     for v in values])


def oracle(x: Sequence[Any], y: Sequence[Any], missing: str) -> dict[str, float]:
    """Every metric of one attribute from scipy and scikit-learn."""
    keep = [i for i, (a, b) in enumerate(zip(x, y, strict=True))
            if b is not None and (missing == "category" or a is not None)]
    xs = codes([x[i] for i in keep])
    ys = codes([y[i] for i in keep])
    h_y = float(stats.entropy(np.bincount(ys), base=2))
    h_x = float(stats.entropy(np.bincount(xs), base=2))
    ig = mutual_info_score(ys, xs) / LN2
    observed = contingency_matrix(xs, ys)
    g, p, dof, _ = stats.chi2_contingency(observed, correction=False,
                                          lambda_="log-likelihood")
    return {
        "rows": len(keep),
        "distinct": observed.shape[0],
        "target_entropy": h_y,
        "attribute_entropy": h_x,
        "information_gain": ig,
        "conditional_entropy": h_y - ig,
        "gain_ratio": ig / h_x if h_x > 0 else 0.0,
        "symmetric_uncertainty": normalized_mutual_info_score(
            ys, xs, average_method="arithmetic"
        ),
        "g_statistic": float(g),
        "p_value": float(p),
        "dof": int(dof),
    }


METRICS = ("target_entropy", "attribute_entropy", "information_gain", "conditional_entropy",
           "gain_ratio", "symmetric_uncertainty", "g_statistic", "p_value")


@pytest.fixture
def con() -> Iterator[duckdb.DuckDBPyConnection]:
    connection = duckdb.connect()
    yield connection
    connection.close()


@pytest.mark.slow
@pytest.mark.parametrize("missing", ["category", "drop"])
@pytest.mark.parametrize("seed", [1, 2, 3, 4, 5, 6])
def test_metrics_match_scipy_and_sklearn(con: duckdb.DuckDBPyConnection, seed: int,
                                         missing: str) -> None:
    columns = random_table(seed)
    load(con, "t", columns)
    ranking = bitsift.rank(con, target="y", table="t", missing=missing)
    y = columns["y"][1]
    present = [v for v in y if v is not None]
    assert ranking.rows == len(present)
    assert ranking.rows_excluded == len(y) - len(present)
    assert ranking.classes == len(set(present))
    whole_h_y = float(stats.entropy(np.bincount(codes(present)), base=2))
    assert close(ranking.target_entropy, whole_h_y)
    assert {a.attribute for a in ranking.attributes} == set(columns) - {"y"}
    disagreements = []
    for scored in ranking.attributes:
        expected = oracle(columns[scored.attribute][1], y, missing)
        assert scored.kind == "categorical"
        assert scored.rows == expected["rows"], scored.attribute
        assert scored.distinct == expected["distinct"], scored.attribute
        assert scored.dof == expected["dof"], scored.attribute
        for metric in METRICS:
            got = getattr(scored, metric)
            if not close(got, expected[metric]):
                disagreements.append((scored.attribute, metric, got, expected[metric]))
        if missing == "category":
            # Without dropping, every attribute sees every row with a target.
            assert close(scored.target_entropy, whole_h_y)
    assert disagreements == []


def test_missing_modes_differ_only_where_nulls_are(con: duckdb.DuckDBPyConnection) -> None:
    columns = random_table(11)
    load(con, "t", columns)
    kept = bitsift.rank(con, target="y", table="t", missing="category")
    dropped = bitsift.rank(con, target="y", table="t", missing="drop")
    y = columns["y"][1]
    for name, (_, values) in columns.items():
        if name == "y":
            continue
        has_null = any(v is None and t is not None for v, t in zip(values, y, strict=True))
        a, b = kept[name], dropped[name]
        if has_null:
            assert b.rows < a.rows and b.distinct == a.distinct - 1, name
        else:
            assert (a.rows, a.distinct) == (b.rows, b.distinct), name
            assert a.information_gain == pytest.approx(b.information_gain, abs=1e-12), name


def test_constant_and_single_value_attributes(con: duckdb.DuckDBPyConnection) -> None:
    # Cardinality 1 (with and without NULLs): H(X) = 0, IG = 0, gain ratio reported as 0.
    n = 400
    rng = np.random.default_rng(5)
    y = [f"c{int(v)}" for v in rng.choice(3, size=n, p=[0.8, 0.15, 0.05])]
    columns = {
        "y": ("VARCHAR", y),
        "same": ("BIGINT", [7] * n),
        "same_or_null": ("BIGINT", [7 if i % 4 else None for i in range(n)]),
    }
    load(con, "t", columns)
    for missing in ("category", "drop"):
        ranking = bitsift.rank(con, target="y", table="t", missing=missing)
        same = ranking["same"]
        assert (same.distinct, same.gain_ratio, same.attribute_entropy) == (1, 0.0, 0.0)
        # Not exactly 0: the SQL subtracts two differently computed forms of H(Y) (reported).
        assert same.information_gain == pytest.approx(0.0, abs=1e-12)
        assert same.p_value == 1.0 and same.dof == 0
        assert "constant" in same.flags
        expected = oracle(columns["same_or_null"][1], y, missing)
        got = ranking["same_or_null"]
        assert got.distinct == expected["distinct"] == (2 if missing == "category" else 1)
        for metric in METRICS:
            assert close(getattr(got, metric), expected[metric]), (missing, metric)


AWKWARD_NAMES = ['select', 'a"b', "x y", "Ünïcödé", "group", "it's", "1st"]


@pytest.mark.slow
@pytest.mark.parametrize("target_type", ["BIGINT", "BOOLEAN", "VARCHAR"])
def test_awkward_names_and_target_types(con: duckdb.DuckDBPyConnection,
                                        target_type: str) -> None:
    # Reserved words, quotes and spaces in names; integer, boolean and text targets.
    rng = np.random.default_rng(len(target_type))
    n = 900
    n_classes = 2 if target_type == "BOOLEAN" else 4
    y_codes = rng.choice(n_classes, size=n, p=np.full(n_classes, 1 / n_classes))
    convert = {"BIGINT": int, "BOOLEAN": bool, "VARCHAR": lambda c: f"v{c}"}[target_type]
    y = [None if i % 17 == 0 else convert(int(c)) for i, c in enumerate(y_codes)]
    columns: dict[str, tuple[str, list[Any]]] = {"the target": (target_type, y)}
    for k, name in enumerate(AWKWARD_NAMES):
        card = 2 + 3 * k
        codes_k = np.where(rng.random(n) < 0.5, (y_codes + k) % card, rng.integers(0, card, n))
        columns[name] = ("BIGINT", [None if (i + k) % 11 == 0 else int(c)
                                    for i, c in enumerate(codes_k)])
    load(con, "odd table", columns)
    for missing in ("category", "drop"):
        ranking = bitsift.rank(con, target="the target", table="odd table", missing=missing)
        assert ranking.target == "the target" and ranking.table == "odd table"
        assert {a.attribute for a in ranking.attributes} == set(AWKWARD_NAMES)
        for scored in ranking.attributes:
            expected = oracle(columns[scored.attribute][1], y, missing)
            assert scored.distinct == expected["distinct"]
            for metric in METRICS:
                assert close(getattr(scored, metric), expected[metric]), (scored.attribute,
                                                                          metric)
