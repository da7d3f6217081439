"""A tiny run of the benchmark harness, so it never rots.

Checks the report's structure and that the contenders compute the same numbers as bitsift
(never timings: speed lives in benchmarks/RESULTS.md).
"""

from __future__ import annotations

import importlib.util
import json
import os
import shutil
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
import sqlalchemy as sa
from conftest import IN_CI

ROOT = Path(__file__).resolve().parents[1]
RUN = ROOT / "benchmarks" / "run.py"
#: Metrics agree to rounding: different summation orders, same counts.
TOLERANCE = 1e-9


def run_harness(tmp_path: Path, *options: str, rows: int = 20_000, timeout: float = 120,
                ) -> tuple[str, dict[str, Any]]:
    out = tmp_path / "result.json"
    completed = subprocess.run(
        [sys.executable, str(RUN), "--rows", str(rows), "--repeats", "1", "--warmup", "0",
         "--quiet", "--json", str(out), *options],
        capture_output=True,
        text=True,
        timeout=timeout,
    )
    assert completed.returncode == 0, completed.stderr
    return completed.stdout, json.loads(out.read_text())


def assert_agreement(result: dict[str, Any], expected: set[str]) -> None:
    assert set(result["agreement"]) == expected
    for label, differences in result["agreement"].items():
        assert differences, f"{label}: nothing compared"
        assert "missing attributes" not in differences, label
        worst = max(differences.values())
        assert worst < TOLERANCE, f"{label} differs from bitsift by {worst:g}: {differences}"


@pytest.mark.slow
def test_duckdb_side_by_side(tmp_path: Path) -> None:
    stdout, result = run_harness(tmp_path, "--engine", "duckdb", "--attributes", "4")
    assert set(result["summaries"]) == {"a", "b", "b_fast", "c", "d", "e"}
    for label in ("(a) bitsift.rank", "(c) K GROUP BY queries", "(d) scan floor",
                  "(e) counting bound", "ratios:"):
        assert label in stdout
    for ratio in ("a/d", "b/a", "c/a", "peak RSS b/a", "e/d", "a/e"):
        assert any(r["name"].startswith(ratio) for r in result["ratios"]), ratio
    for summary in result["summaries"].values():
        assert summary["runs"] == 1
        assert summary["median_seconds"] > 0
        assert summary["median_peak_rss_mib"] > summary["median_rss_before_mib"] * 0.5
    assert_agreement(result, {"b", "b_fast", "c", "e"})
    # (e) counts the categorical attributes only (numeric ones fall into fixed buckets).
    assert set(result["agreement"]["e"]) == set(result["agreement"]["c"])


@pytest.mark.slow
def test_duckdb_categorical_only(tmp_path: Path) -> None:
    # Issue 20's all-categorical table: no numeric attribute, its own a/e target.
    _, result = run_harness(tmp_path, "--engine", "duckdb", "--attributes", "5",
                            "--categorical-only", "--no-export")
    assert result["categorical_only"] is True
    assert "(0 numeric, 5 categorical)" in result["dataset"]
    (bound,) = [r for r in result["ratios"] if r["name"].startswith("a/e")]
    assert bound["target"] == "<= 1.15"
    assert_agreement(result, {"c", "e"})
    # With no numeric attribute, the bound counts every attribute exactly as bitsift does.
    assert len(result["agreement"]["e"]) == len(result["agreement"]["c"])


def _require(engine: str) -> None:
    """pyspark and Java, or chdb: skip without them (fail with CI=true)."""
    module = {"spark": "pyspark", "clickhouse": "chdb"}.get(engine)
    missing = None
    if module and importlib.util.find_spec(module) is None:
        missing = f"{module} is not installed: pip install -e '.[test-all]' (make test)"
    elif engine == "spark" and shutil.which("java") is None and not os.environ.get("JAVA_HOME"):
        missing = "Java is not installed (Spark needs Java 17+)"
    if missing:
        if IN_CI:
            pytest.fail(missing)
        pytest.skip(missing)


#: The engines the table is copied to (benchmarks/copies.py): rows, label of (b'), timeout.
COPIED: dict[str, tuple[int, str, float]] = {
    "sqlite": (20_000, "(b') no columnar export: fetchall()", 120),
    "mariadb": (20_000, "(b') no columnar export: fetchall()", 300),
    "clickhouse": (20_000, "(b') export: chdb ArrowTable", 300),
    # A JVM per worker: fewer rows, a longer wait.
    "spark": (5_000, "(b') export: Spark toPandas, Arrow on", 900),
}


@pytest.mark.slow
@pytest.mark.parametrize("engine", [
    "sqlite",
    "mariadb",  # marked mariadb by conftest (an engine parameter naming the server)
    pytest.param("clickhouse", marks=pytest.mark.clickhouse),
    pytest.param("spark", marks=pytest.mark.spark),
])
def test_copied_engines_side_by_side(engine: str, tmp_path: Path,
                                     request: pytest.FixtureRequest) -> None:
    # Issue 20 item 2: every engine against its own counting bound, both export paths.
    _require(engine)
    options = []
    if engine == "mariadb":
        url = request.getfixturevalue("mariadb_engine").url
        options = ["--mariadb-url", url.render_as_string(hide_password=False)]
    rows, fast_label, timeout = COPIED[engine]
    stdout, result = run_harness(tmp_path, "--engine", engine, "--attributes", "4", *options,
                                 rows=rows, timeout=timeout)
    # SQLite and MariaDB: the bound on one session too (e1); the faster one is the bound.
    one_session = {"e1"} if engine in ("sqlite", "mariadb") else set()
    assert set(result["summaries"]) == {"a", "b", "b_fast", "c", "d", "e"} | one_session
    assert result["labels"]["b_fast"].startswith(fast_label)
    assert f"{engine}, {rows:,} rows x 4 attributes (1 numeric" in stdout
    (bound,) = [r for r in result["ratios"] if r["name"].startswith("a/e")]
    assert bound["target"] == "<= 1.3"
    fastest = min(result["summaries"][k]["median_seconds"] for k in {"e"} | one_session)
    assert bound["value"] == pytest.approx(result["summaries"]["a"]["median_seconds"] / fastest)
    assert bool(one_session) == any(r["name"].startswith("e1/e") for r in result["ratios"])
    assert_agreement(result, {"b", "b_fast", "c", "e"} | one_session)
    if engine == "mariadb":
        database = result["dataset_table"].split(".")[0]
        with request.getfixturevalue("mariadb_engine").connect() as connection:
            left = connection.exec_driver_sql(
                "SELECT count(*) FROM information_schema.schemata WHERE schema_name = %(s)s",
                {"s": database},
            ).scalar()
        assert left == 0, f"the benchmark left its database {database} behind"


@pytest.mark.slow
def test_duckdb_concurrent_strategies_agree(tmp_path: Path) -> None:
    # The one-statement strategies are checked against each other by the parity tests; here
    # the per-attribute and split runs over two sessions (bitsift.concurrent), and the quantile
    # bins counted from cells (bitsift.quantile_counts).
    strategies = {"per_attribute_concurrent", "split_concurrent", "counted_concurrent"}
    _, result = run_harness(tmp_path, "--engine", "duckdb", "--attributes", "5",
                            "--mode", "strategies", "--strategies", ",".join(sorted(strategies)))
    assert strategies | {"a", "d"} == set(result["summaries"])
    assert_agreement(result, strategies)


@pytest.mark.postgres
def test_postgres_side_by_side(tmp_path: Path, postgres_engine: sa.Engine) -> None:
    url = postgres_engine.url.render_as_string(hide_password=False)
    stdout, result = run_harness(tmp_path, "--engine", "postgres", "--attributes", "4",
                                 "--postgres-url", url)
    assert set(result["summaries"]) == {"a", "b", "b_fast", "c", "d", "e"}
    assert "postgres" in result["versions"]
    assert_agreement(result, {"b", "b_fast", "c", "e"})
    schema = result["dataset_table"].split(".")[0]
    with postgres_engine.connect() as connection:
        left = connection.exec_driver_sql(
            "SELECT count(*) FROM information_schema.schemata WHERE schema_name = %(s)s",
            {"s": schema},
        ).scalar()
    assert left == 0, f"the benchmark left its schema {schema} behind"


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["sqlite", "mariadb"])
def test_quantile_methods_agree(engine: str, request: pytest.FixtureRequest) -> None:
    # benchmarks/quantile_methods.py: every way of finding quantile bins, same gains.
    options = []
    if engine == "mariadb":
        url = request.getfixturevalue("mariadb_engine").url
        options = ["--mariadb-url", url.render_as_string(hide_password=False)]
    completed = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "quantile_methods.py"), "--engine", engine,
         "--rows", "3000", "--repeats", "1", *options],
        capture_output=True, text=True, timeout=120,
    )
    assert completed.returncode == 0, completed.stderr
    lines = completed.stdout.splitlines()
    methods = {line.split()[0] for line in lines if "median" in line}
    assert methods == ({"statement", "buckets", "counted"} if engine in ("sqlite", "mariadb")
                       else {"statement", "buckets"})
    difference = float(lines[-1].rsplit(" ", 1)[-1])
    assert difference <= TOLERANCE


@pytest.mark.slow
def test_compare_trees_runs_and_counts_statements(tmp_path: Path) -> None:
    # The tree against itself: the same statement count; timings are never asserted.
    out = tmp_path / "trees.json"
    src = str(ROOT / "src")
    completed = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "compare_trees.py"), "--baseline", src,
         "--candidate", src, "--rows", "3000", "--attributes", "4", "--repeats", "1",
         "--json", str(out)],
        capture_output=True, text=True, timeout=300,
    )
    assert completed.returncode == 0, completed.stderr
    report = json.loads(out.read_text(encoding="utf-8"))
    assert report["statements"]["baseline"] == report["statements"]["candidate"]
    assert len(report["seconds"]["candidate"]) == 1 and report["ratio"] > 0

@pytest.mark.parametrize("engine", ["mariadb", "postgres"])
def test_paste_strategies_agree(engine: str, request: pytest.FixtureRequest) -> None:
    # benchmarks/paste_strategies.py: the pasted statement per count strategy, same gains as
    # run mode (issue 21 item 8).
    server = request.getfixturevalue(f"{engine}_engine").url.render_as_string(
        hide_password=False)
    completed = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "paste_strategies.py"), "--engine", engine,
         "--rows", "3000", "--repeats", "1", f"--{engine}-url", server],
        capture_output=True, text=True, timeout=300,
    )
    assert completed.returncode == 0, completed.stderr
    lines = completed.stdout.splitlines()
    measured = {line.split()[0] for line in lines if "median" in line}
    assert measured == {"rank"} | (
        {"grouping_sets", "union_all", "cross_join", "union_scans"} if engine == "postgres"
        else {"cross_join+counts", "union_all+base+counts", "union_scans+counts"})
    assert float(lines[-1].rsplit(" ", 1)[-1]) <= TOLERANCE


def test_the_harness_knows_where_bitsift_cuts_near_quantiles() -> None:
    # benchmarks/run.py keeps its own copy (the harness does not import bitsift): the row
    # count above which bitsift's run-mode quantile cut points lie on fine-bucket edges.
    import ast

    from bitsift.run import quantile_counts

    found = [node.value for node in ast.parse(RUN.read_text()).body
             if isinstance(node, ast.Assign) and isinstance(node.value, ast.Constant)
             and any(isinstance(t, ast.Name) and t.id == "EXACT_QUANTILE_ROWS"
                     for t in node.targets)]
    assert [c.value for c in found] == [quantile_counts.EXACT_ROWS]
