"""Apache Spark SQL, executed: a local[2] session ranks the same Parquet rows as DuckDB, and both
match the NumPy reference (bitsift.run.reference) to 1e-9.

The table (tests/helpers.py, random_dataset) has NULL targets, NULL attribute values, text that
differs only by case or a trailing space, integers with ties, and floats and a DECIMAL(10, 2)
binned into quantiles by Spark's exact percentile() aggregate (cut points checked against
numpy.quantile). One session for the whole test run (starting Spark takes most of the time);
with CI=true a missing pyspark or Java fails instead of skipping.
"""

from __future__ import annotations

import dataclasses
import json
import shutil
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
    assert_matches_reference,
    assert_same_ranking,
    fill_duckdb,
    golden_path,
    random_dataset,
    rank_with,
)
from parquet_helpers import AWKWARD_NAMES, write_parquet

import bitsift
from bitsift.cli import cli
from bitsift.engines.sources import EngineSource
from bitsift.errors import ColumnError, QueryTimeoutError, SpecError, TableNotFoundError

pytestmark = pytest.mark.spark

#: Test-only session settings: a small local session that starts and warms up fast. C1-only JIT
#: halves the first queries' time on this 2-core machine (short-lived JVM); bitsift's own
#: sessions (--engine spark) keep Spark's defaults.
TEST_SESSION_CONFIG: dict[str, str] = {
    "spark.ui.enabled": "false",
    "spark.ui.showConsoleProgress": "false",
    "spark.sql.shuffle.partitions": "4",
    "spark.driver.memory": "1g",
    "spark.driver.extraJavaOptions": "-XX:TieredStopAtLevel=1 -XX:+UseSerialGC",
}


def _unavailable(reason: str) -> None:
    if IN_CI:
        pytest.fail(reason)
    pytest.skip(reason)


@pytest.fixture(scope="session")
def spark(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Any]:
    """One local[2] SparkSession for the whole run, stopped at the end."""
    try:
        from bitsift.engines.spark_engine import import_pyspark

        sql = import_pyspark()
    except Exception as error:  # noqa: BLE001 - MissingDriverError
        _unavailable(f"pyspark is not installed: {error}")
    if shutil.which("java") is None and not _java_home():
        _unavailable("Java is not installed (Spark needs Java 17+)")
    builder = sql.SparkSession.builder.master("local[2]").appName("bitsift-tests")
    for key, value in TEST_SESSION_CONFIG.items():
        builder = builder.config(key, value)
    # Managed tables of the tests, if any, stay out of the working directory.
    builder = builder.config("spark.sql.warehouse.dir",
                             str(tmp_path_factory.mktemp("spark-warehouse")))
    session = builder.getOrCreate()
    session.sparkContext.setLogLevel("ERROR")
    try:
        yield session
    finally:
        session.stop()


def _java_home() -> bool:
    import os

    home = os.environ.get("JAVA_HOME")
    return bool(home) and (Path(home) / "bin" / "java").exists()


@pytest.fixture(scope="module")
def parquet(tmp_path_factory: pytest.TempPathFactory) -> tuple[Any, Path]:
    """The random table (with NULL targets, awkward column names) as one Parquet file."""
    dataset = random_dataset(seed=3, rows=1500).renamed(AWKWARD_NAMES)
    path = tmp_path_factory.mktemp("spark-data") / "rows.parquet"
    return dataset, write_parquet(dataset, path)


def test_parquet_matches_reference_and_duckdb(spark: Any, parquet: tuple[Any, Path]) -> None:
    dataset, path = parquet
    null_targets = sum(1 for y in dataset.column("y") if y is None)
    assert null_targets > 0  # the NULL-target rows must really be there
    for missing in ("category", "drop"):
        ranking = bitsift.rank(EngineSource("spark", str(path)), target="y", missing=missing)
        assert ranking.dialect == "spark"
        assert ranking.rows_excluded == null_targets
        assert_matches_reference(ranking, dataset, "y", numeric=NUMERIC_COLUMNS,
                                 missing=missing, context=f"spark/{missing}")
        duck = bitsift.rank(str(path), target="y", missing=missing)
        assert_same_ranking(ranking, duck, f"spark vs duckdb/{missing}")
    # Exact percentiles, not percentile_approx, and only aggregates collected.
    assert "PERCENTILE(" in ranking.statements[0]
    assert "PERCENTILE_APPROX" not in " ".join(ranking.statements).upper()
    # The active test session was borrowed, not stopped, and bitsift's view is gone.
    assert spark.sql("SELECT 1 AS one").collect()[0].one == 1
    assert not [t.name for t in spark.catalog.listTables() if t.name.startswith("bitsift_")]


def test_dataframe_with_where_and_forced_numeric(spark: Any, parquet: tuple[Any, Path]) -> None:
    dataset, path = parquet
    options: dict[str, Any] = {"numeric": "select", "bins": 4,
                               "where": "noise <> 'q' AND `select` <> 3"}
    ranking = bitsift.rank(spark.read.parquet(str(path)), target="y", **options)
    # --where is written in the engine's own dialect: Spark quotes with backticks.
    duck = bitsift.rank(str(path), target="y",
                        **{**options, "where": "noise <> 'q' AND \"select\" <> 3"})
    assert_same_ranking(ranking, duck, "spark DataFrame vs duckdb")
    assert ranking["select"].kind == "numeric" and ranking["select"].cuts
    noise, level = dataset.names.index("noise"), dataset.names.index("select")
    kept = dataclasses.replace(dataset, rows=[r for r in dataset.rows
                                              if r[noise] != "q" and r[level] not in (3, None)])
    assert_matches_reference(ranking, kept, "y", numeric=(*NUMERIC_COLUMNS, "select"), bins=4,
                             context="spark DataFrame, --where")


def test_catalog_table_and_window_quantiles(spark: Any, parquet: tuple[Any, Path]) -> None:
    # A SparkSession with a (temporary-view) catalog table, and the portable window method
    # for quantiles (the one paste mode used on Spark before percentile()).
    dataset, path = parquet
    name = f"bitsift_t_{uuid.uuid4().hex[:12]}"
    spark.read.parquet(str(path)).createTempView(name)
    try:
        ranking = rank_with(spark, name, "y", quantile="window",
                            attributes=[AWKWARD_NAMES["word"], "score", "price"])
    finally:
        spark.catalog.dropTempView(name)
    assert_matches_reference(ranking, dataset, "y", numeric=NUMERIC_COLUMNS,
                             context="spark catalog table, window quantiles")


def test_unknown_table_is_named_with_a_suggestion(spark: Any, parquet: tuple[Any, Path]) -> None:
    name = f"bitsift_t_{uuid.uuid4().hex[:12]}"
    spark.read.parquet(str(parquet[1])).createTempView(name)
    try:
        with pytest.raises(TableNotFoundError, match=rf"'{name}x'.*did you mean '{name}'"):
            bitsift.rank(spark, table=name + "x", target="y")
    finally:
        spark.catalog.dropTempView(name)


def test_cli_rank_and_check_with_engine_spark(spark: Any, parquet: tuple[Any, Path]) -> None:
    _, path = parquet
    runner = CliRunner()
    result = runner.invoke(cli, ["rank", str(path), "--engine", "spark", "--target", "y",
                                 "--format", "json"])
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    duck = bitsift.rank(str(path), target="y")
    got = {a["attribute"]: a["information_gain"] for a in document["attributes"]}
    assert list(got) == [a.attribute for a in duck.attributes]
    for scored in duck.attributes:
        assert abs(got[scored.attribute] - scored.information_gain) <= 1e-9
    checked = runner.invoke(cli, ["check", str(path), "--engine", "spark", "--target", "y",
                                  "--attributes", "select,score"])
    assert checked.exit_code == 0, checked.output
    assert "database and reference agree" in checked.output


def test_timeout_interrupts_the_running_job(spark: Any) -> None:
    from bitsift.engines.spark_engine import SparkEngine

    engine = SparkEngine.wrap(spark)
    engine.set_timeout(1.0)
    # Hours of work if it were not interrupted.
    with pytest.raises(QueryTimeoutError, match="--timeout 1 s"):
        engine.fetch("SELECT SUM(id % 7) AS s FROM range(1000000000000)")
    engine.set_timeout(None)
    assert engine.fetch("SELECT 41 + 1 AS answer").rows == [(42,)]
    engine.close()
    assert spark.sql("SELECT 1 AS one").collect()[0].one == 1  # a borrowed session survives


def test_golden_spark_sql_runs_on_spark(spark: Any, tmp_path: Path) -> None:
    # The paste-ready statements (tests/golden/spark.*.sql), as a user would paste them into
    # spark-sql, return what `bitsift rank` returns on DuckDB for the same rows.
    dataset = random_dataset(seed=11, rows=900)
    table = "bitsift_golden"
    frame = spark.read.parquet(str(write_parquet(dataset, tmp_path / "golden.parquet")))
    connection = duckdb.connect()
    fill_duckdb(connection, [table], dataset)
    frame.createTempView(table)
    try:
        for variant, options in GOLDEN_VARIANTS.items():
            attributes = f"{options['attributes']},{options['numeric']}"
            want = bitsift.rank(connection, table=table, target="y",
                                **{**options, "attributes": attributes})
            text = golden_path("spark", variant).read_text(encoding="utf-8")
            rows = [r.asDict() for r in spark.sql(text.rstrip().rstrip(";")).collect()]
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
        spark.catalog.dropTempView(table)
        connection.close()


def test_engine_spark_with_table_wants_a_master() -> None:
    # Checked before any JVM starts: with --table, SOURCE names the Spark master.
    result = CliRunner().invoke(cli, ["rank", "orders.parquet", "--engine", "spark",
                                      "--table", "sales.orders", "--target", "y"])
    assert isinstance(result.exception, SpecError)
    assert "SOURCE is the Spark master" in str(result.exception)
    with pytest.raises(SpecError, match="unknown engine 'sparkle'"):
        bitsift.rank(EngineSource("sparkle", "x.parquet"), target="y")


def test_map_columns_are_left_out_or_refused(spark: Any, tmp_path: Path) -> None:
    """Spark groups arrays and structs but cannot partition by a MAP (issue 16, item 4)."""
    path = tmp_path / "nested.parquet"
    with duckdb.connect() as connection:
        connection.execute(
            f"COPY (SELECT i % 3 AS y, MAP([1], [i % 2]) AS m, [i % 2, i % 3] AS l, "
            f"{{'a': i % 2}} AS s, i % 5 AS k FROM range(60) r(i)) TO '{path}' (FORMAT parquet)")
    frame = spark.read.parquet(str(path))
    ranking = bitsift.rank(frame, target="y")
    assert {a.attribute for a in ranking.attributes} == {"l", "s", "k"}
    assert any("'m' (map<int,bigint>)" in note and "cannot group" in note
               for note in ranking.notes), ranking.notes
    checked = bitsift.check(frame, target="y")
    assert checked.ok and checked.whole_table
    with pytest.raises(ColumnError, match=r"'m' \(map<int,bigint>, as attributes\)"):
        bitsift.rank(frame, target="y", attributes="k,m")
