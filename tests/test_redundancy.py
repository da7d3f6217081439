"""Pairwise redundancy (``bitsift redundancy``): mutual information between attributes, in SQL.

Oracles, independent of bitsift's SQL and of :mod:`bitsift.run.reference`:
- ``sklearn.metrics.mutual_info_score`` (scikit-learn; natural logs, converted to bits) on the
  same rows, with numeric columns binned at the ranking's cut points;
- ``scipy.stats.entropy(counts, base=2)`` for H(Xi) and H(Xj), hence the symmetric uncertainty
  2·I / (H(Xi) + H(Xj)).
The table is helpers' ``random_dataset`` (NULLs, case and trailing-space variants, skewed
classes, floats and decimals to bin), loaded into DuckDB, SQLite, PostgreSQL and MariaDB.
"""

from __future__ import annotations

import dataclasses
import datetime
import json
import math
from collections.abc import Sequence
from typing import Any

import duckdb
import pytest
import sqlglot
from click.testing import CliRunner
from helpers import (
    NUMERIC_COLUMNS,
    PASTE_DIALECTS,
    Dataset,
    fill_duckdb,
    invalid_constructs,
    loaded,
    random_dataset,
)
from scipy.stats import entropy
from sklearn.metrics import mutual_info_score

from bitsift.analysis.redundancy import (
    PAIR_KEYS,
    RedundancyMatrix,
    all_pairs,
    measure_matrix,
    pairs_statement,
    redundancy,
)
from bitsift.cli import cli
from bitsift.engines.sources import parse_table_name
from bitsift.errors import SpecError
from bitsift.run import reference
from bitsift.run.api import make_options, run_ranking
from bitsift.run.result import Ranking
from bitsift.run.session import Session
from bitsift.spec.rankspec import resolve
from bitsift.spec.schema import Column
from bitsift.sql.dialects import capabilities

ATTRIBUTES = ("word", "level", "score", "ratio", "noise", "price")
#: Count strategies each executed engine can run (no GROUPING SETS on SQLite and MariaDB).
STRATEGIES: dict[str, tuple[str, ...]] = {
    "duckdb": ("grouping_sets", "union_all", "cross_join"),
    "sqlite": ("union_all", "cross_join"),
    "postgres": ("grouping_sets", "union_all"),
    "mariadb": ("union_all",),
}
TOLERANCE = 1e-9


# --- the oracle --------------------------------------------------------------------------------

def codes(values: Sequence[Any]) -> list[int]:
    """Integer labels for scikit-learn; NULL is one more label (like every engine's GROUP BY)."""
    seen: dict[Any, int] = {}
    return [seen.setdefault(("null",) if v is None else ("value", v), len(seen)) for v in values]


def binned(dataset: Dataset, ranking: Ranking, name: str) -> list[Any]:
    """The attribute's values as the ranking saw them: numeric ones cut at its cut points."""
    values = dataset.column(name)
    cuts = ranking[name].cuts
    return reference.bin_values(values, cuts) if cuts is not None else values


def oracle_pair(dataset: Dataset, ranking: Ranking, first: str, second: str,
                missing: str, target: str = "y",
                keep: Sequence[bool] | None = None) -> dict[str, float]:
    """I (bits) from scikit-learn, entropies from scipy, on the rows the pair is measured on
    (``keep``: the rows a --where predicate lets through)."""
    kept = keep if keep is not None else [True] * len(dataset.rows)
    rows = [
        (a, b) for a, b, y, k in zip(binned(dataset, ranking, first),
                                     binned(dataset, ranking, second),
                                     dataset.column(target), kept, strict=True)
        if k and y is not None and (missing == "category" or (a is not None and b is not None))
    ]
    if not rows:
        return {"mi": 0.0, "su": 0.0, "h1": 0.0, "h2": 0.0, "rows": 0}
    left, right = codes([a for a, _ in rows]), codes([b for _, b in rows])
    mi = mutual_info_score(left, right) / math.log(2)  # nats -> bits
    h1 = float(entropy(list(_counts(left).values()), base=2))
    h2 = float(entropy(list(_counts(right).values()), base=2))
    su = 2 * mi / (h1 + h2) if h1 + h2 > 0 else 0.0
    return {"mi": mi, "su": su, "h1": h1, "h2": h2, "rows": len(rows)}


def _counts(labels: Sequence[int]) -> dict[int, int]:
    counts: dict[int, int] = {}
    for label in labels:
        counts[label] = counts.get(label, 0) + 1
    return counts


def assert_matrix_matches_oracle(matrix: RedundancyMatrix, ranking: Ranking, dataset: Dataset,
                                 missing: str, context: str,
                                 keep: Sequence[bool] | None = None) -> None:
    expected_pairs = len(matrix.attributes) * (len(matrix.attributes) - 1) // 2
    assert len(matrix.pairs) == expected_pairs, context
    for pair in matrix.pairs.values():
        want = oracle_pair(dataset, ranking, pair.first, pair.second, missing, keep=keep)
        where = f"{context} {pair.first} x {pair.second}"
        assert pair.rows == want["rows"], where
        assert abs(pair.mutual_information - want["mi"]) <= TOLERANCE, (
            f"{where}: I = {pair.mutual_information!r}, scikit-learn {want['mi']!r}")
        assert abs(pair.symmetric_uncertainty - want["su"]) <= TOLERANCE, f"{where}: SU"
        assert abs(pair.first_entropy - want["h1"]) <= TOLERANCE, f"{where}: H(first)"
        assert abs(pair.second_entropy - want["h2"]) <= TOLERANCE, f"{where}: H(second)"


def measure_with(source: Any, table: str, target: str, *, strategy: str | None = None,
                 batch_pairs: int = 64, **options: Any) -> tuple[Ranking, RedundancyMatrix, int]:
    """Rank and measure every pair, with the dialect's count strategy overridden; also the
    number of pair statements sent."""
    with Session.open(source, table) as session:
        engine = session.engine
        if strategy:
            engine.caps = dataclasses.replace(engine.caps, count_strategy=strategy)
        spec = session.resolve(make_options(target, **options))
        ranking = run_ranking(engine, spec)
        before = len(engine.statements)
        matrix = measure_matrix(engine, spec, ranking, batch_pairs=batch_pairs)
        return ranking, matrix, len(engine.statements) - before


# --- against scikit-learn, on every engine -----------------------------------------------------

@pytest.mark.slow
@pytest.mark.parametrize(("engine", "strategy"),
                         [(e, s) for e, ss in STRATEGIES.items() for s in ss])
def test_every_pair_equals_scikit_learn(engine: str, strategy: str,
                                        request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=11, rows=900)
    with loaded(engine, dataset, request) as where:
        for missing in ("category", "drop"):
            ranking, matrix, _ = measure_with(where.source, where.table, "y", strategy=strategy,
                                              missing=missing, attributes=list(ATTRIBUTES),
                                              bins=5)
            assert set(matrix.attributes) == set(ATTRIBUTES)
            assert {s.attribute for s in ranking.attributes if s.cuts} == set(NUMERIC_COLUMNS)
            assert_matrix_matches_oracle(matrix, ranking, dataset, missing,
                                         f"{engine}/{strategy}/{missing}")


@pytest.mark.slow
@pytest.mark.postgres
def test_duckdb_and_postgres_agree_pair_by_pair(request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=12, rows=700)
    results = {}
    for engine in ("duckdb", "postgres"):
        with loaded(engine, dataset, request) as where:
            results[engine] = measure_with(where.source, where.table, "y", missing="drop",
                                           bins=4)
    (_, duck, _), (_, pg, _) = results["duckdb"], results["postgres"]
    assert set(duck.pairs) == set(pg.pairs) and len(duck.pairs) == 15
    for key, pair in duck.pairs.items():
        other = pg.pairs[key]
        assert pair.rows == other.rows, key
        assert abs(pair.mutual_information - other.mutual_information) <= TOLERANCE, key
        assert abs(pair.symmetric_uncertainty - other.symmetric_uncertainty) <= TOLERANCE, key
    # Not all zero: the comparison means something.
    assert max(p.mutual_information for p in duck.pairs.values()) > 0.01


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_where_limits_the_rows_of_every_pair(engine: str,
                                             request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=15, rows=600)
    # SQL's three-valued logic: a NULL level with a word present is not kept.
    keep = [(level is not None and level != 3) or word is None
            for level, word in zip(dataset.column("level"), dataset.column("word"), strict=True)]
    with loaded(engine, dataset, request) as where:
        ranking, matrix, _ = measure_with(where.source, where.table, "y", missing="drop",
                                          where="level <> 3 OR word IS NULL", bins=4,
                                          attributes="word,level,score,noise")
    assert_matrix_matches_oracle(matrix, ranking, dataset, "drop", f"{engine}/where", keep)
    assert max(p.rows for p in matrix.pairs.values()) < sum(keep)  # NULLs dropped per pair


@pytest.mark.slow
def test_batches_give_the_same_matrix_in_more_statements(
        request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=13, rows=400)
    with loaded("duckdb", dataset, request) as where:
        _, whole, sent_whole = measure_with(where.source, where.table, "y")
        _, split, sent_split = measure_with(where.source, where.table, "y", batch_pairs=4)
    assert (sent_whole, sent_split) == (1, math.ceil(15 / 4))
    assert set(whole.pairs) == set(split.pairs)
    for key, pair in whole.pairs.items():  # summation order may differ: compare to 1e-9
        other = split.pairs[key]
        assert (pair.first, pair.second, pair.rows) == (other.first, other.second, other.rows)
        assert abs(pair.mutual_information - other.mutual_information) <= TOLERANCE, key


# --- known values ------------------------------------------------------------------------------

@pytest.fixture
def shapes() -> duckdb.DuckDBPyConnection:
    """Attributes with known mutual information: a copy, a coarsening, an independent one."""
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE t AS SELECT i % 4 AS a, i % 4 AS a_copy, i % 2 AS half, i % 3 AS third, "
        "'k' AS constant, CASE WHEN i % 5 = 0 THEN NULL ELSE i % 4 END AS holes, "
        "CASE WHEN i % 5 = 0 THEN i % 4 END AS only_holes, i % 2 = 0 AS y FROM range(120) r(i)"
    )
    return con


def test_known_mutual_information(shapes: duckdb.DuckDBPyConnection) -> None:
    m = redundancy(shapes, target="y", table="t", include_flagged=True).matrix
    # I(X; X) = H(X) = log2 4 = 2 bits, SU 1; a coarsening shares all of its own entropy
    # (I(a; a mod 2) = H(a mod 2) = 1 bit); 4 and 3 are coprime over 120 rows: independent.
    assert m.mutual_information("a", "a_copy") == pytest.approx(2.0, abs=1e-12)
    assert m.pair("a_copy", "a").symmetric_uncertainty == pytest.approx(1.0, abs=1e-12)
    assert m.mutual_information("half", "a") == pytest.approx(1.0, abs=1e-12)
    assert m.mutual_information("a", "third") == pytest.approx(0.0, abs=1e-12)
    assert m.mutual_information("constant", "a") == 0.0
    assert m.pair("constant", "a").symmetric_uncertainty == 0.0


@pytest.mark.slow
def test_missing_drop_measures_rows_where_both_are_present(
        shapes: duckdb.DuckDBPyConnection) -> None:
    kept = redundancy(shapes, target="y", table="t", missing="category",
                      include_flagged=True).matrix
    dropped = redundancy(shapes, target="y", table="t", missing="drop", include_flagged=True).matrix
    assert kept.pair("holes", "a").rows == 120
    assert dropped.pair("holes", "a").rows == 96  # 1 in 5 rows is NULL
    # Dropped, holes is a on the rows kept: I = H(a on those rows) = 2 bits (24 of each value).
    assert dropped.mutual_information("holes", "a") == pytest.approx(2.0, abs=1e-12)
    assert kept.mutual_information("holes", "a") < 2.0
    # No row has both: nothing measured, nothing shared.
    nothing = dropped.pair("holes", "only_holes")
    assert (nothing.rows, nothing.mutual_information) == (0, 0.0)


def test_limit_pairs_only_the_top_attributes(shapes: duckdb.DuckDBPyConnection) -> None:
    result = redundancy(shapes, target="y", table="t", limit=3, include_flagged=True)
    assert len(result.matrix.attributes) == 3
    assert len(result.matrix.pairs) == 3
    assert list(result.matrix.attributes) == [s.attribute for s in result.ranking.attributes]


def test_matrix_is_symmetric_with_an_empty_diagonal(shapes: duckdb.DuckDBPyConnection) -> None:
    m = redundancy(shapes, target="y", table="t", attributes="a,half,third",
                   include_flagged=True).matrix
    table = m.matrix()
    assert [row[i] for i, row in enumerate(table)] == [None, None, None]
    assert all(table[i][j] == table[j][i] for i in range(3) for j in range(3))
    assert m.matrix("symmetric_uncertainty")[0][1] == m.pair("a", "half").symmetric_uncertainty
    with pytest.raises(SpecError, match="unknown pair metric"):
        m.matrix("gini")


@pytest.mark.slow
def test_dates_are_paired_as_the_ranking_measured_them() -> None:
    """A date ranked by its month (--date-part) or binned as epoch seconds (--numeric)."""
    start = datetime.date(2025, 1, 1)
    days = [start + datetime.timedelta(days=i) for i in range(365)]
    con = duckdb.connect()
    con.execute("CREATE TABLE t (d DATE, q INTEGER, y INTEGER)")
    con.executemany("INSERT INTO t VALUES (?, ?, ?)",
                    [(d, (d.month - 1) // 3, i % 2) for i, d in enumerate(days)])
    quarter = [(d.month - 1) // 3 for d in days]
    by_month = redundancy(con, target="y", table="t", date_part="d=month",
                          include_flagged=True).matrix
    # scikit-learn on the months themselves: I(month; quarter) = H(quarter).
    want = mutual_info_score([d.month for d in days], quarter) / math.log(2)
    assert by_month.mutual_information("d", "q") == pytest.approx(want, abs=TOLERANCE)
    binned_dates = redundancy(con, target="y", table="t", numeric="d", bins=4, include_flagged=True)
    cuts = binned_dates.ranking["d"].cuts
    assert cuts is not None and len(cuts) == 3
    epoch = [(d - datetime.date(1970, 1, 1)).days * 86400 for d in days]
    want = mutual_info_score(reference.bin_values(epoch, cuts), quarter) / math.log(2)
    got = binned_dates.matrix.mutual_information("d", "q")
    assert got == pytest.approx(want, abs=TOLERANCE) and 1.5 < got < 2


def test_odd_column_names_are_quoted() -> None:
    con = duckdb.connect()
    con.execute('CREATE TABLE "my table" ("sel""ect" INTEGER, "a b" VARCHAR, "y" VARCHAR)')
    con.execute("""INSERT INTO "my table" SELECT i % 3, CAST(i % 3 AS VARCHAR) || '''',
                   CAST(i % 2 AS VARCHAR) FROM range(30) r(i)""")
    m = redundancy(con, target="y", table='"my table"', include_flagged=True).matrix
    assert m.mutual_information('sel"ect', "a b") == pytest.approx(math.log2(3), abs=1e-12)


# --- the statement -----------------------------------------------------------------------------

def _spec(missing: str = "category") -> Any:
    columns = [Column("y", "text"), Column("word", "text"), Column("level", "integer"),
               Column("score", "float")]
    table = parse_table_name("bitsift_golden", "duckdb")
    return resolve(make_options("y", missing=missing, where="level <> 3"), columns, table,
                   "bitsift_golden", "duckdb")


@pytest.mark.slow
@pytest.mark.parametrize("dialect", PASTE_DIALECTS)
def test_statement_parses_in_every_dialect_without_its_pitfalls(dialect: str) -> None:
    caps = capabilities(dialect)
    pairs = all_pairs(["word", "level", "score"])
    sql = pairs_statement(_spec("drop"), caps, {"score": [-0.5, 0.5]}, pairs, pretty=True).sql
    assert sqlglot.parse_one(sql, read=caps.sqlglot_dialect) is not None
    assert invalid_constructs(sql, dialect) == []
    assert ("GROUPING SETS" in sql) == (caps.count_strategy == "grouping_sets")


def test_statement_rejects_bad_pairs() -> None:
    spec, caps = _spec(), capabilities("duckdb")
    with pytest.raises(SpecError, match="not attributes of this ranking: nope"):
        pairs_statement(spec, caps, {"score": []}, [("word", "nope")])
    with pytest.raises(SpecError, match="two different"):
        pairs_statement(spec, caps, {"score": []}, [("word", "word")])
    with pytest.raises(SpecError, match="no cut points"):
        pairs_statement(spec, caps, {}, [("word", "score")])
    with pytest.raises(SpecError, match="no pairs"):
        pairs_statement(spec, caps, {}, [])


def test_segments_and_weights_are_refused(shapes: duckdb.DuckDBPyConnection) -> None:
    with pytest.raises(SpecError, match="do not take by: they count rows"):
        redundancy(shapes, target="y", table="t", by="third", include_flagged=True)
    with pytest.raises(SpecError, match="do not take weight"):
        redundancy(shapes, target="y", table="t", weight="half", include_flagged=True)


# --- the command -------------------------------------------------------------------------------

@pytest.fixture
def source(tmp_path: Any) -> str:
    path = tmp_path / "pairs.duckdb"
    with duckdb.connect(str(path)) as con:
        fill_duckdb(con, ["t"], random_dataset(seed=14, rows=300))
    return str(path)


def assert_same_document(got: Any, want: Any, path: str = "") -> None:
    """Equal JSON documents, numbers to 1e-9 (DuckDB's parallel sums may differ in the last bit)."""
    if isinstance(want, dict):
        assert isinstance(got, dict) and list(got) == list(want), path
        for key in want:
            assert_same_document(got[key], want[key], f"{path}.{key}")
    elif isinstance(want, list):
        assert isinstance(got, list) and len(got) == len(want), path
        for i, (a, b) in enumerate(zip(got, want, strict=True)):
            assert_same_document(a, b, f"{path}[{i}]")
    elif isinstance(want, float):
        assert abs(got - want) <= TOLERANCE, path
    else:
        assert got == want, path


@pytest.mark.slow
def test_command_table_lists_the_top_pairs(source: str) -> None:
    result = CliRunner().invoke(cli, ["redundancy", "--include-flagged", source, "-t", "t", "-y",
                                      "y", "--top", "3"])
    assert result.exit_code == 0, result.output
    lines = result.output.splitlines()
    assert lines[0].startswith("t: target 'y', ") and "15 pair(s) of 6 attribute(s)" in lines[0]
    assert "top 3 by mutual information" in lines[0]
    assert lines[2].split() == ["first", "second", "I", "(bits)", "sym", "unc", "H(first)",
                                "H(second)", "rows"]
    api = redundancy(source, target="y", table="t", include_flagged=True).matrix.ordered()
    shown = [line.split() for line in lines[4:7]]
    assert [(r[0], r[1], r[2]) for r in shown] == [
        (p.first, p.second, f"{p.mutual_information:.4f}") for p in api[:3]]
    assert lines[7] == ""


@pytest.mark.slow
def test_command_csv_and_json_list_every_pair(source: str) -> None:
    runner = CliRunner()
    csv_out = runner.invoke(cli, ["redundancy", "--include-flagged", source, "-t", "t", "-y",
                                  "y", "-f", "csv", "--sort-pairs", "symmetric_uncertainty",
                                  "--missing", "drop"])
    assert csv_out.exit_code == 0, csv_out.output
    rows = csv_out.output.splitlines()
    assert rows[0].split(",") == list(PAIR_KEYS) and len(rows) == 16
    su = [float(r.split(",")[3]) for r in rows[1:]]
    assert su == sorted(su, reverse=True)
    # --by was this order's flag; it means segments elsewhere: refused with a hint (issue 21).
    for value, hint in (("symmetric_uncertainty",
                         "to order the pairs, use --sort-pairs symmetric_uncertainty"),
                        ("region", "for one segment, give its condition with --where")):
        old = runner.invoke(cli, ["redundancy", source, "-t", "t", "-y", "y", "--by", value])
        assert old.exit_code == 2
        assert f"Error: redundancy takes no --by (segments); {hint}\n" in old.output
    json_out = runner.invoke(cli, ["redundancy", "--include-flagged", source, "-t", "t", "-y",
                                   "y", "-f", "json",
                                   "--missing", "drop"])
    document = json.loads(json_out.output)
    assert document["missing"] == "drop" and len(document["pairs"]) == 15
    api = redundancy(source, target="y", table="t", missing="drop", include_flagged=True)
    assert_same_document(document, json.loads(json.dumps(api.to_dict())))
    assert [a["attribute"] for a in document["attributes"]] == [
        s.attribute for s in api.ranking.attributes]


def test_command_errors(source: str) -> None:
    runner = CliRunner()
    bad = runner.invoke(cli, ["redundancy", "--include-flagged", source, "-t", "t", "-y", "y",
                              "--batch-pairs", "0"])
    assert bad.exit_code == 2 and "--batch-pairs" in bad.output
    unknown = runner.invoke(cli, ["redundancy", "--include-flagged", source, "-t", "t", "-y",
                                  "y", "-a", "wrod"])
    assert unknown.exit_code == 1
    assert "wrod" in str(unknown.exception) and "word" in str(unknown.exception)
