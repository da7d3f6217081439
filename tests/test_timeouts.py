"""``--timeout`` values: checked at every entry point, within each engine's own limit, enforced.

nan, zero and negative values are one clear error line; ``inf`` means no limit; a value longer
than the engine can hold (PostgreSQL's statement_timeout is a 32-bit count of milliseconds,
MariaDB's max_statement_time at most a year, Python's timers ~292 years, chdb's int64
microseconds) is one line naming the engine, not an OverflowError, a DataError from the
server, a traceback in a timer thread, or a value silently cut. The tables are invented.
"""

from __future__ import annotations

import math
from pathlib import Path

import duckdb
import pytest
import sqlalchemy as sa
from conftest import MARIADB_URL, POSTGRES_URL

import bitsift
from bitsift.cli import main
from bitsift.engines.policy import run_policy
from bitsift.errors import QueryTimeoutError, SpecError
from bitsift.jobs.jobfile import JobError, load_job

BAD = ["nan", "-1", "0", "-inf"]


def _run(connection: sa.Connection, statement: str) -> None:
    connection.exec_driver_sql(statement, execution_options={"no_parameters": True})


@pytest.fixture
def small_db(tmp_path: Path) -> Path:
    path = tmp_path / "small.duckdb"
    with duckdb.connect(str(path)) as connection:
        connection.execute("CREATE TABLE t AS SELECT i % 3 AS a, i % 5 AS b, i % 2 AS y "
                           "FROM range(200) r(i)")
    return path


def run_cli(capsys: pytest.CaptureFixture[str], *args: str) -> tuple[int, str, str]:
    with pytest.raises(SystemExit) as exited:
        main(list(args))
        raise SystemExit(0)
    out, err = capsys.readouterr()
    return int(exited.value.code or 0), out, err


#: Every command that takes --timeout, with the options it needs besides it.
COMMANDS = {
    "rank": [],
    "check": [],
    "redundancy": [],
    "profile": ["--attribute", "a"],
    "report": ["--out", "REPORT"],
    "select": ["--k", "1"],
}


@pytest.mark.slow
@pytest.mark.parametrize("command", sorted(COMMANDS))
@pytest.mark.parametrize("value", BAD)
def test_bad_timeout_is_one_line_on_every_command(capsys: pytest.CaptureFixture[str],
                                                  small_db: Path, tmp_path: Path,
                                                  command: str, value: str) -> None:
    extra = [str(tmp_path / "r.html") if a == "REPORT" else a for a in COMMANDS[command]]
    code, out, err = run_cli(capsys, command, str(small_db), "-t", "t", "-y", "y",
                             f"--timeout={value}", *extra)
    assert (code, out) == (1, "")
    assert err == f"Error: --timeout must be a positive number of seconds, not {value}\n"
    assert not (tmp_path / "r.html").exists()


@pytest.mark.parametrize("value", BAD)
def test_sql_command_checks_the_timeout_too(capsys: pytest.CaptureFixture[str],
                                            value: str) -> None:
    code, out, err = run_cli(capsys, "sql", "-t", "t", "-a", "a", "-y", "y",
                             f"--timeout={value}")
    assert (code, out) == (1, "")
    assert err.startswith("Error: --timeout must be a positive number of seconds")


def test_timeout_longer_than_python_timers_is_one_line_on_duckdb(
        capsys: pytest.CaptureFixture[str], small_db: Path) -> None:
    # Was: OverflowError in DuckDB's timer thread, a traceback, and no timeout at all.
    code, out, err = run_cli(capsys, "rank", str(small_db), "-t", "t", "-y", "y",
                             "--timeout", "1e12")
    assert (code, out) == (1, "")
    assert err == ("Error: --timeout 1000000000000 s is longer than duckdb can enforce "
                   "(at most 9223372036 s); give inf for no limit\n")


@pytest.mark.slow
def test_inf_is_no_limit(small_db: Path) -> None:
    ranking = bitsift.rank(str(small_db), table="t", target="y", timeout=math.inf)
    assert len(ranking.attributes) == 2
    assert bitsift.run.api.make_options("y", timeout=math.inf).timeout is None


@pytest.mark.parametrize("value", [math.nan, -1.0, 0, "5", True])
def test_python_api_rejects_bad_timeouts(small_db: Path, value: object) -> None:
    with pytest.raises(SpecError, match="^timeout must be a"):
        bitsift.rank(str(small_db), table="t", target="y", timeout=value)  # type: ignore[arg-type]


def test_duckdb_enforces_a_long_timeout_within_its_limit(small_db: Path) -> None:
    # 3e6 s is past PostgreSQL's limit but within the timers': set, and the ranking runs.
    ranking = bitsift.rank(str(small_db), table="t", target="y", timeout=3e6)
    assert len(ranking.attributes) == 2


# --- job files ---------------------------------------------------------------------------------


def _job(tmp_path: Path, source: Path, timeout: str) -> Path:
    path = tmp_path / "job.toml"
    path.write_text(f'job = "j"\nsource = "{source}"\n\n[results]\ndestination = '
                    f'"{tmp_path / "h.duckdb"}"\ntable = "history"\n\n[defaults]\n'
                    f'target = "y"\ntimeout = {timeout}\n\n[[ranking]]\nname = "r"\n'
                    'table = "t"\n', encoding="utf-8")
    return path


@pytest.mark.parametrize("value", ["nan", "-1.0", "0"])
def test_job_file_timeout_is_checked_with_its_line(tmp_path: Path, small_db: Path,
                                                   value: str) -> None:
    with pytest.raises(JobError, match=r"job\.toml:10: ranking 1: timeout must be a positive"):
        load_job(_job(tmp_path, small_db, value))


def test_job_file_inf_is_no_limit(capsys: pytest.CaptureFixture[str], tmp_path: Path,
                                  small_db: Path) -> None:
    load_job(_job(tmp_path, small_db, "inf"))
    code, _, err = run_cli(capsys, "run", str(tmp_path / "job.toml"), "--run-id", "t1")
    assert code == 0, err


def test_job_file_timeout_beyond_the_engine_is_one_line(capsys: pytest.CaptureFixture[str],
                                                        tmp_path: Path, small_db: Path) -> None:
    code, _, err = run_cli(capsys, "run", str(_job(tmp_path, small_db, "1e12")),
                           "--run-id", "t1")
    assert code == 1
    assert "longer than duckdb can enforce" in err and len(err.strip().splitlines()) == 1


# --- the servers' limits -----------------------------------------------------------------------


@pytest.mark.postgres
def test_postgres_takes_its_longest_timeout_and_refuses_a_longer_one(
        pg_schema: str, postgres_engine: sa.Engine) -> None:
    with postgres_engine.begin() as connection:
        _run(connection, f'CREATE TABLE "{pg_schema}".t AS SELECT i % 3 AS a, '
                                   "i % 5 AS b, i % 2 AS y FROM generate_series(1, 50) i")
    longest = run_policy("postgres").timeout.longest
    ranking = bitsift.rank(POSTGRES_URL, table=f"{pg_schema}.t", target="y", timeout=longest)
    assert "SET LOCAL statement_timeout = 2147483647" in ranking.statements
    # Was: sqlalchemy DataError "2999999999 ms is outside the valid range".
    with pytest.raises(SpecError, match=r"--timeout 3000000 s is longer than postgres can "
                                        r"enforce \(at most 2147483\.647 s\)"):
        bitsift.rank(POSTGRES_URL, table=f"{pg_schema}.t", target="y", timeout=3e6)


@pytest.mark.mariadb
def test_mariadb_takes_its_longest_timeout_refuses_a_longer_one_and_enforces_a_short_one(
        mariadb_database: str, mariadb_engine: sa.Engine) -> None:
    db = mariadb_database
    with mariadb_engine.begin() as connection:
        _run(connection, f"CREATE TABLE `{db}`.t AS SELECT seq % 3 AS a, "
                                   "seq % 5 AS b, seq % 2 AS y FROM seq_1_to_50")
        _run(connection, f"CREATE FUNCTION `{db}`.nap() RETURNS INT "
                                   "NOT DETERMINISTIC RETURN SLEEP(0.05) = 0")
        _run(connection, f"CREATE VIEW `{db}`.slow AS SELECT a, b, y FROM `{db}`.t "
                                   f"WHERE `{db}`.nap()")
    ranking = bitsift.rank(MARIADB_URL, table=f"{db}.t", target="y", timeout=31_536_000)
    assert any("max_statement_time = 31536000.000000 FOR" in s for s in ranking.statements)
    # Was: accepted, and silently cut to a year by the server.
    with pytest.raises(SpecError, match="longer than mariadb can enforce"):
        bitsift.rank(MARIADB_URL, table=f"{db}.t", target="y", timeout=4e7)
    # 50 rows x 0.05 s: the 1 s timeout fires.
    with pytest.raises(QueryTimeoutError, match="--timeout 1 s"):
        bitsift.rank(MARIADB_URL, table=f"{db}.slow", target="y", timeout=1)
