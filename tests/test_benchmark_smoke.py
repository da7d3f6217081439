"""A tiny run of the benchmark harness, so it never rots.

Checks the report's structure and that the contenders compute the same numbers as bitsift
(never timings: speed lives in benchmarks/RESULTS.md).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
import sqlalchemy as sa

ROOT = Path(__file__).resolve().parents[1]
RUN = ROOT / "benchmarks" / "run.py"
#: Metrics agree to rounding: different summation orders, same counts.
TOLERANCE = 1e-9


def run_harness(tmp_path: Path, *options: str) -> tuple[str, dict[str, Any]]:
    out = tmp_path / "result.json"
    completed = subprocess.run(
        [sys.executable, str(RUN), "--rows", "20000", "--repeats", "1", "--warmup", "0",
         "--quiet", "--json", str(out), *options],
        capture_output=True,
        text=True,
        timeout=120,
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
    assert set(result["summaries"]) == {"a", "b", "b_arrow", "c", "d", "e"}
    for label in ("(a) bitsift.rank", "(c) K GROUP BY queries", "(d) scan floor",
                  "(e) counting bound", "ratios:"):
        assert label in stdout
    for ratio in ("a/d", "b/a", "c/a", "peak RSS b/a", "e/d", "a/e"):
        assert any(r["name"].startswith(ratio) for r in result["ratios"]), ratio
    for summary in result["summaries"].values():
        assert summary["runs"] == 1
        assert summary["median_seconds"] > 0
        assert summary["median_peak_rss_mib"] > summary["median_rss_before_mib"] * 0.5
    assert_agreement(result, {"b", "b_arrow", "c", "e"})
    # (e) counts the categorical attributes only (numeric ones fall into fixed buckets).
    assert set(result["agreement"]["e"]) == set(result["agreement"]["c"])


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
    assert set(result["summaries"]) == {"a", "b", "c", "d", "e"}
    assert "postgres" in result["versions"]
    assert_agreement(result, {"b", "c", "e"})
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
    assert measured == {"rank", "union_all", "cross_join"} | (
        {"grouping_sets"} if engine == "postgres" else
        {"cross_join+counts", "union_all+base+counts"})
    assert float(lines[-1].rsplit(" ", 1)[-1]) <= TOLERANCE
