"""The NumPy reference itself, and ``bitsift.check`` that compares the database with it."""

from __future__ import annotations

import math
from collections.abc import Iterator

import duckdb
import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import mutual_info_score

import bitsift
from bitsift.engines.sources import parse_table_name
from bitsift.run import reference
from bitsift.run.api import _compare, make_options
from bitsift.spec.rankspec import resolve
from bitsift.spec.schema import Column


def test_entropy_bits_by_hand() -> None:
    assert reference.entropy_bits([9, 5]) == pytest.approx(
        -(9 / 14) * math.log2(9 / 14) - (5 / 14) * math.log2(5 / 14), abs=1e-15)
    assert reference.entropy_bits([4, 0, 4]) == 1.0  # 0·log 0 = 0
    assert reference.entropy_bits([7]) == 0.0
    assert reference.entropy_bits([]) == 0.0
    assert reference.entropy_bits([1, 1, 1, 1]) == 2.0


def test_metrics_of_a_hand_table() -> None:
    # Outlook against PlayTennis from Mitchell (1997), Table 3.2: [yes, no] per value.
    m = reference.metrics([[2, 3], [4, 0], [3, 2]])
    h_y = -(9 / 14) * math.log2(9 / 14) - (5 / 14) * math.log2(5 / 14)
    h_sunny = -(2 / 5) * math.log2(2 / 5) - (3 / 5) * math.log2(3 / 5)
    ig = h_y - 10 / 14 * h_sunny
    h_x = -2 * (5 / 14) * math.log2(5 / 14) - (4 / 14) * math.log2(4 / 14)
    assert m["information_gain"] == pytest.approx(ig, abs=1e-14)
    assert m["attribute_entropy"] == pytest.approx(h_x, abs=1e-14)
    assert m["gain_ratio"] == pytest.approx(ig / h_x, abs=1e-14)
    assert m["symmetric_uncertainty"] == pytest.approx(2 * ig / (h_x + h_y), abs=1e-14)
    assert m["g_statistic"] == pytest.approx(2 * 14 * math.log(2) * ig, rel=1e-14)
    assert (m["dof"], m["distinct"], m["classes"], m["rows"]) == (2, 3, 2, 14)
    assert m["p_value"] == pytest.approx(stats.chi2.sf(m["g_statistic"], 2), rel=1e-14)


def test_metrics_ignore_empty_rows_and_columns() -> None:
    padded = reference.metrics([[2, 0, 3], [0, 0, 0], [4, 0, 0], [3, 0, 2]])
    plain = reference.metrics([[2, 3], [4, 0], [3, 2]])
    assert padded == plain
    with pytest.raises(ValueError, match="empty"):
        reference.metrics([[0, 0], [0, 0]])


@pytest.mark.parametrize("seed", range(5))
def test_metrics_agree_with_scipy_and_sklearn(seed: int) -> None:
    rng = np.random.default_rng(seed)
    x = rng.integers(0, int(rng.integers(1, 30)), size=500)
    y = (x * 3 + rng.integers(0, 3, size=500)) % int(rng.integers(2, 6))
    table = reference.contingency(x.tolist(), y.tolist())
    m = reference.metrics(table)
    assert m["information_gain"] == pytest.approx(mutual_info_score(y, x) / math.log(2),
                                                  abs=1e-12)
    assert m["target_entropy"] == pytest.approx(stats.entropy(np.bincount(y), base=2),
                                                abs=1e-12)
    if table.shape[0] > 1:
        g, p, dof, _ = stats.chi2_contingency(table, correction=False,
                                              lambda_="log-likelihood")
        assert (m["g_statistic"], m["p_value"], m["dof"]) == (
            pytest.approx(g, rel=1e-10), pytest.approx(p, abs=1e-12), dof)


def test_contingency_missing_values() -> None:
    x = ["a", None, "a", "b", None, "b", float("nan")]
    y = ["p", "q", None, "q", "p", "q", "p"]
    category = reference.contingency(x, y, "category")
    # Row order: values in order of appearance (a, NULL, b, NaN); the row with y NULL is gone.
    assert category.tolist() == [[1, 0], [1, 1], [0, 2], [1, 0]]
    dropped = reference.contingency(x, y, "drop")
    assert dropped.tolist() == [[1, 0], [0, 2], [1, 0]]


def test_bin_values_match_the_sql_case_expression() -> None:
    cuts = [-1.5, 0.0, 2.25]
    values = [-math.inf, -2.0, -1.5, -1.0, 0.0, 1e-300, 2.25, 2.5, math.inf, math.nan, None]
    binned = reference.bin_values(values, cuts)
    assert binned == [0, 0, 1, 1, 2, 2, 3, 3, 3, 3, None]
    # The same CASE the ranking statement uses (cuts in ascending order, ELSE the last bin).
    with duckdb.connect() as con:
        rows = con.execute(
            "SELECT CASE WHEN v IS NULL THEN NULL WHEN v < -1.5 THEN 0 WHEN v < 0.0 THEN 1 "
            "WHEN v < 2.25 THEN 2 ELSE 3 END FROM unnest(?::DOUBLE[]) WITH ORDINALITY AS "
            "u(v, k) ORDER BY k",
            [values],
        ).fetchall()
    assert [r[0] for r in rows] == binned


@pytest.fixture
def con() -> Iterator[duckdb.DuckDBPyConnection]:
    connection = duckdb.connect()
    connection.execute(
        "CREATE TABLE t AS SELECT i % 6 AS a, CASE WHEN i % 9 = 0 THEN NULL ELSE i % 4 END AS b, "
        "(i * 7919) % 1000 / 7.0 AS v, CASE WHEN i % 13 = 0 THEN NULL "
        "WHEN (i % 6 + i % 4) % 3 = 0 THEN 'x' WHEN i % 5 = 0 THEN 'y' ELSE 'z' END AS c "
        "FROM range(3000) r(i)"
    )
    yield connection
    connection.close()


@pytest.mark.slow
@pytest.mark.parametrize("missing", ["category", "drop"])
def test_check_agrees_on_the_whole_table(con: duckdb.DuckDBPyConnection, missing: str) -> None:
    report = bitsift.check(con, target="c", table="t", missing=missing)
    assert report.whole_table and report.sample_rows == 3000
    assert report.ok
    assert set(report.differences) == set(bitsift.run.api.METRICS_CHECKED)
    assert max(report.differences.values()) <= 1e-9
    assert {a.attribute for a in report.ranking.attributes} == {"a", "b", "v"}
    assert report.ranking["v"].kind == "numeric"


def test_check_on_a_sample_is_informative_only(con: duckdb.DuckDBPyConnection) -> None:
    report = bitsift.check(con, target="c", table="t", sample_rows=500)
    assert not report.whole_table and report.sample_rows == 500
    assert report.ok  # a sample never fails the check
    assert max(report.differences.values()) > 0


def test_check_detects_a_disagreement(con: duckdb.DuckDBPyConnection) -> None:
    # Corrupt one metric of a genuine ranking by 1e-6: the comparison must notice.
    ranking = bitsift.rank(con, target="c", table="t")
    rows = con.execute("SELECT c, a, b, v FROM t").fetchall()
    data = {name: [r[i] for r in rows] for i, name in enumerate(["c", "a", "b", "v"])}
    columns = [Column("a", "integer"), Column("b", "integer"), Column("v", "float"),
               Column("c", "text")]
    spec = resolve(make_options("c"), columns, parse_table_name("t", "duckdb"), "t", "duckdb")
    assert _compare(ranking, spec, data, whole=True).ok
    ranking["a"].information_gain += 1e-6
    report = _compare(ranking, spec, data, whole=True)
    assert not report.ok
    assert report.differences["information_gain"] == pytest.approx(1e-6, rel=1e-6)


def test_check_accepts_the_p_values_rounding_and_sees_a_wrong_one(
        con: duckdb.DuckDBPyConnection) -> None:
    """bitsift's chi-square tail is within 1e-12 relative of SciPy's (tests/test_chisquare.py):
    the check accepts that, and still fails a p-value off by 1e-6."""
    ranking = bitsift.rank(con, target="c", table="t")
    rows = con.execute("SELECT c, a, b, v FROM t").fetchall()
    data = {name: [r[i] for r in rows] for i, name in enumerate(["c", "a", "b", "v"])}
    columns = [Column("a", "integer"), Column("b", "integer"), Column("v", "float"),
               Column("c", "text")]
    spec = resolve(make_options("c"), columns, parse_table_name("t", "duckdb"), "t", "duckdb")
    report = _compare(ranking, spec, data, whole=True)
    assert report.ok and report.differences["p_value"] <= 1e-12
    scored = ranking["b"]  # p 1.9e-15: a tail, where only an absolute test is not noise
    assert scored.p_value is not None
    scored.p_value *= 1 + 1e-12
    assert _compare(ranking, spec, data, whole=True).ok
    scored.p_value += 1e-6
    report = _compare(ranking, spec, data, whole=True)
    assert not report.ok
    assert report.differences["p_value"] == pytest.approx(1e-6, rel=1e-3)
