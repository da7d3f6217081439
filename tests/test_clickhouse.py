"""ClickHouse, executed on embedded chdb: the same Parquet rows ranked by ClickHouse and DuckDB
match each other and the NumPy reference (bitsift.run.reference) to 1e-9.

Besides Parquet read in place (Nullable columns), a MergeTree table with non-Nullable String
and Int64 attributes holding '' and 0: ClickHouse fills the columns a grouping set does not
group with '' and 0 rather than NULL (unless group_by_use_nulls = 1), so only GROUPING() can
tell those rows apart, which is what the template relies on. With CI=true a missing chdb fails
instead of skipping.
"""

from __future__ import annotations

import dataclasses
import json
import uuid
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import duckdb
import pytest
from click.testing import CliRunner
from conftest import IN_CI
from helpers import (
    GOLDEN_VARIANTS,
    NUMERIC_COLUMNS,
    Dataset,
    assert_matches_reference,
    assert_same_ranking,
    fill_duckdb,
    golden_path,
    random_dataset,
)
from parquet_helpers import AWKWARD_NAMES, write_parquet

import bitsift
from bitsift.cli import cli
from bitsift.engines.sources import EngineSource
from bitsift.errors import (
    QueryError,
    QueryTimeoutError,
    SourceError,
    SpecError,
    TableNotFoundError,
)

pytestmark = pytest.mark.clickhouse

#: The MergeTree table: attributes that cannot hold NULL, so '' and 0 are real values there.
MERGE_TREE_DDL = (
    "CREATE TABLE {table} (y Nullable(String), word String, level Int64, "
    "score Nullable(Float64), ratio Float64, noise LowCardinality(String), "
    "price Nullable(Decimal(10, 2))) ENGINE = MergeTree ORDER BY tuple()"
)


@pytest.fixture(scope="module")
def chdb_session() -> Any:
    """The ``chdb.session`` module, or skip (fail with CI=true) without chdb."""
    try:
        import chdb.session
    except ImportError as error:
        message = f"chdb is not installed ({error}): pip install -e '.[test-all]' (make test)"
        if IN_CI:
            pytest.fail(message)
        pytest.skip(message)
    return chdb.session


@pytest.fixture(scope="module")
def parquet(tmp_path_factory: pytest.TempPathFactory) -> tuple[Dataset, Path]:
    """The random table (with NULL targets, awkward column names) as one Parquet file."""
    dataset = random_dataset(seed=3, rows=1500).renamed(AWKWARD_NAMES)
    path = tmp_path_factory.mktemp("clickhouse-data") / "rows.parquet"
    return dataset, write_parquet(dataset, path)


def _without_nulls(dataset: Dataset) -> Dataset:
    """NULL words become '' and NULL levels 0: the very values ClickHouse shows for columns a
    grouping set does not group."""
    word, level = dataset.names.index("word"), dataset.names.index("level")
    rows = []
    for row in dataset.rows:
        values = list(row)
        values[word] = "" if values[word] is None else values[word]
        values[level] = 0 if values[level] is None else values[level]
        rows.append(tuple(values))
    return dataclasses.replace(dataset, rows=rows)


@pytest.fixture(scope="module")
def database_dir(chdb_session: Any, tmp_path_factory: pytest.TempPathFactory,
                 ) -> Iterator[tuple[Dataset, Path, str]]:
    """A chdb database directory with a MergeTree table ``<db>.t`` (no session left open)."""
    dataset = _without_nulls(random_dataset(seed=4, rows=1200))
    base = tmp_path_factory.mktemp("chdb")
    source = write_parquet(dataset, base / "rows.parquet")
    directory = base / "db"
    directory.mkdir()
    database = f"bitsift_t_{uuid.uuid4().hex[:12]}"
    session = chdb_session.Session(str(directory))
    try:
        session.query(f"CREATE DATABASE {database}")
        session.query(MERGE_TREE_DDL.format(table=f"{database}.t"))
        session.query(f"INSERT INTO {database}.t SELECT * FROM file('{source}', 'Parquet')")
    finally:
        session.close()
    yield dataset, directory, f"{database}.t"


def test_parquet_matches_reference_and_duckdb(chdb_session: Any,
                                              parquet: tuple[Dataset, Path]) -> None:
    dataset, path = parquet
    null_targets = sum(1 for y in dataset.column("y") if y is None)
    assert null_targets > 0  # the NULL-target rows must really be there
    for missing in ("category", "drop"):
        ranking = bitsift.rank(EngineSource("clickhouse", str(path)), target="y",
                               missing=missing)
        assert ranking.dialect == "clickhouse"
        assert ranking.rows_excluded == null_targets
        assert_matches_reference(ranking, dataset, "y", numeric=NUMERIC_COLUMNS,
                                 missing=missing, context=f"clickhouse/{missing}")
        duck = bitsift.rank(str(path), target="y", missing=missing)
        assert_same_ranking(ranking, duck, f"clickhouse vs duckdb/{missing}")
    # Every statement carries its own settings; none is left on the session.
    assert all(s.endswith("\nSETTINGS readonly = 2") for s in ranking.statements[1:])


def test_non_nullable_columns_in_a_caller_session(
        chdb_session: Any, database_dir: tuple[Dataset, Path, str]) -> None:
    dataset, directory, table = database_dir
    session = chdb_session.Session(str(directory))
    try:
        types = {row["name"]: row["type"]
                 for row in session.query(f"DESCRIBE TABLE {table}", "ArrowTable").to_pylist()}
        assert (types["word"], types["level"]) == ("String", "Int64")
        options: dict[str, Any] = {"numeric": "level", "bins": 4, "missing": "drop",
                                   "where": "noise <> 'q'", "timeout": 60}
        ranking = bitsift.rank(session, table=table, target="y", **options)
        categorical = bitsift.rank(session, table=table, target="y", attributes="word,level")
        # bitsift's settings lived in each statement's SETTINGS clause, not in the session.
        readonly = session.query("SELECT getSetting('readonly') AS r", "ArrowTable")
        assert readonly.to_pylist() == [{"r": 0}]
    finally:
        session.close()
    assert "max_execution_time = 60.000000" in ranking.statements[-1]
    noise = dataset.names.index("noise")
    kept = dataclasses.replace(dataset, rows=[r for r in dataset.rows if r[noise] != "q"])
    assert_matches_reference(ranking, kept, "y", numeric=(*NUMERIC_COLUMNS, "level"), bins=4,
                             missing="drop", context="clickhouse MergeTree, --where")
    assert_matches_reference(categorical, dataset, "y", context="clickhouse MergeTree")
    assert categorical["word"].distinct == len(set(dataset.column("word")))  # '' included
    assert categorical["level"].distinct == len(set(dataset.column("level")))  # 0 included


def test_cli_reads_a_database_directory_read_only(
        chdb_session: Any, database_dir: tuple[Dataset, Path, str]) -> None:
    dataset, directory, table = database_dir
    result = CliRunner().invoke(cli, ["rank", str(directory), "--engine", "clickhouse",
                                      "--table", table, "--target", "y", "--format", "json"])
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    assert document["rows"] == sum(1 for y in dataset.column("y") if y is not None)
    from bitsift.engines.chdb_engine import ChdbEngine

    with ChdbEngine.open_directory(str(directory)) as engine:
        with pytest.raises(QueryError, match="READONLY"):
            engine.fetch(f"INSERT INTO {table} SELECT * FROM {table}")
        count = engine.fetch(f"SELECT count() AS n FROM {table}").rows
    assert count == [(len(dataset.rows),)]


def test_cli_rank_and_check_a_parquet_file(chdb_session: Any,
                                           parquet: tuple[Dataset, Path]) -> None:
    _, path = parquet
    runner = CliRunner()
    result = runner.invoke(cli, ["rank", str(path), "--engine", "clickhouse", "--target", "y",
                                 "--format", "json"])
    assert result.exit_code == 0, result.output
    got = {a["attribute"]: a["information_gain"]
           for a in json.loads(result.stdout)["attributes"]}
    duck = bitsift.rank(str(path), target="y")
    assert list(got) == [a.attribute for a in duck.attributes]
    for scored in duck.attributes:
        assert abs(got[scored.attribute] - scored.information_gain) <= 1e-9
    checked = runner.invoke(cli, ["check", str(path), "--engine", "clickhouse", "--target", "y"])
    assert checked.exit_code == 0, checked.output
    assert "database and reference agree" in checked.output


def test_unknown_table_and_missing_file(chdb_session: Any,
                                        database_dir: tuple[Dataset, Path, str]) -> None:
    _, directory, table = database_dir
    with pytest.raises(TableNotFoundError, match=rf"'{table}x'.*did you mean '{table}'"):
        bitsift.rank(EngineSource("clickhouse", str(directory)), table=table + "x", target="y")
    with pytest.raises(SourceError, match="no such file"):
        bitsift.rank(EngineSource("clickhouse", str(directory / "nope.parquet")), target="y")
    with pytest.raises(SpecError, match="is a directory: name a table in it with --table"):
        bitsift.rank(EngineSource("clickhouse", str(directory)), target="y")


def test_timeout_is_max_execution_time(chdb_session: Any) -> None:
    from bitsift.engines.chdb_engine import ChdbEngine

    with ChdbEngine.in_memory() as engine:
        engine.set_timeout(0.5)
        # Minutes of work if max_execution_time did not stop it.
        with pytest.raises(QueryTimeoutError, match="--timeout 0.5 s"):
            engine.fetch("SELECT sum(number % 7) AS s FROM numbers(1000000000000)")
        engine.set_timeout(None)
        assert engine.fetch("SELECT 41 + 1 AS answer").rows == [(42,)]


def test_golden_clickhouse_sql_runs_on_chdb(chdb_session: Any, tmp_path: Path) -> None:
    # The paste-ready statements (tests/golden/clickhouse.*.sql), pasted into ClickHouse as
    # they are, return what `bitsift rank` returns on DuckDB for the same rows.
    dataset = random_dataset(seed=11, rows=900)
    table = "bitsift_golden"
    source = write_parquet(dataset, tmp_path / "golden.parquet")
    connection = duckdb.connect()
    fill_duckdb(connection, [table], dataset)
    session = chdb_session.Session(":memory:")
    try:
        session.query(f"CREATE TABLE {table} ENGINE = Memory AS "
                      f"SELECT * FROM file('{source}', 'Parquet')")
        for variant, options in GOLDEN_VARIANTS.items():
            attributes = f"{options['attributes']},{options['numeric']}"
            want = bitsift.rank(connection, table=table, target="y",
                                **{**options, "attributes": attributes})
            text = golden_path("clickhouse", variant).read_text(encoding="utf-8")
            rows = session.query(text.rstrip().rstrip(";"), "ArrowTable").to_pylist()
            by_name = {r["attribute"]: r for r in rows if r["attribute_index"] != 0}
            assert sorted(by_name) == sorted(a.attribute for a in want.attributes), variant
            target = next(r for r in rows if r["attribute_index"] == 0)
            assert (target["rows_used"], target["rows_excluded"]) == (want.rows,
                                                                     want.rows_excluded)
            for scored in want.attributes:
                row = by_name[scored.attribute]
                assert row["distinct_values"] == scored.distinct, (variant, scored.attribute)
                for metric in ("information_gain", "gain_ratio", "g_statistic"):
                    got, expected = float(row[metric]), getattr(scored, metric)
                    assert abs(got - expected) <= 1e-9 * max(1.0, abs(expected)), (
                        f"{variant}: {scored.attribute} {metric} {got} != {expected}")
    finally:
        session.close()
        connection.close()


def test_reading_a_database_directory_leaves_it_as_it_was(
        chdb_session: Any, database_dir: tuple[Dataset, Path, str]) -> None:
    # Issue 16: opening the directory used to leave a new tmp/ folder in it.
    _, directory, table = database_dir
    made = directory / "tmp"
    if made.is_dir() and not any(made.iterdir()):
        made.rmdir()  # made when the fixture created the database
    before = sorted(p.name for p in directory.iterdir())
    result = CliRunner().invoke(cli, ["rank", str(directory), "--engine", "clickhouse",
                                      "--table", table, "--target", "y"])
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in directory.iterdir()) == before


def test_a_folder_that_is_no_chdb_database_is_refused_untouched(chdb_session: Any,
                                                                tmp_path: Path) -> None:
    folder = tmp_path / "plain"
    folder.mkdir()
    (folder / "notes.txt").write_text("mine")
    with pytest.raises(SourceError, match="not a chdb database directory"):
        bitsift.rank(EngineSource("clickhouse", str(folder)), target="y", table="t")
    assert sorted(p.name for p in folder.iterdir()) == ["notes.txt"]


def test_timeout_up_to_chdbs_limit_is_sent_and_a_longer_one_refused(chdb_session: Any) -> None:
    # chdb 4.4 holds max_execution_time as int64 microseconds: 9223372036855 s and more fail
    # inside the server ("Cannot convert seconds to microseconds").
    from bitsift.engines.chdb_engine import ChdbEngine

    with ChdbEngine.in_memory() as engine:
        engine.set_timeout(9_223_372_036_854)
        assert engine.fetch("SELECT 41 + 1 AS answer").rows == [(42,)]
        with pytest.raises(SpecError, match="longer than clickhouse can enforce"):
            engine.set_timeout(1e13)
