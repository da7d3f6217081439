"""The fast lane (``make test-fast``) leaves out every test that needs a server, Spark or
ClickHouse, including tests that never name the marker themselves.

Collected in a subprocess with the Makefile's own marker expression (FAST_MARKERS), so the test
checks what ``make test-fast`` deselects. The server cases below reach their server in ways
that carry no marker of their own: an ``engine`` parameter, a fixture (``pg_schema``), a
parametrised fixture (test_history's ``destination``); none of them is slow, so only its
server marker keeps it out.
"""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: (test id, the marker it must carry)
NEEDS_SERVER = [
    ("tests/test_limits.py::test_counts_come_back_as_64_bit_integers[postgres]", "postgres"),
    ("tests/test_limits.py::test_counts_come_back_as_64_bit_integers[mariadb]", "mariadb"),
    ("tests/test_fuzz.py::test_postgres_case_variant_names_stay_apart", "postgres"),
    ("tests/test_history.py::test_a_failed_write_changes_nothing[mariadb]", "mariadb"),
    ("tests/test_spark.py::test_parquet_matches_reference_and_duckdb", "spark"),
    ("tests/test_clickhouse.py::test_parquet_matches_reference_and_duckdb", "clickhouse"),
]


def fast_markers() -> str:
    match = re.search(r"^FAST_MARKERS := (.+)$", (ROOT / "Makefile").read_text(), re.M)
    assert match, "FAST_MARKERS is missing from the Makefile"
    return match.group(1).strip()


def collected(marker_expression: str, *paths: str) -> set[str]:
    done = subprocess.run(
        [sys.executable, "-m", "pytest", "--collect-only", "-q", "-p", "no:cacheprovider",
         "-m", marker_expression, *paths],
        cwd=ROOT, capture_output=True, text=True, timeout=600, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    return {line for line in done.stdout.splitlines() if "::" in line}


@pytest.mark.slow
def test_fast_lane_leaves_out_tests_that_need_a_server_spark_or_clickhouse() -> None:
    files = sorted({test.partition("::")[0] for test, _ in NEEDS_SERVER})
    fast = collected(fast_markers(), *files)
    assert fast, "the fast lane selects no test at all"
    for marker in sorted({marker for _, marker in NEEDS_SERVER}):
        marked = collected(marker, *files)
        for test, wanted in NEEDS_SERVER:
            if wanted == marker:
                assert test not in fast, f"{test} runs in the fast lane"
                assert test in marked, f"{test} is not marked {marker}"
