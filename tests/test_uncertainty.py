"""The uncertainty of each gain (issue 18): standard error, bias-corrected gain, interval and
rank range, computed in the ranking statement, from counts in the client and by the NumPy
reference.

Sources of the formulas: se = sqrt((K - J²) / (n + 1)) with K = Σ p·log2²(p_xy / (p_x p_y)),
J = IG (Hutter 2002, "Distribution of mutual information", NIPS 14; Hutter & Zaffalon 2005,
Comput. Stat. Data Anal. 48); the first-order bias (r - 1)(c - 1) / (2 n ln 2) of the plug-in
estimate (Miller 1955; Panzeri & Treves 1996, Network 7). The normal quantiles are checked
against scipy.stats.norm.ppf. Tables here are random or invented; no value is recalled.
"""

from __future__ import annotations

import math

import duckdb
import numpy as np
import pytest
from scipy import stats

import bitsift
from bitsift.errors import SpecError
from bitsift.run import api, reference
from bitsift.run.metrics import rank_ranges, table_row, uncertainty
from bitsift.run.result import AttributeScore
from bitsift.spec.rankspec import CONFIDENCE_Z

FIELDS = ("information_gain_se", "information_gain_corrected", "information_gain_low",
          "information_gain_high")
Z95 = CONFIDENCE_Z[0.95]

#: An invented joint distribution of a 3-valued attribute and a 3-class target (rows: values).
JOINT = np.array([[0.20, 0.06, 0.04],
                  [0.05, 0.18, 0.07],
                  [0.05, 0.10, 0.25]])


def true_mutual_information(joint: np.ndarray) -> float:
    """The distribution's mutual information in bits, from its definition."""
    outer = np.outer(joint.sum(axis=1), joint.sum(axis=0))
    return float((joint * np.log2(joint / outer)).sum())


def hand_se(table: list[list[int]]) -> float:
    """se by the definition, in plain Python: K and J over the cells, no NumPy."""
    n = sum(map(sum, table))
    rows = [sum(r) for r in table]
    cols = [sum(c) for c in zip(*table, strict=True)]
    j = k = 0.0
    for i, r in enumerate(table):
        for c, count in enumerate(r):
            if count:
                p = count / n
                ratio = math.log2(p / (rows[i] / n * cols[c] / n))
                j += p * ratio
                k += p * ratio * ratio
    return math.sqrt(max(k - j * j, 0.0) / (n + 1))


def test_z_values_are_the_normal_quantiles() -> None:
    for level, z in CONFIDENCE_Z.items():
        assert z == pytest.approx(float(stats.norm.ppf(1 - (1 - level) / 2)), abs=1e-15)
    assert abs(Z95 - 1.959964) < 1e-6  # the constant


def test_a_hand_computed_table() -> None:
    # 2 x 2, n = 20: computed from the definitions by hand_se() and by the bias formula.
    table = [[8, 2], [3, 7]]
    row = table_row(table)
    assert row is not None
    expected_se = hand_se(table)
    assert row["information_gain_se"] == pytest.approx(expected_se, abs=1e-12)
    ref = reference.metrics(table)
    assert ref["information_gain_se"] == pytest.approx(expected_se, abs=1e-12)
    ig = ref["information_gain"]
    assert ref["information_gain_corrected"] == pytest.approx(ig - 1 / (2 * 20 * math.log(2)))
    se, corrected, low, high = uncertainty(ig, expected_se ** 2 * 21, 20, 2, 2, Z95)
    assert (se, corrected) == (pytest.approx(expected_se, abs=1e-12),
                               pytest.approx(ig - 1 / (40 * math.log(2)), abs=1e-12))
    assert low == pytest.approx(max(corrected - Z95 * se, 0.0), abs=1e-12)
    assert high == pytest.approx(corrected + Z95 * se, abs=1e-12)


def test_counts_path_matches_the_reference_on_random_tables() -> None:
    rng = np.random.default_rng(18)
    for _ in range(300):
        shape = (int(rng.integers(1, 7)), int(rng.integers(1, 5)))
        table = rng.integers(0, 40, size=shape) * (rng.random(shape) > 0.3)
        if table.sum() == 0:
            continue
        row = table_row(table)
        assert row is not None
        ref = reference.metrics(table)
        assert row["information_gain_se"] == pytest.approx(ref["information_gain_se"], abs=1e-9)
        se, corrected, low, high = uncertainty(
            row["information_gain"], row["information_gain_se"] ** 2 * (table.sum() + 1),
            float(table.sum()), row["distinct_values"], row["classes"], Z95)
        for got, key in zip((se, corrected, low, high), FIELDS, strict=True):
            assert got == pytest.approx(ref[key], abs=1e-9), (table.tolist(), key)


def test_a_perfect_predictor_of_balanced_classes_has_no_spread() -> None:
    # Every log ratio is log2(3): K = J² exactly, and the cancellation must not leave a residue.
    table = [[5, 0, 0], [0, 5, 0], [0, 0, 5]]
    row = table_row(table)
    assert row is not None and row["information_gain_se"] < 1e-7
    se, *_ = uncertainty(row["information_gain"], row["information_gain_se"] ** 2 * 16, 15, 3,
                         3, Z95)
    assert se == 0.0


def _random_table(con: duckdb.DuckDBPyConnection, seed: int, rows: int) -> None:
    rng = np.random.default_rng(seed)
    y = rng.integers(0, 3, rows)
    columns = {
        "y": y,
        "strong": (y + rng.integers(0, 2, rows)) % 4,
        "weak": np.where(rng.random(rows) < 0.2, y, rng.integers(0, 3, rows)),
        "noise": rng.integers(0, 6, rows),
        "many": rng.integers(0, 40, rows),
    }
    import pandas as pd
    frame = pd.DataFrame(columns)  # noqa: F841 - read by DuckDB's replacement scan
    con.execute("CREATE TABLE t AS SELECT * FROM frame")


@pytest.mark.parametrize("confidence", [0.90, 0.95, 0.99])
def test_rank_matches_the_reference(confidence: float) -> None:
    con = duckdb.connect()
    _random_table(con, seed=int(confidence * 100), rows=700)
    report = api.check(con, target="y", table="t", confidence=confidence)
    assert report.ok and report.whole_table
    for key in FIELDS:
        assert key in report.differences and report.differences[key] <= 1e-9
    ranking = report.ranking
    data = con.execute("SELECT * FROM t").fetchnumpy()
    for scored in ranking.attributes:
        table = reference.contingency(list(data[scored.attribute]), list(data["y"]))
        want = reference.metrics(table, confidence)
        for key in FIELDS:
            assert getattr(scored, key) == pytest.approx(want[key], abs=1e-9), key
    assert ranking["strong"].rank_low == 1


def test_confidence_widens_the_interval() -> None:
    con = duckdb.connect()
    _random_table(con, seed=4, rows=500)
    widths = []
    for level in (0.90, 0.95, 0.99):
        scored = bitsift.rank(con, target="y", table="t", confidence=level)["strong"]
        assert scored.information_gain_high is not None
        assert scored.information_gain_low is not None
        widths.append(scored.information_gain_high - scored.information_gain_low)
    assert widths[0] < widths[1] < widths[2]


def test_a_confidence_outside_the_list_is_one_problem() -> None:
    with pytest.raises(SpecError, match=r"confidence.*one of 0\.90, 0\.95, 0\.99, not 0\.8"):
        bitsift.rank(duckdb.connect(), target="y", table="t", confidence=0.8)


def test_sort_by_the_corrected_gain() -> None:
    # "many" (40 values) gains more than "weak" by chance; its bias correction is larger.
    con = duckdb.connect()
    _random_table(con, seed=7, rows=400)
    ranking = bitsift.rank(con, target="y", table="t", sort="information_gain_corrected")
    corrected = [a.information_gain_corrected for a in ranking.attributes]
    assert corrected == sorted(corrected, reverse=True)
    assert ranking["many"].information_gain_corrected < 0 < ranking["many"].information_gain


def coverage(tables: list[np.ndarray], truth: float) -> float:
    covered = 0
    for t in tables:
        row = table_row(t)
        assert row is not None
        n = float(t.sum())
        _, _, low, high = uncertainty(row["information_gain"],
                                      row["information_gain_se"] ** 2 * (n + 1), n,
                                      row["distinct_values"], row["classes"], Z95)
        covered += low <= truth <= high
    return covered / len(tables)


def _samples(n: int) -> list[np.ndarray]:
    rng = np.random.default_rng(2026)
    return [rng.multinomial(n, JOINT.ravel()).reshape(JOINT.shape) for _ in range(400)]


def test_the_95_interval_covers_the_true_mutual_information() -> None:
    truth = true_mutual_information(JOINT)
    for n in (300, 1000):
        share = coverage(_samples(n), truth)
        assert 0.90 <= share <= 0.985, (n, share)


@pytest.mark.slow
def test_the_statement_covers_it_too_in_one_statement_per_sample_segment() -> None:
    # 400 samples of 300 rows as segments (--by sample) of one table: the statement's own
    # intervals, one ranking per sample.
    truth = true_mutual_information(JOINT)
    samples = _samples(300)
    xs, ys, ids = [], [], []
    for k, t in enumerate(samples):
        for (i, j), count in np.ndenumerate(t):
            xs += [i] * int(count)
            ys += [j] * int(count)
            ids += [k] * int(count)
    import pandas as pd
    frame = pd.DataFrame({"sample": ids, "x": xs, "y": ys})  # noqa: F841 - DuckDB reads it
    con = duckdb.connect()
    con.execute("CREATE TABLE draws AS SELECT * FROM frame")
    segmented = bitsift.rank(con, target="y", table="draws", by="sample")
    assert isinstance(segmented, bitsift.SegmentedRanking) and len(segmented) == 400
    hits = 0
    for ranking, t in zip(segmented.segments, samples, strict=True):
        scored = ranking["x"]
        assert (scored.rank_low, scored.rank_high) == (1, 1)
        assert scored.information_gain_low is not None
        assert scored.information_gain_high is not None
        hits += scored.information_gain_low <= truth <= scored.information_gain_high
        ref = reference.metrics(t)
        assert scored.information_gain_se == pytest.approx(ref["information_gain_se"], abs=1e-9)
    assert 0.90 <= hits / 400 <= 0.985
    assert hits / 400 == coverage(samples, truth)


def _score(name: str, low: float | None, high: float | None) -> AttributeScore:
    return AttributeScore(attribute=name, kind="categorical", distinct=2, information_gain=0.0,
                          gain_ratio=0.0, symmetric_uncertainty=0.0, conditional_entropy=0.0,
                          attribute_entropy=0.0, g_statistic=0.0, dof=1, p_value=None,
                          information_gain_low=low, information_gain_high=high)


def test_rank_ranges_follow_their_definition() -> None:
    rng = np.random.default_rng(5)
    for _ in range(200):
        k = int(rng.integers(1, 9))
        lows = np.round(rng.random(k) * 0.5, 2)  # rounded: ties and touching ends happen
        highs = lows + np.round(rng.random(k) * 0.3, 2)
        scores = [_score(f"a{i}", float(lo), float(hi))
                  for i, (lo, hi) in enumerate(zip(lows, highs, strict=True))]
        rank_ranges(scores)
        # The definition, vectorised: others strictly above / everyone reaching.
        above = (lows[None, :] > highs[:, None]) & ~np.eye(k, dtype=bool)
        reaching = highs[None, :] >= lows[:, None]
        for i, s in enumerate(scores):
            assert s.rank_low == 1 + int(above[i].sum())
            assert s.rank_high == int(reaching[i].sum())
            assert 1 <= s.rank_low <= s.rank_high <= k


def test_rank_ranges_of_a_small_example() -> None:
    scores = [_score("a", 0.5, 0.7), _score("b", 0.45, 0.55), _score("c", 0.1, 0.2),
              _score("d", None, None)]
    rank_ranges(scores)
    assert [(s.rank_low, s.rank_high) for s in scores] == [(1, 2), (1, 2), (3, 3),
                                                           (None, None)]


def test_rank_ranges_are_computed_within_each_segment() -> None:
    con = duckdb.connect()
    con.execute("CREATE TABLE t AS SELECT i % 2 AS seg, i % 3 AS a, (i * 7) % 5 AS b, "
                "CASE WHEN i % 2 = 0 THEN i % 3 = 0 ELSE (i * 7) % 5 < 2 END AS y "
                "FROM range(600) r(i)")
    segmented = bitsift.rank(con, target="y", table="t", by="seg")
    assert isinstance(segmented, bitsift.SegmentedRanking)
    even, odd = segmented.segments
    assert (even["a"].rank_low, even["a"].rank_high) == (1, 1)
    assert (odd["b"].rank_low, odd["b"].rank_high) == (1, 1)
    assert (even["b"].rank_low, odd["a"].rank_low) == (2, 2)


def test_rank_ranges_count_every_attribute_before_the_limit() -> None:
    con = duckdb.connect()
    _random_table(con, seed=9, rows=600)
    full = bitsift.rank(con, target="y", table="t")
    top = bitsift.rank(con, target="y", table="t", limit=1)
    assert top.attributes[0].to_dict() == full.attributes[0].to_dict()
    assert max(a.rank_high or 0 for a in full.attributes) == len(full.attributes)


def _weighted(con: duckdb.DuckDBPyConnection) -> None:
    con.execute("CREATE TABLE w AS SELECT i % 4 AS a, (i * 3) % 7 AS b, i % 3 = 0 AS y, "
                "CAST(1 + (i % 5) AS DOUBLE) AS weight FROM range(300) r(i) "
                "WHERE i % 11 <> 0 OR i % 4 = 1")
    con.execute("CREATE TABLE expanded AS SELECT w.* EXCLUDE (weight) FROM w, "
                "range(1, 6) k(j) WHERE j <= w.weight")


def test_integer_weights_are_frequencies() -> None:
    con = duckdb.connect()
    _weighted(con)
    weighted = bitsift.rank(con, target="y", table="w", weight="weight")
    repeated = bitsift.rank(con, target="y", table="expanded")
    assert isinstance(weighted, bitsift.Ranking) and isinstance(repeated, bitsift.Ranking)
    for a in repeated.attributes:
        b = weighted[a.attribute]
        for key in (*FIELDS, "rank_low", "rank_high"):
            assert getattr(b, key) == pytest.approx(getattr(a, key), abs=1e-12), key


def test_fractional_weights_have_no_interval_and_say_so() -> None:
    con = duckdb.connect()
    _weighted(con)
    con.execute("UPDATE w SET weight = weight + 0.5 WHERE a = 2")
    ranking = bitsift.rank(con, target="y", table="w", weight="weight")
    for a in ranking.attributes:
        assert a.information_gain_se is None and a.information_gain_low is None
        assert a.information_gain_high is None and (a.rank_low, a.rank_high) == (None, None)
        assert isinstance(a.information_gain_corrected, float)
    assert any("intervals" in note for note in ranking.notes)
    # The pasted statement says the same: NULL where no interval is reported.
    rows = con.execute(bitsift.statement(con, target="y", table="w", weight="weight")).fetchall()
    assert all(r[-6] is None and r[-1] is None for r in rows)


def test_an_attribute_with_nothing_measured_has_no_interval() -> None:
    con = duckdb.connect()
    con.execute("CREATE TABLE t AS SELECT i % 2 AS a, CAST(NULL AS INTEGER) AS gone, "
                "i % 3 = 0 AS y FROM range(50) r(i)")
    ranking = bitsift.rank(con, target="y", table="t", missing="drop")
    gone = ranking["gone"]
    assert gone.information_gain_se is None and gone.rank_low is None
    assert gone.information_gain_corrected == 0.0
    assert (ranking["a"].rank_low, ranking["a"].rank_high) == (1, 1)


@pytest.mark.parametrize("rows", [1, 2])
def test_tiny_tables(rows: int) -> None:
    con = duckdb.connect()
    con.execute(f"CREATE TABLE t AS SELECT i AS a, 'k' AS c, i = 0 AS y FROM range({rows}) r(i)")
    if rows == 1:
        with pytest.raises(bitsift.BitsiftError, match="single class"):
            bitsift.rank(con, target="y", table="t")
        return
    ranking = bitsift.rank(con, target="y", table="t", categorical="a")
    a, c = ranking["a"], ranking["c"]
    assert a.information_gain == 1.0 and a.information_gain_se == 0.0
    assert a.information_gain_corrected == pytest.approx(1 - 1 / (4 * math.log(2)))
    assert (c.information_gain_se, c.information_gain_corrected) == (0.0, 0.0)
    assert (a.rank_low, a.rank_high, c.rank_low, c.rank_high) == (1, 1, 2, 2)


def test_non_finite_and_case_twin_columns() -> None:
    con = duckdb.connect()
    con.execute('CREATE TABLE t AS SELECT CASE i % 4 WHEN 0 THEN \'nan\'::DOUBLE WHEN 1 '
                "THEN 'inf'::DOUBLE WHEN 2 THEN NULL ELSE 1.5 END AS v, i % 2 AS \"Ab\", "
                "i % 3 AS \"ab\", i % 2 = 0 AS y FROM range(400) r(i)")
    ranking = bitsift.rank(con, target="y", table="t", categorical="v")
    for scored in ranking.attributes:
        for key in FIELDS:
            value = getattr(scored, key)
            assert value is not None and math.isfinite(value), (scored.attribute, key)
    assert ranking["Ab"].rank_low == 1 and ranking["Ab"].information_gain == 1.0


def test_same_bytes_in_any_row_order() -> None:
    con = duckdb.connect()
    _random_table(con, seed=12, rows=900)
    con.execute("CREATE TABLE shuffled AS SELECT * FROM t ORDER BY hash(strong, noise, many, y)")
    one = bitsift.rank(con, target="y", table="t").to_dict()
    other = bitsift.rank(con, target="y", table="shuffled").to_dict()
    one.pop("table"), other.pop("table")
    assert one == other


def test_no_extra_statement() -> None:
    # Categorical attributes only: the ranking statement is one statement, reading the table
    # once; counted in the client (DuckDB's run policy), one bare GROUP BY per attribute and
    # nothing more: the uncertainty comes from the same counts.
    from helpers import rank_with

    con = duckdb.connect()
    _random_table(con, seed=1, rows=100)
    ranking = rank_with(con, "t", "y", policy={"run_counts": "statement"})
    assert len(ranking.statements) == 1
    text = str(ranking.statements[0])
    assert text.count('"t" AS src') == 1 and text.count(" AS src") == 1
    client = bitsift.rank(con, target="y", table="t")
    assert len(client.statements) == 4
    for text, attribute in zip(client.statements, ("strong", "weak", "noise", "many"),
                               strict=True):
        assert text.count(" AS src") == 1 and f'GROUP BY src."{attribute}", src."y"' in text
    assert all(getattr(a, key) is not None for a in client.attributes for key in FIELDS)
