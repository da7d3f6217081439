"""Segments (``--by``): one ranking per combination of segment values, in one statement.

A segment's ranking must equal a separate run restricted to that segment with ``--where``, on
every engine and count strategy; NULL values form a segment of their own; segments with one
class or no usable row are reported, not fatal. Data: random, from a seeded generator.
"""

from __future__ import annotations

import dataclasses
import json
import math
import random
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlglot
from click.testing import CliRunner
from helpers import (
    ENGINES,
    PASTE_DIALECTS,
    Dataset,
    assert_same_ranking,
    fill_duckdb,
    invalid_constructs,
    loaded,
    run_sql,
)
from sqlglot import exp

import bitsift
from bitsift.analysis.profile import rank_and_profile_segments
from bitsift.cli import cli
from bitsift.engines.sources import open_source
from bitsift.errors import DataError, SpecError
from bitsift.jobs.drift import drift
from bitsift.jobs.history import Destination
from bitsift.jobs.history_open import open_store
from bitsift.jobs.job_run import run_job
from bitsift.jobs.jobfile import load_job
from bitsift.output.report import render_report
from bitsift.run.api import make_options, run_segmented
from bitsift.run.readout import plain_value
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.spec.rankspec import resolve
from bitsift.sql.dialects import capabilities

REGIONS: tuple[str | None, ...] = ("north", "south", "east", None)
#: Metrics a paste-mode row carries, compared with the run-mode ranking.
PASTE_METRICS = ("information_gain", "gain_ratio", "symmetric_uncertainty",
                 "conditional_entropy", "attribute_entropy", "g_statistic")


def segmented_dataset(seed: int, rows: int = 700) -> Dataset:
    """region (with NULLs) and tier segment the rows; y depends on word differently per region,
    so per-segment rankings differ from the whole table's. weight holds whole numbers 0..3."""
    rng = random.Random(seed)
    data = []
    for _ in range(rows):
        region = rng.choice(REGIONS)
        tier = rng.choice((1, 2))
        word = rng.choice(("a", "b", "c", "d")) if rng.random() > 0.07 else None
        level = rng.choice((1, 2, 3, 5))
        noise = rng.choice(("p", "q"))
        score = rng.gauss(0.0, 1.0)
        bias = {"north": word in ("a", "b"), "south": level >= 3, "east": noise == "p"}
        yes = 0.8 if bias.get(region or "", word == "c") else 0.3
        y = ("yes" if rng.random() < yes else "no") if rng.random() > 0.04 else None
        weight = rng.choice((0, 1, 1, 2, 3)) if rng.random() > 0.05 else None
        data.append((y, region, tier, word, level, noise, score, weight))
    columns = (("y", "text"), ("region", "text"), ("tier", "integer"), ("word", "text"),
               ("level", "integer"), ("noise", "text"), ("score", "float"),
               ("weight", "integer"))
    return Dataset(columns=columns, rows=data)


CATEGORICAL = "word,level,noise"


def segment_where(segment: dict[str, Any]) -> str:
    """The --where that selects one segment's rows (test values are plain words and numbers)."""
    parts = [f"{name} IS NULL" if value is None
             else f"{name} = {value!r}" if isinstance(value, str) else f"{name} = {value}"
             for name, value in segment.items()]
    return " AND ".join(parts)


def segmented_with(source: Any, table: str | None, target: str, strategy: str,
                   **options: Any) -> SegmentedRanking:
    """``bitsift.rank(by=...)`` with the dialect's count strategy overridden."""
    opened = open_source(source, table)
    with opened.engine as engine:
        engine.caps = dataclasses.replace(engine.caps, count_strategy=strategy)
        columns = engine.columns(opened.table, opened.display)
        spec = resolve(make_options(target, **options), columns, opened.table, opened.display,
                       engine.caps.sqlglot_dialect)
        return run_segmented(engine, spec)


def assert_segments_equal_filtered_runs(segmented: SegmentedRanking, source: Any,
                                        table: str | None, **options: Any) -> None:
    for ranking in segmented.segments:
        assert ranking.segment is not None and ranking.status == "ok", ranking.segment
        alone = bitsift.rank(source, target="y", table=table,
                             where=segment_where(ranking.segment), **options)
        assert isinstance(alone, Ranking)
        assert_same_ranking(ranking, alone, f"segment {ranking.segment}")
        assert math.isclose(ranking.target_entropy, alone.target_entropy, abs_tol=1e-9)


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_segments_equal_separate_filtered_runs(engine: str,
                                               request: pytest.FixtureRequest) -> None:
    with loaded(engine, segmented_dataset(seed=5), request) as where:
        segmented = bitsift.rank(where.source, target="y", table=where.table, by="region",
                                 attributes=CATEGORICAL)
        assert isinstance(segmented, SegmentedRanking)
        assert segmented.by == ["region"]
        # Ordered by value, the NULL segment (a segment of its own) last.
        assert [s.segment for s in segmented] == [
            {"region": "east"}, {"region": "north"}, {"region": "south"}, {"region": None}]
        assert_segments_equal_filtered_runs(segmented, where.source, where.table,
                                            attributes=CATEGORICAL)
        # The segments partition the rows.
        whole = bitsift.rank(where.source, target="y", table=where.table,
                             attributes=CATEGORICAL)
        assert sum(s.rows for s in segmented) == whole.rows
        assert sum(s.rows_excluded for s in segmented) == whole.rows_excluded


@pytest.mark.slow
@pytest.mark.parametrize("strategy", ["grouping_sets", "union_all", "cross_join", "union_scans"])
def test_two_segment_columns_on_every_count_strategy(strategy: str) -> None:
    dataset = segmented_dataset(seed=8)
    connection = duckdb.connect()
    fill_duckdb(connection, ["t"], dataset)
    options = {"attributes": CATEGORICAL, "missing": "drop", "by": ["tier", "region"]}
    segmented = segmented_with(connection, "t", "y", strategy, **options)
    assert len(segmented) == 2 * len(REGIONS)
    assert [s.segment for s in segmented][:2] == [{"tier": 1, "region": "east"},
                                                  {"tier": 1, "region": "north"}]
    options.pop("by")
    assert_segments_equal_filtered_runs(segmented, connection, "t", **options)


def test_numeric_attributes_are_cut_over_the_whole_table() -> None:
    connection = duckdb.connect()
    fill_duckdb(connection, ["t"], segmented_dataset(seed=9))
    segmented = bitsift.rank(connection, target="y", table="t", by="region",
                             attributes="score,word", bins=4)
    whole = bitsift.rank(connection, target="y", table="t", attributes="score,word", bins=4)
    assert isinstance(segmented, SegmentedRanking) and isinstance(whole, Ranking)
    assert whole["score"].cuts and len(whole["score"].cuts) == 3
    for ranking in segmented:
        assert ranking["score"].cuts == whole["score"].cuts, ranking.segment


def test_degenerate_segments_are_reported_not_fatal() -> None:
    connection = duckdb.connect()
    connection.execute("""
        CREATE TABLE t AS SELECT
          ['mixed', 'single', 'blank'][i % 3 + 1] AS part,
          i % 4 AS a,
          CASE i % 3 WHEN 0 THEN (i % 5 < 2)::VARCHAR WHEN 1 THEN 'same' ELSE NULL END AS y
        FROM range(90) r(i)""")
    segmented = bitsift.rank(connection, target="y", table="t", by="part")
    assert isinstance(segmented, SegmentedRanking)
    by_part = {s.segment["part"]: s for s in segmented if s.segment}
    assert by_part["mixed"].status == "ok" and by_part["mixed"].classes == 2
    assert by_part["single"].status == "single_class"
    assert by_part["single"].classes == 1 and by_part["single"].rows == 30
    assert all(a.information_gain == 0 for a in by_part["single"].attributes)
    assert by_part["blank"].status == "no_rows"
    assert (by_part["blank"].rows, by_part["blank"].rows_excluded) == (0, 30)
    assert by_part["blank"].attributes == []
    statuses = {s["segment"]["part"]: s["status"] for s in segmented.to_dict()["segments"]}
    assert statuses == {"blank": "no_rows", "mixed": "ok", "single": "single_class"}
    # Only a table with no usable row at all fails.
    with pytest.raises(DataError, match="NULL 'y'"):
        bitsift.rank(connection, target="y", table="t", by="part", where="part = 'blank'")


def test_segment_columns_are_checked() -> None:
    connection = duckdb.connect()
    connection.execute("CREATE TABLE t AS SELECT i % 2 AS a, i % 3 AS b, i % 2 = 0 AS y "
                       "FROM range(20) r(i)")
    with pytest.raises(bitsift.BitsiftError, match="'regoin'"):
        bitsift.rank(connection, target="y", table="t", by="regoin")
    with pytest.raises(SpecError, match="target 'y' cannot also be a segment"):
        bitsift.rank(connection, target="y", table="t", by="y")
    with pytest.raises(SpecError, match="both in attributes and as a segment"):
        bitsift.rank(connection, target="y", table="t", by="a", attributes="a,b")
    with pytest.raises(SpecError, match="twice"):
        bitsift.rank(connection, target="y", table="t", by="a,a")
    # The segment column is not ranked within its own segments.
    segmented = bitsift.rank(connection, target="y", table="t", by="a")
    assert isinstance(segmented, SegmentedRanking)
    assert {a.attribute for s in segmented for a in s.attributes} == {"b"}


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_paste_statement_with_segments_and_weight_equals_rank(
        engine: str, request: pytest.FixtureRequest) -> None:
    with loaded(engine, segmented_dataset(seed=12, rows=500), request) as where:
        options = {"attributes": CATEGORICAL, "by": "region", "weight": "weight"}
        segmented = bitsift.rank(where.source, target="y", table=where.table, **options)
        assert isinstance(segmented, SegmentedRanking)
        sql = bitsift.statement(where.source, target="y", table=where.table, **options)
        rows = run_sql(where, sql)
        assert all(int(r["rows_negative_weight"]) == 0 for r in rows)
        for ranking in segmented:
            assert ranking.segment is not None
            mine = [r for r in rows if plain_value(r["segment_1"]) == ranking.segment["region"]]
            target = next(r for r in mine if r["attribute_index"] == 0)
            assert int(target["rows_used"]) == ranking.rows, ranking.segment
            assert int(target["rows_excluded"]) == ranking.rows_excluded
            assert int(target["rows_without_weight"]) == ranking.rows_without_weight
            assert float(target["weight_used"]) == pytest.approx(ranking.weight_total, rel=1e-12)
            by_name = {r["attribute"]: r for r in mine if r["attribute_index"] != 0}
            for scored in ranking.attributes:
                row = by_name[scored.attribute]
                assert int(row["distinct_values"]) == scored.distinct
                for metric in PASTE_METRICS:
                    got, want = float(row[metric]), getattr(scored, metric)
                    assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), (metric, engine)


@pytest.mark.slow
@pytest.mark.parametrize("dialect", PASTE_DIALECTS)
def test_paste_statement_parses_back_on_every_dialect(dialect: str) -> None:
    sql = bitsift.statement(table="sales.orders", target="late", attributes="channel",
                            numeric="amount", by="region,tier", weight="quantity",
                            dialect=dialect)
    assert "segment_1 = region, segment_2 = tier" in sql
    trees = sqlglot.parse(sql, read=capabilities(dialect).sqlglot_dialect)
    assert len(trees) == 1 and isinstance(trees[0], exp.Select)
    names = {c.alias_or_name for c in trees[0].expressions}
    assert {"segment_1", "segment_2", "weight_used", "rows_without_weight",
            "rows_negative_weight", "rows_fractional_weight"} <= names
    assert invalid_constructs(sql, dialect) == []


def test_unsegmented_statement_has_no_segment_or_weight_columns() -> None:
    sql = bitsift.statement(table="t", target="y", attributes="a", dialect="postgres")
    tree = sqlglot.parse_one(sql, read="postgres")
    names = [c.alias_or_name for c in tree.expressions]
    assert names[:3] == ["attribute_index", "attribute", "kind"]
    assert not [n for n in names if "segment" in n or "weight" in n]


def _cli_source(tmp_path: Path) -> Path:
    path = tmp_path / "seg.duckdb"
    with duckdb.connect(str(path)) as connection:
        fill_duckdb(connection, ["t"], segmented_dataset(seed=3, rows=400))
    return path


@pytest.mark.slow
def test_cli_json_has_one_ranking_per_segment(tmp_path: Path) -> None:
    path = _cli_source(tmp_path)
    args = ["rank", str(path), "--table", "t", "--target", "y", "--attributes", CATEGORICAL]
    result = CliRunner().invoke(cli, [*args, "--by", "region", "--format", "json"])
    assert result.exit_code == 0, result.output
    payload = json.loads(result.stdout)
    assert list(payload) == ["target", "table", "by", "confidence", "segments"]
    assert payload["by"] == ["region"]
    assert [s["segment"] for s in payload["segments"]] == [{"region": r} for r in
                                                           ("east", "north", "south", None)]
    first = payload["segments"][0]
    assert list(first) == ["segment", "status", "rows", "rows_excluded", "target_entropy",
                           "classes", "attributes"]
    alone = CliRunner().invoke(cli, [*args, "--where", "region = 'east'", "--format", "json"])
    assert alone.exit_code == 0, alone.output
    expected = json.loads(alone.stdout)
    assert first["rows"] == expected["rows"]
    assert [a["attribute"] for a in first["attributes"]] == [
        a["attribute"] for a in expected["attributes"]]
    for got, want in zip(first["attributes"], expected["attributes"], strict=True):
        assert math.isclose(got["information_gain"], want["information_gain"], abs_tol=1e-12)
    # Table and CSV: one section, or one column, per segment.
    table = CliRunner().invoke(cli, [*args, "--by", "region"])
    assert table.exit_code == 0, table.output
    assert "== segment region = NULL ==" in table.output
    assert table.output.count("== segment") == 4
    as_csv = CliRunner().invoke(cli, [*args, "--by", "region", "--format", "csv"])
    lines = as_csv.output.splitlines()
    assert lines[0].startswith("region,attribute,kind,")
    assert len(lines) == 1 + 4 * 3
    assert lines[-1].startswith(",")  # the NULL segment, last


def _job(tmp_path: Path, source: Path) -> Path:
    job_file = tmp_path / "job.toml"
    job_file.write_text(f"""
job = "segmented"
source = "{source.name}"

[results]
destination = "hist.duckdb"

[[ranking]]
name = "by-region"
table = "t"
target = "y"
attributes = ["word", "level", "noise"]
by = ["region"]
weight = "weight"
""", encoding="utf-8")
    return job_file


@pytest.mark.slow
def test_job_writes_one_row_per_segment_and_attribute_and_drift_compares_them(
        tmp_path: Path) -> None:
    source = _cli_source(tmp_path)
    job = load_job(_job(tmp_path, source))
    first = run_job(job, "day1")
    assert first.rows_written == 4 * 3
    with open_store(Destination(str(tmp_path / "hist.duckdb"))) as store:
        rows = store.read("segmented", ["day1"])
    assert {r["segment"] for r in rows} == {'{"region":"east"}', '{"region":"north"}',
                                            '{"region":"south"}', '{"region":null}'}
    assert len({(r["segment"], r["attribute"]) for r in rows}) == 12
    assert '"weight":"weight"' in rows[0]["options"]
    run_job(job, "day2")
    assert not drift(job.destination, "segmented").drifted
    # Plant a change in one segment only: in the north, noise now decides y.
    with duckdb.connect(str(source)) as connection:
        connection.execute("UPDATE t SET y = CASE WHEN noise = 'p' THEN 'yes' ELSE 'no' END "
                           "WHERE region = 'north' AND y IS NOT NULL")
    run_job(job, "day3")
    report = drift(job.destination, "segmented")
    moved = {(c.segment, c.attribute) for c in report.changes if c.kind == "information_gain"}
    assert ('{"region":"north"}', "noise") in moved
    assert all(segment == '{"region":"north"}' for segment, _ in moved)
    result = CliRunner().invoke(cli, ["run", str(job.path), "--run-id", "day4"])
    assert result.exit_code == 0, result.output
    assert "by region: 4 segments" in result.output and "region = NULL:" in result.output


@pytest.mark.slow
def test_report_has_one_section_per_segment(tmp_path: Path) -> None:
    source = _cli_source(tmp_path)
    runs = rank_and_profile_segments(str(source), "y", "t", by="region",
                                     attributes=CATEGORICAL)
    assert [r.segment for r in runs] == ["region = 'east'", "region = 'north'",
                                         "region = 'south'", "region = NULL"]
    for run in runs:
        for scored, profile in run.profiled():
            # The drill-down counts the segment's own rows: it agrees with its ranking.
            assert profile.rows == scored.rows, run.segment
            assert math.isclose(profile.information_gain, scored.information_gain,
                                abs_tol=1e-9), (run.segment, scored.attribute)
    html = render_report(runs)
    assert html.count('<section class="run"') == 4
    assert "Segment: region = NULL" in html
    out = tmp_path / "report.html"
    result = CliRunner().invoke(cli, ["report", str(source), "--table", "t", "--target", "y",
                                      "--by", "region", "--out", str(out), "--quiet"])
    assert result.exit_code == 0, result.output
    assert out.read_text(encoding="utf-8").count('<h2 class="segment">') == 4
