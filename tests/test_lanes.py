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


def _make_target(name: str) -> tuple[str, list[str]]:
    """A Makefile target's prerequisites and recipe lines."""
    lines = (ROOT / "Makefile").read_text().splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith(f"{name}:"))
    recipe = []
    for line in lines[start + 1:]:
        if not line.startswith("\t"):
            break
        recipe.append(line.strip())
    return lines[start].partition(":")[2], recipe


def test_make_test_installs_no_browser_and_ci_does() -> None:
    # Issue 21 item 11: `make test` as root installed Chromium and ~250 system packages.
    for target in ("test", "test-fast", "lint"):
        prerequisites, recipe = _make_target(target)
        assert "browser" not in prerequisites.split(), target
        assert not any("apt-get" in line or "make browser" in line for line in recipe), target
    _, browser = _make_target("browser")
    assert any("apt-get install" in line and "chromium" in line for line in browser)
    ci = [line.strip() for line in (ROOT / ".ci" / "run").read_text().splitlines()
          if line.strip() and not line.lstrip().startswith("#")]
    assert ci.index("make browser") < ci.index("make test")
    assert 'export CI="${CI:-true}"' in ci


def test_the_browser_test_skips_with_a_reason_locally_and_fails_in_ci(
        monkeypatch: pytest.MonkeyPatch) -> None:
    import test_report_browser

    monkeypatch.setattr(test_report_browser.shutil, "which", lambda _name: None)
    monkeypatch.setattr(test_report_browser, "Path", lambda _p: ROOT / "no" / "such" / "file")
    reason = "headless Chromium not found: install the Debian package 'chromium' (`make browser`"
    monkeypatch.setattr(test_report_browser, "IN_CI", False)
    with pytest.raises(pytest.skip.Exception, match=re.escape(reason)):
        test_report_browser.chromium()
    monkeypatch.setattr(test_report_browser, "IN_CI", True)
    with pytest.raises(pytest.fail.Exception, match=re.escape(reason)):
        test_report_browser.chromium()
