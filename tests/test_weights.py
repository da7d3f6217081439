"""Weights (``--weight``): sums of a non-negative weight instead of row counts.

Whole-number weights are frequency weights: ranking a table with weights must give exactly the
metrics of the table with each row repeated ``weight`` times (G and p included), on every
engine. Fractional weights keep every entropy but report no p-value. NULL and zero weights leave
the row out (counted); a negative weight is an error. Data: random, from a seeded generator.
"""

from __future__ import annotations

import json
import math
import random
from pathlib import Path

import duckdb
import numpy as np
import pytest
from click.testing import CliRunner
from helpers import COMPARED_METRICS, ENGINES, Dataset, fill_duckdb, loaded
from test_segments import CATEGORICAL, segmented_dataset, segmented_with

import bitsift
from bitsift.cli import cli, main
from bitsift.errors import DataError, SpecError
from bitsift.jobs.history import Destination
from bitsift.jobs.history_open import open_store
from bitsift.jobs.job_run import run_job
from bitsift.jobs.jobfile import load_job
from bitsift.run import reference
from bitsift.run.result import Ranking, SegmentedRanking


def duplicated(dataset: Dataset, weight: str = "weight") -> Dataset:
    """Each row repeated ``weight`` times (NULL: not at all), without the weight column."""
    index = dataset.names.index(weight)
    keep = [i for i in range(len(dataset.columns)) if i != index]
    rows = [tuple(row[i] for i in keep)
            for row in dataset.rows for _ in range(row[index] or 0)]
    return Dataset(columns=tuple(dataset.columns[i] for i in keep), rows=rows)


def assert_same_metrics(weighted: Ranking, repeated: Ranking, context: str) -> None:
    """Equal to 1e-9 (relative for large values): every metric, the p-value included."""
    assert [a.attribute for a in weighted.attributes] == [
        a.attribute for a in repeated.attributes], context
    assert weighted.classes == repeated.classes, context
    assert weighted.weight_total == pytest.approx(repeated.rows, abs=1e-9), context
    assert math.isclose(weighted.target_entropy, repeated.target_entropy, abs_tol=1e-9)
    for a, b in zip(weighted.attributes, repeated.attributes, strict=True):
        assert (a.distinct, a.dof) == (b.distinct, b.dof), f"{context} {a.attribute}"
        for metric in COMPARED_METRICS:
            got, want = getattr(a, metric), getattr(b, metric)
            assert got is not None, f"{context} {a.attribute} {metric}"
            assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), (
                f"{context} {a.attribute} {metric}: {got!r} != {want!r}")


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_weights_equal_duplicated_rows(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = segmented_dataset(seed=21, rows=500)
    # Values seen only on rows without weight are not values of the weighted table.
    extra = [("yes", "north", 1, "zero-only", 9, "p", 0.0, 0),
             ("no", "south", 2, "null-only", 11, "q", 0.0, None)]
    dataset = Dataset(columns=dataset.columns, rows=dataset.rows + extra)
    with loaded(engine, dataset, request, table="weighted") as weighted_table, \
            loaded(engine, duplicated(dataset), request, table="repeated") as repeated_table:
        weighted = bitsift.rank(weighted_table.source, target="y", table=weighted_table.table,
                                attributes=CATEGORICAL, weight="weight")
        repeated = bitsift.rank(repeated_table.source, target="y", table=repeated_table.table,
                                attributes=CATEGORICAL)
        assert isinstance(weighted, Ranking) and isinstance(repeated, Ranking)
        assert_same_metrics(weighted, repeated, engine)
        # Rows count rows: those with a target and a positive weight, and those without.
        with_target = [r for r in dataset.rows if r[0] is not None]
        assert weighted.rows == sum(1 for r in with_target if r[-1])
        assert weighted.rows_without_weight == sum(1 for r in with_target if not r[-1])
        assert weighted.rows_excluded == len(dataset.rows) - len(with_target)
        assert weighted.notes == [] or all("whole numbers" not in n for n in weighted.notes)


@pytest.mark.slow
@pytest.mark.parametrize("strategy", ["grouping_sets", "union_all", "cross_join", "union_scans"])
def test_weighted_segments_equal_duplicated_segments(strategy: str) -> None:
    dataset = segmented_dataset(seed=22, rows=600)
    connection = duckdb.connect()
    fill_duckdb(connection, ["weighted"], dataset)
    fill_duckdb(connection, ["repeated"], duplicated(dataset))
    options = {"attributes": CATEGORICAL, "by": "region", "missing": "drop"}
    weighted = segmented_with(connection, "weighted", "y", strategy, weight="weight", **options)
    repeated = segmented_with(connection, "repeated", "y", strategy, **options)
    assert [s.segment for s in weighted] == [s.segment for s in repeated]
    for a, b in zip(weighted, repeated, strict=True):
        assert_same_metrics(a, b, f"{strategy} {a.segment}")


def _fractional_table() -> duckdb.DuckDBPyConnection:
    rng = random.Random(4)
    connection = duckdb.connect()
    connection.execute("CREATE TABLE t (a VARCHAR, b INTEGER, w DOUBLE, y VARCHAR)")
    rows = []
    for _ in range(300):
        a = rng.choice("xyz")
        rows.append((a, rng.randint(0, 3), rng.choice((0.25, 0.5, 1.75, 3.0, 0.0, None)),
                     "hit" if rng.random() < (0.7 if a == "x" else 0.3) else "miss"))
    connection.executemany("INSERT INTO t VALUES (?, ?, ?, ?)", rows)
    return connection


def test_fractional_weights_keep_the_entropies_and_drop_the_p_value() -> None:
    connection = _fractional_table()
    ranking = bitsift.rank(connection, target="y", table="t", weight="w")
    assert isinstance(ranking, Ranking)
    data = connection.execute("SELECT a, b, w, y FROM t WHERE w > 0").fetchall()
    for scored in ranking.attributes:
        column = 0 if scored.attribute == "a" else 1
        values = sorted({row[column] for row in data})
        classes = sorted({row[3] for row in data})
        table = np.zeros((len(values), len(classes)))
        for row in data:
            table[values.index(row[column]), classes.index(row[3])] += row[2]
        expected = reference.metrics(table)
        for metric in ("information_gain", "gain_ratio", "symmetric_uncertainty",
                       "conditional_entropy", "attribute_entropy", "g_statistic"):
            got, want = getattr(scored, metric), expected[metric]
            assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), (scored.attribute, metric)
        assert scored.p_value is None
    assert ranking.weight_total == pytest.approx(sum(row[2] for row in data), rel=1e-12)
    assert any("not all whole numbers" in note for note in ranking.notes)
    payload = json.loads(bitsift.output.formatting.render(ranking, "json"))
    assert payload["weight"] == "w" and payload["weight_total"] == ranking.weight_total
    assert all(a["p_value"] is None for a in payload["attributes"])
    assert list(payload)[:7] == ["target", "table", "weight", "rows", "rows_excluded",
                                 "rows_without_weight", "weight_total"]


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_a_negative_weight_is_an_error(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = segmented_dataset(seed=2, rows=200)
    rows = list(dataset.rows)
    rows[17] = (*rows[17][:-1], -2)
    rows[40] = (*rows[40][:-1], -1)
    with loaded(engine, Dataset(columns=dataset.columns, rows=rows), request) as where:
        with pytest.raises(DataError, match=r"'weight' has 2 negative or non-finite value\(s\)"):
            bitsift.rank(where.source, target="y", table=where.table, weight="weight")
        with pytest.raises(DataError, match="negative"):
            bitsift.rank(where.source, target="y", table=where.table, weight="weight",
                         by="region")
        # Outside the negative rows, the same table ranks.
        fine = bitsift.rank(where.source, target="y", table=where.table, weight="weight",
                            where="weight >= 0 OR weight IS NULL")
        assert isinstance(fine, Ranking) and fine.rows > 0


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
@pytest.mark.parametrize("bad", ["nan", "inf", "-inf"])
def test_a_non_finite_weight_is_an_error(engine: str, bad: str,
                                         request: pytest.FixtureRequest) -> None:
    # NaN sorts above every number on DuckDB and PostgreSQL, so `w > 0` alone let it through
    # and every metric came out NaN; infinity made the sums infinite.
    dataset = segmented_dataset(seed=3, rows=120)
    rows = list(dataset.rows)
    rows[5] = (*rows[5][:-1], float(bad))
    columns = tuple((name, "float" if name == "weight" else kind)
                    for name, kind in dataset.columns)
    refused = r"'weight' has 1 negative or non-finite value\(s\)"
    with (loaded(engine, Dataset(columns=columns, rows=rows), request) as where,
          pytest.raises(DataError, match=refused)):
        bitsift.rank(where.source, target="y", table=where.table, weight="weight")


def error_line(capsys: pytest.CaptureFixture[str], *args: str) -> str:
    """The one error line of ``bitsift ARGS``, which must exit 1."""
    with pytest.raises(SystemExit) as stopped:
        main(list(args))
    assert stopped.value.code == 1
    lines = capsys.readouterr().err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: "), lines
    return lines[0]


@pytest.mark.slow
def test_weight_errors_in_the_cli(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "w.duckdb"
    with duckdb.connect(str(path)) as connection:
        connection.execute("CREATE TABLE t AS SELECT i % 3 AS a, 'k' || (i % 2) AS label, "
                           "i % 4 - 1 AS w, 0 AS zero, i % 2 = 0 AS y FROM range(40) r(i)")
    base = ["rank", str(path), "--table", "t", "--target", "y"]
    refused = "'w' has 10 negative or non-finite value(s)"
    assert refused in error_line(capsys, *base, "--weight", "w")
    assert "--weight needs a number column" in error_line(capsys, *base, "--weight", "label")
    assert "cannot also be the weight" in error_line(capsys, *base, "--weight", "y")
    assert "positive 'zero'" in error_line(capsys, *base, "--weight", "zero")
    ok = CliRunner().invoke(cli, [*base, "--weight", "w", "--where", "w >= 0"])
    assert ok.exit_code == 0, ok.output
    assert "weight 'w' (total 30)" in ok.output and "10 without weight" in ok.output
    with pytest.raises(SpecError, match="check compares"):
        bitsift.check(str(path), target="y", table="t", weight="w")


@pytest.mark.slow
def test_fractional_weights_reach_the_history_as_null_p_values(tmp_path: Path) -> None:
    source = tmp_path / "frac.duckdb"
    with duckdb.connect(str(source)) as target:
        target.execute("CREATE TABLE t AS SELECT i % 3 AS a, ['n', 's'][i % 2 + 1] AS part, "
                       "(i % 5) / 2 AS w, i % 3 = 0 OR i % 7 = 0 AS y FROM range(120) r(i)")
    job_file = tmp_path / "job.toml"
    job_file.write_text(f"""
job = "weighted"
source = "{source.name}"

[results]
destination = "hist.duckdb"

[[ranking]]
table = "t"
target = "y"
by = "part"
weight = "w"
""", encoding="utf-8")
    result = run_job(load_job(job_file), "r1")
    (_, ranked), = result.rankings
    assert isinstance(ranked, SegmentedRanking)
    assert result.rows_written == 2  # 2 segments x 1 attribute (part and w are not ranked)
    with open_store(Destination(str(tmp_path / "hist.duckdb"))) as store:
        rows = store.read("weighted", ["r1"])
    assert sorted(r["segment"] for r in rows) == ['{"part":"n"}', '{"part":"s"}']
    assert all(r["p_value"] is None and r["g_statistic"] > 0 for r in rows)
