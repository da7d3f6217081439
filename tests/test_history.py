"""The results history table: documented schema, creation, refusal of incompatible tables, one
transaction per run, and (issue 16) writers taking turns, byte-exact keys, names of any length
and script, and Ctrl-C during the write; on DuckDB, SQLite, PostgreSQL and MariaDB.

Data: random rows (test_jobs.random_rows, seeded) and invented names."""

from __future__ import annotations

import datetime as _dt
import json
import os
import re
import signal
import subprocess
import sys
import textwrap
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa
from conftest import MARIADB_URL, unique_name
from sqlglot import exp
from test_errors import run_main
from test_faults import _default_sigint, finish, wait_for
from test_jobs import POSTGRES_URL, duckdb_source, history_count, random_rows, two_rankings

import bitsift
import bitsift.run.api
from bitsift.jobs import duckdb_file
from bitsift.jobs.drift import drift
from bitsift.jobs.history import (
    ADDED_IN_2,
    ADDED_IN_3,
    COLUMN_NAMES,
    COLUMNS,
    SCHEMA_VERSION,
    Destination,
    HistoryError,
    compatibility_problems,
    ranking_rows,
)
from bitsift.jobs.history_open import open_store
from bitsift.jobs.job_run import preflight, run_job
from bitsift.jobs.jobfile import JobError, load_job
from bitsift.output.formatting import render

ROOT = Path(__file__).resolve().parents[1]
RUN_AT = _dt.datetime(2026, 3, 1, 4, 5, 6, 789000, tzinfo=_dt.UTC)


@pytest.fixture(scope="module")
def ranking(tmp_path_factory: pytest.TempPathFactory) -> bitsift.Ranking:
    path = duckdb_source(tmp_path_factory.mktemp("history") / "src.duckdb")
    return bitsift.rank(str(path), target="y", table="t")


def rows_of(ranking: bitsift.Ranking, run_id: str = "r1") -> list[dict[str, object]]:
    return ranking_rows(ranking, run_id=run_id, run_at=RUN_AT, job="j", ranking_name="all",
                        options={"target": "y", "bins": 10})


@pytest.fixture(params=["duckdb", "sqlite",
                        pytest.param("postgres", marks=pytest.mark.postgres),
                        pytest.param("mariadb", marks=pytest.mark.mariadb)])
def destination(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[Destination]:
    if request.param == "duckdb":
        yield Destination(str(tmp_path / "h.duckdb"), "history")
    elif request.param == "sqlite":
        yield Destination(f"sqlite:///{tmp_path / 'h.sqlite'}", "history")
    elif request.param == "postgres":
        schema = request.getfixturevalue("pg_schema")
        yield Destination(POSTGRES_URL, f"{schema}.history")
    else:
        database = request.getfixturevalue("mariadb_database")
        yield Destination(MARIADB_URL, f"{database}.history")


def execute(destination: Destination, sql: str) -> None:
    """Scratch DDL for the tests, on the destination's engine."""
    if destination.is_url:
        engine = sa.create_engine(destination.location, poolclass=sa.pool.NullPool)
        with engine.begin() as connection:
            connection.exec_driver_sql(sql)
        engine.dispose()
    else:
        with duckdb.connect(str(destination.path)) as con:
            con.execute(sql)


def test_documented_schema_lists_every_column() -> None:
    text = (ROOT / "docs" / "scheduled-runs.md").read_text(encoding="utf-8")
    section = text.split("\n## The history table", 1)[1].split("\n## ", 1)[0]
    documented = re.findall(r"^\| `([a-z_]+)` \|", section, flags=re.MULTILINE)
    assert tuple(documented) == COLUMN_NAMES
    assert f"schema version {SCHEMA_VERSION}" in text


def test_rows_of_a_ranking(ranking: bitsift.Ranking) -> None:
    rows = rows_of(ranking)
    assert [r["position"] for r in rows] == list(range(1, len(ranking.attributes) + 1))
    assert all(set(r) == set(COLUMN_NAMES) for r in rows)
    first = rows[0]
    best = ranking.attributes[0]
    assert (first["attribute"], first["information_gain"]) == (best.attribute,
                                                               best.information_gain)
    assert first["run_at"] == _dt.datetime(2026, 3, 1, 4, 5, 6, 789000)  # naive UTC
    assert first["options"] == '{"bins":10,"target":"y"}'
    assert first["segment"] == "" and first["schema_version"] == SCHEMA_VERSION


@pytest.mark.slow
def test_cut_points_are_stored_as_the_json_output_writes_them(tmp_path: Path) -> None:
    """Issue 21: numbers with every digit they need, dates and timestamps in ISO 8601, NULL for
    categorical attributes. Data: invented seeded trays."""
    rng = np.random.default_rng(21)
    n = 400
    frame = pd.DataFrame({
        "close": rng.choice([1.0, 1.000001, 1.000002, 1.000003], n),
        "sown": pd.to_datetime("2026-03-01") + pd.to_timedelta(rng.integers(0, 60, n), "D"),
        "lit": pd.to_datetime("2026-03-01") + pd.to_timedelta(rng.integers(0, 10**6, n), "s"),
        "bench": rng.choice(["north", "south"], n),
        "y": rng.choice(["sprouted", "not"], n),
    })
    path = tmp_path / "trays.duckdb"
    with duckdb.connect(str(path)) as con:
        con.register("frame", frame)
        con.execute("CREATE TABLE trays AS SELECT close, CAST(sown AS DATE) AS sown, "
                    "CAST(lit AS TIMESTAMP) AS lit, bench, y FROM frame")
    ranking = bitsift.rank(str(path), target="y", table="trays", bins=4)
    rows = {r["attribute"]: r["cut_points"] for r in rows_of(ranking)}
    shown = {a["attribute"]: a["cuts"] for a in json.loads(render(ranking, "json"))["attributes"]}
    assert rows["bench"] is None and shown["bench"] is None
    for name in ("close", "sown", "lit"):
        assert rows[name] == json.dumps(shown[name], separators=(",", ":")), name
    assert "1.000001" in rows["close"] and "1.000002" in rows["close"]
    assert all(re.fullmatch(r"\d{4}-\d{2}-\d{2}", c) for c in json.loads(rows["sown"]))
    assert all(re.fullmatch(r"\d{4}-\d{2}-\d{2}T[\d:.]+", c) for c in json.loads(rows["lit"]))
    destination = Destination(str(tmp_path / "h.duckdb"), "history")
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
        read = {r["attribute"]: r["cut_points"] for r in store.read("j", ["r1"])}
    assert read == rows


@pytest.mark.slow
def test_creates_the_table_and_round_trips_rows(destination: Destination,
                                                ranking: bitsift.Ranking) -> None:
    with open_store(destination, write=True) as store:
        assert store.check() is False
        assert store.replace_run("j", "r1", rows_of(ranking)) == 4
        assert store.check() is True
        runs = store.runs("j")
        read = store.read("j", ["r1"])
        existing = store.existing_columns()
    assert [(r.run_id, r.run_at, r.rows) for r in runs] == [
        ("r1", _dt.datetime(2026, 3, 1, 4, 5, 6, 789000), 4)
    ]
    assert existing is not None and list(existing) == list(COLUMN_NAMES)
    assert {c.name: existing[c.name] for c in COLUMNS} == {c.name: c.family for c in COLUMNS}
    expected = {r["attribute"]: r for r in rows_of(ranking)}
    for row in read:
        assert row == expected[row["attribute"]]


def test_a_failed_write_changes_nothing(destination: Destination,
                                        ranking: bitsift.Ranking) -> None:
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
        broken = rows_of(ranking)
        broken[-1]["attribute"] = None  # NOT NULL: the last insert fails
        with pytest.raises(HistoryError, match="nothing was written"):
            store.replace_run("j", "r1", broken)  # the delete of r1 is rolled back too
        with pytest.raises(HistoryError):
            store.replace_run("j", "r2", broken)
        assert [(r.run_id, r.rows) for r in store.runs("j")] == [("r1", 4)]


@pytest.mark.slow
def test_an_incompatible_table_is_refused_and_left_alone(destination: Destination,
                                                         ranking: bitsift.Ranking,
                                                         tmp_path: Path) -> None:
    table = destination.table_name().sql(destination.sqlglot_dialect())
    execute(destination, f"CREATE TABLE {table} (run_id VARCHAR(100), job TEXT, "
                         "information_gain TEXT, note TEXT)")
    with open_store(destination, write=True) as store:
        with pytest.raises(HistoryError) as caught:
            store.replace_run("j", "r1", rows_of(ranking))
        message = str(caught.value)
        assert f"is not a bitsift history table of schema version {SCHEMA_VERSION}" in message
        assert "missing column(s) schema_version, run_at," in message
        assert "unexpected column(s) note" in message
        assert "column information_gain holds text, expected float" in message
        assert "never alters an existing table" in message
        assert set(store.existing_columns() or {}) == {"run_id", "job", "information_gain",
                                                       "note"}
    # A job pointing at that table fails its checks before ranking anything.
    source = duckdb_source(tmp_path / "src.duckdb")
    job_file = tmp_path / "job.toml"
    job_file.write_text(
        f'source = "{source}"\n[results]\ndestination = "{destination.location}"\n'
        f'table = "{destination.table}"\n[[ranking]]\ntable = "t"\ntarget = "y"\n')
    with pytest.raises(bitsift.BitsiftError, match=r"job.toml:2: results table .* not a bitsift"):
        preflight(load_job(job_file))


@pytest.mark.slow
@pytest.mark.parametrize("version", [1, 2])
def test_an_older_table_is_read_then_migrated_by_the_next_write(
        destination: Destination, ranking: bitsift.Ranking, version: int) -> None:
    # Issue 18: schema version 2 added the gain's se, interval and rank range; issue 21:
    # version 3 the cut points. An older table (made here from a new one) is read with those
    # NULL, and the next write adds them.
    added = [c.name for c in (*ADDED_IN_2, *ADDED_IN_3)[(version - 1) * len(ADDED_IN_2):]]
    table = destination.table_name().sql(destination.sqlglot_dialect())
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
    for name in added:
        execute(destination, f"ALTER TABLE {table} DROP COLUMN {name}")
    execute(destination, f"UPDATE {table} SET schema_version = {version}")
    with open_store(destination) as store:
        assert store.check() is True
        old = store.read("j", ["r1"])
        assert set(store.existing_columns() or {}) == set(COLUMN_NAMES) - set(added)
    assert old and all(row[name] is None for row in old for name in added)
    assert all(row["schema_version"] == version for row in old)
    with open_store(destination, write=True) as store:
        assert store.replace_run("j", "r2", rows_of(ranking, "r2")) == 4
        existing = store.existing_columns()
        both = store.read("j", ["r1", "r2"])
    assert existing is not None and list(existing) == list(COLUMN_NAMES)
    assert {c.name: existing[c.name] for c in COLUMNS} == {c.name: c.family for c in COLUMNS}
    expected = {r["attribute"]: r for r in rows_of(ranking, "r2")}
    for row in both:
        if row["run_id"] == "r2":
            assert row == expected[row["attribute"]]
            assert row["information_gain_corrected"] is not None
        else:
            assert all(row[name] is None for name in added)
            assert row["information_gain_corrected"] is not None or version == 1
    assert {row["cut_points"] is None for row in both if row["run_id"] == "r2"} == {False, True}
    assert drift(destination, "j").changes is not None  # old and new rows compare


def test_a_table_lacking_only_some_new_columns_is_refused() -> None:
    families = {c.name: c.family for c in COLUMNS if c.name != "rank_high"}
    assert compatibility_problems(families) == ["missing column(s) rank_high"]
    version_1 = {c.name: c.family for c in COLUMNS if c not in ADDED_IN_2 + ADDED_IN_3}
    version_2 = {c.name: c.family for c in COLUMNS if c not in ADDED_IN_3}
    assert compatibility_problems(version_1) == compatibility_problems(version_2) == []
    # Version 2's columns without version 3's, less one of version 2's: no older version.
    partial = {name: family for name, family in version_2.items() if name != "rank_low"}
    assert compatibility_problems(partial) == ["missing column(s) rank_low"]
    # Version 3's column without version 2's: no older version either.
    skipped = {c.name: c.family for c in COLUMNS if c not in ADDED_IN_2}
    assert compatibility_problems(skipped) == [
        "missing column(s) " + ", ".join(c.name for c in ADDED_IN_2)]


def test_rows_from_a_newer_schema_are_refused(tmp_path: Path, ranking: bitsift.Ranking) -> None:
    destination = Destination(str(tmp_path / "h.duckdb"), "history")
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
    execute(destination, f"UPDATE history SET schema_version = {SCHEMA_VERSION + 1}")
    with open_store(destination) as store, pytest.raises(HistoryError, match="newer bitsift"):
        store.check()


@pytest.mark.slow
def test_schema_qualified_table_in_duckdb(tmp_path: Path, ranking: bitsift.Ranking) -> None:
    destination = Destination(str(tmp_path / "h.duckdb"), "ops.rank_history")
    execute(destination, "CREATE SCHEMA ops")
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
    with duckdb.connect(str(destination.path), read_only=True) as con:
        count = con.execute("SELECT COUNT(*) FROM ops.rank_history").fetchone()
    assert count == (4,)
    missing_schema = Destination(str(tmp_path / "h.duckdb"), "nope.rank_history")
    with open_store(missing_schema, write=True) as store, pytest.raises(HistoryError,
                                                                        match="nope"):
        store.replace_run("j", "r1", rows_of(ranking))


def test_destination_problems_without_connecting(tmp_path: Path) -> None:
    assert Destination(str(tmp_path / "h.duckdb"), "a.b").problems() == []
    assert "folder of the results file does not exist" in Destination(
        str(tmp_path / "no" / "h.duckdb")).problems()[0]
    assert "results table must be" in Destination(POSTGRES_URL, "c.s.t").problems()[0]
    assert Destination("postgresql+psycopg://u:secret@h/db").display == (
        "postgresql+psycopg://u:***@h/db")


# --- trust (issue 16): concurrent writers, twin keys, long and unicode names, Ctrl-C ------------

#: Concurrent `bitsift run` processes in the concurrency test.
WRITERS = 4

#: A `bitsift run` child that widens the race windows without changing what it does: every
#: writer waits at a barrier (until all have ranked, or 10 s) before opening the results for
#: writing, and a SQLAlchemy writer pauses 0.3 s after looking at the table and before writing,
#: as a busy server might. Arguments: barrier folder, writer count, then bitsift's arguments.
RACING_CHILD = textwrap.dedent("""\
    import os, sys, time
    from pathlib import Path
    from bitsift.jobs import history_sqlalchemy
    from bitsift.jobs import job_run

    barrier, count = Path(sys.argv[1]), int(sys.argv[2])
    open_store = job_run.open_store

    def open_at_the_barrier(destination, *, write=False):
        if write:
            (barrier / str(os.getpid())).touch()
            deadline = time.monotonic() + 10
            while len(list(barrier.iterdir())) < count and time.monotonic() < deadline:
                time.sleep(0.01)
        return open_store(destination, write=write)

    existing = history_sqlalchemy.SqlAlchemyStore._existing

    def slow_existing(self, connection):
        found = existing(self, connection)
        time.sleep(0.3)
        return found

    job_run.open_store = open_at_the_barrier
    history_sqlalchemy.SqlAlchemyStore._existing = slow_existing
    from bitsift.cli import main
    main(sys.argv[3:])
""")


def _job_file(folder: Path, destination: Destination, *, job: str = "nightly",
              source: Path | None = None) -> Path:
    source = source or duckdb_source(folder / "src.duckdb")
    path = folder / "job.toml"
    path.write_text(two_rankings(str(source), destination.location, destination.table)
                    .replace('job = "nightly"', f"job = {json.dumps(job)}"), encoding="utf-8")
    return path


def _child(script: str, *args: str) -> subprocess.Popen[str]:
    return subprocess.Popen([sys.executable, "-c", script, *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True,
                            preexec_fn=_default_sigint if os.name == "posix" else None)  # noqa: PLW1509


@pytest.mark.slow
@pytest.mark.parametrize("table_exists", [False, True], ids=["first-runs", "reruns"])
def test_concurrent_runs_of_one_run_id_leave_one_record_set(destination: Destination,
                                                             tmp_path: Path,
                                                             table_exists: bool) -> None:
    # Issue 16 item 5: before, PostgreSQL kept every row twice (each writer deleted before the
    # other inserted), racing first runs failed on creating the table, and a second DuckDB
    # writer failed on the file lock after ranking: its results were lost.
    job_file = _job_file(tmp_path, destination)
    earlier = {}
    if table_exists:
        run_job(load_job(job_file), "earlier")
        earlier = {"earlier": 7}
    barrier = tmp_path / "barrier"
    barrier.mkdir()
    children = [_child(RACING_CHILD, str(barrier), str(WRITERS), "run", str(job_file),
                       "--run-id", "same") for _ in range(WRITERS)]
    outcomes = [finish(child, seconds=120) for child in children]
    assert [(code, err) for code, _, err in outcomes] == [(0, "")] * WRITERS
    assert all(out.rstrip().endswith(f"wrote 7 rows to {destination.table} in "
                                      f"{destination.display}") for _, out, _ in outcomes)
    assert history_count(destination) == {**earlier, "same": 7}
    with open_store(destination) as store:
        rows = store.read("nightly", ["same"])
    assert sorted((r["ranking"], r["position"]) for r in rows) == (
        [("all", p) for p in range(1, 4)] + [("positive", p) for p in range(1, 5)])


@pytest.mark.slow
def test_a_results_file_held_too_long_fails_before_ranking(tmp_path: Path,
                                                           monkeypatch: pytest.MonkeyPatch
                                                           ) -> None:
    # A DuckDB results file admits one writing process; a run waits for it (bounded), and
    # when the wait runs out it stops at its checks, before any ranking work, in one line.
    destination = Destination(str(tmp_path / "h.duckdb"), "history")
    job = load_job(_job_file(tmp_path, destination))
    holder = _child("import duckdb, sys, time\ncon = duckdb.connect(sys.argv[1])\n"
                    "print('held', flush=True)\ntime.sleep(30)\n", str(destination.path))
    try:
        assert holder.stdout is not None and holder.stdout.readline() == "held\n"
        monkeypatch.setattr(duckdb_file, "WRITE_WAIT_SECONDS", 0.5)
        ranked: list[object] = []
        monkeypatch.setattr(bitsift.run.api, "rank", lambda *a, **k: ranked.append(a))
        with pytest.raises(JobError) as caught:
            run_job(job, "late")
    finally:
        holder.kill()
        holder.communicate()
    message = str(caught.value)
    assert f"results file {destination.path} was held by another process for more than " \
           "0.5 s, so nothing was written to it: IO Error: Could not set lock" in message
    assert ranked == []
    assert history_count(destination) == {}


def _real_duckdb_header(folder: Path) -> bytes:
    made = folder / "made.duckdb"
    duckdb.connect(str(made)).close()
    return made.read_bytes()


def test_which_short_files_look_half_created(tmp_path: Path) -> None:
    # The CI failure this guards: a racing first run opened the results file after another
    # run had created it and before DuckDB wrote its headers ("exists, but it is not a valid
    # DuckDB database file"), and failed instead of waiting its turn.
    header = _real_duckdb_header(tmp_path)
    assert len(header) == duckdb_file.HEADER_BYTES
    cases = {b"": True, bytes(100): True, header[:4096]: True, header: False,
             b"run,position\n1,2\n": False, b"x" * 20000: False}
    for number, (content, expected) in enumerate(cases.items()):
        path = tmp_path / f"{number}.duckdb"
        path.write_bytes(content)
        assert duckdb_file.being_created(path) is expected, content[:20]
    assert not duckdb_file.being_created(tmp_path / "missing.duckdb")


def test_a_results_file_being_created_is_waited_for(tmp_path: Path) -> None:
    header = _real_duckdb_header(tmp_path)
    path = tmp_path / "h.duckdb"
    path.write_bytes(b"")
    staged = tmp_path / "staged.duckdb"
    staged.write_bytes(header)
    finisher = threading.Timer(0.3, os.replace, (staged, path))
    finisher.start()
    try:
        con = duckdb_file.connect_file(path, read_only=False)
    finally:
        finisher.join()
    try:
        assert con.execute("SELECT 42").fetchone() == (42,)
    finally:
        con.close()


def test_a_file_that_stays_half_created_fails_in_one_line(tmp_path: Path,
                                                         monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(duckdb_file, "CREATION_WAIT_SECONDS", 0.2)
    path = tmp_path / "h.duckdb"
    path.write_bytes(b"")
    with pytest.raises(HistoryError) as caught:
        duckdb_file.connect_file(path, read_only=False)
    message = str(caught.value)
    assert message.startswith(f"cannot open results file {path}: ")
    assert "not a valid DuckDB database file" in message and "\n" not in message


def test_a_file_that_is_not_duckdb_fails_at_once(tmp_path: Path,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(duckdb_file, "CREATION_WAIT_SECONDS", 30.0)
    path = tmp_path / "h.duckdb"
    path.write_text("run,position\n1,2\n", encoding="utf-8")
    started = time.monotonic()
    with pytest.raises(HistoryError, match="cannot open results file"):
        duckdb_file.connect_file(path, read_only=False)
    assert time.monotonic() - started < 5


TWIN_JOBS = ("Sales", "sales", "sales ")


def _rows_for(ranking: bitsift.Ranking, job: str, run_id: str, minute: int
              ) -> list[dict[str, object]]:
    return ranking_rows(ranking, run_id=run_id, run_at=RUN_AT.replace(minute=minute), job=job,
                        ranking_name="all", options={"target": "y"})


def test_rows_of_another_run_are_refused(tmp_path: Path, ranking: bitsift.Ranking) -> None:
    # replace_run deletes (job, run_id) and inserts the rows: rows carrying other keys would
    # not replace that run but sit beside it, and a rerun would double them.
    destination = Destination(str(tmp_path / "h.duckdb"), "history")
    with open_store(destination, write=True) as store:
        with pytest.raises(HistoryError, match=r"rows of job 'j', run 'r1' cannot be written as "
                                               r"job 'nightly', run 'r2'; nothing was written"):
            store.replace_run("nightly", "r2", rows_of(ranking))
        assert store.runs("j") == [] and store.runs("nightly") == []


@pytest.mark.slow
def test_twin_job_names_and_run_ids_stay_apart(destination: Destination,
                                               ranking: bitsift.Ranking) -> None:
    # Issue 16 item 6: on MariaDB the default collation ignores case and trailing spaces, so
    # each job's rerun deleted its twins' rows, and runs R1 and r1 were counted as one.
    with open_store(destination, write=True) as store:
        for minute, job in enumerate(TWIN_JOBS):
            store.replace_run(job, "R1", _rows_for(ranking, job, "R1", minute))
        store.replace_run("sales", "r1", _rows_for(ranking, "sales", "r1", 10))
        store.replace_run("Sales", "R1", _rows_for(ranking, "Sales", "R1", 20))  # a rerun
        runs = {job: [(r.run_id, r.run_at.minute, r.rows) for r in store.runs(job)]
                for job in TWIN_JOBS}
        read = store.read("sales", ["r1"])
        both = store.read("sales", ["R1", "r1"])
    assert runs == {"Sales": [("R1", 20, 4)], "sales": [("r1", 10, 4), ("R1", 1, 4)],
                    "sales ": [("R1", 2, 4)]}
    assert {(r["job"], r["run_id"]) for r in read} == {("sales", "r1")} and len(read) == 4
    assert sorted((r["job"], r["run_id"]) for r in both) == (
        [("sales", "R1")] * 4 + [("sales", "r1")] * 4)
    # Reading for drift: the job's own two runs, not a twin's.
    report = drift(destination, "sales")
    assert report.old is not None and report.new is not None
    assert (report.old.run_id, report.new.run_id, report.new.rows) == ("R1", "r1", 4)
    assert drift(destination, "sales ").notes == [
        f"job 'sales ' has 1 run in {destination.table}: nothing to compare yet"]


def test_a_mariadb_url_destination_is_usable(mariadb_database: str,
                                             ranking: bitsift.Ranking) -> None:
    # Issue 16 item 7: `mariadb+pymysql://` failed with "unexpected ValueError: Unknown dialect
    # 'mariadb'" (bitsift's dialect name was handed to sqlglot).
    url = MARIADB_URL.replace("mysql+pymysql://", "mariadb+pymysql://")
    destination = Destination(url, f"{mariadb_database}.history")
    assert destination.problems() == []
    assert destination.sqlglot_dialect() == "mysql"
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
        assert [(r.run_id, r.rows) for r in store.runs("j")] == [("r1", 4)]


#: Invented column names: 300 characters (DuckDB allows it), a few scripts, and emoji.
LONG_NAME = ("reading_of_the_" + "very_" * 57)[:289] + "long_sensor"
ODD_NAMES = (LONG_NAME, "Größe", "温度", "🌱 sprout 🌧")
SHORT_ODD_NAMES = (*ODD_NAMES[1:], "🌧")


def _odd_names_source(path: Path) -> Path:
    rows = random_rows(300)
    con = duckdb.connect(str(path))
    con.execute("CREATE TABLE t (a INTEGER, b VARCHAR, amount DOUBLE, label VARCHAR, y VARCHAR)")
    con.executemany("INSERT INTO t VALUES (?, ?, ?, ?, ?)",
                    [[r["a"], r["b"], r["amount"], r["label"], r["y"]] for r in rows])
    for old, new in zip(("a", "b", "amount", "label"), ODD_NAMES, strict=True):
        con.execute(exp.rename_column("t", old, new).sql("duckdb"))
    con.close()
    return path


def _odd_names_job(folder: Path, destination: Destination) -> Path:
    job_file = _job_file(folder, destination, source=_odd_names_source(folder / "s.duckdb"))
    text = (job_file.read_text(encoding="utf-8")
            .replace('exclude = ["label"]', 'exclude = ["🌱 sprout 🌧"]')
            .replace('where = "amount > 0"', "where = '\"温度\" > 0'"))
    job_file.write_text(text, encoding="utf-8")
    return job_file


@pytest.mark.slow
def test_names_of_any_length_and_script_are_stored(destination: Destination,
                                                   tmp_path: Path,
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    # Issue 16 item 7: a 300-character attribute passed --dry-run, then the write failed on
    # PostgreSQL and MariaDB (VARCHAR(255)) and the run was lost.
    assert len(LONG_NAME) == 300
    job_file = _odd_names_job(tmp_path, destination)
    code, _, err = run_main(capsys, "run", job_file, "--dry-run", "--run-id", "odd")
    assert (code, err) == (0, "")
    code, out, err = run_main(capsys, "run", job_file, "--run-id", "odd")
    assert (code, err) == (0, "")
    assert "wrote 7 rows" in out
    with open_store(destination) as store:
        rows = store.read("nightly", ["odd"])
    assert {r["attribute"] for r in rows} == set(ODD_NAMES)
    assert len(rows) == 7


def test_emoji_names_in_a_latin1_mariadb_database(mariadb_engine: sa.Engine,
                                                  ranking: bitsift.Ranking) -> None:
    # The table is created utf8mb4 whatever the database's default character set.
    database = unique_name()
    with mariadb_engine.begin() as connection:
        connection.exec_driver_sql(f"CREATE DATABASE `{database}` CHARACTER SET latin1")
    try:
        destination = Destination(MARIADB_URL, f"{database}.history")
        rows = rows_of(ranking)
        for row, name in zip(rows, SHORT_ODD_NAMES, strict=True):
            row["attribute"] = name
        with open_store(destination, write=True) as store:
            store.replace_run("j", "r1", rows)
            read = store.read("j", ["r1"])
    finally:
        with mariadb_engine.begin() as connection:
            connection.exec_driver_sql(f"DROP DATABASE `{database}`")
    assert sorted(r["attribute"] for r in read) == sorted(SHORT_ODD_NAMES)


@pytest.mark.parametrize("engine", ["postgres", "mariadb"])
def test_dry_run_refuses_a_name_too_long_for_an_existing_table(
        engine: str, tmp_path: Path, request: pytest.FixtureRequest, ranking: bitsift.Ranking,
        capsys: pytest.CaptureFixture[str]) -> None:
    # A table created by an earlier bitsift holds at most 255 characters per attribute: the
    # dry run (and the run, before ranking) must say so instead of the write failing.
    if engine == "postgres":
        destination = Destination(POSTGRES_URL, f"{request.getfixturevalue('pg_schema')}.history")
        narrow = "ALTER TABLE {} ALTER COLUMN attribute TYPE VARCHAR(255)"
    else:
        destination = Destination(MARIADB_URL,
                                  f"{request.getfixturevalue('mariadb_database')}.history")
        narrow = "ALTER TABLE {} MODIFY attribute VARCHAR(255) NOT NULL"
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
    execute(destination, narrow.format(destination.table_name().sql(
        destination.sqlglot_dialect())))
    job_file = _odd_names_job(tmp_path, destination)
    code, out, err = run_main(capsys, "run", job_file, "--dry-run")
    assert (code, out) == (1, "")
    assert err == (
        f"Error: 1 problem in job file {job_file}:\n  {job_file}:5: results table "
        f"{destination.table} in {destination.display}: column attribute holds at most 255 "
        f"characters, but '{LONG_NAME[:40]}...' has 300; widen the column (for example to "
        "TEXT) or choose another results table\n")
    with pytest.raises(JobError, match="column attribute holds at most 255"):
        run_job(load_job(job_file), "late")
    assert history_count(destination, "j") == {"r1": 4}


@pytest.mark.parametrize("engine", ["duckdb", "postgres", "mariadb"])
def test_dry_run_refuses_a_missing_schema(engine: str, tmp_path: Path,
                                          request: pytest.FixtureRequest,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    # The write would create the table in that schema and fail after the ranking work.
    location = {"duckdb": str(tmp_path / "h.duckdb"), "postgres": POSTGRES_URL,
                "mariadb": MARIADB_URL}[engine]
    if engine != "duckdb":  # skips (or fails in CI) when the server is unreachable
        request.getfixturevalue(f"{engine}_engine")
    destination = Destination(location, "no_such_schema_t16.history")
    job_file = _job_file(tmp_path, destination)
    code, out, err = run_main(capsys, "run", job_file, "--dry-run")
    assert (code, out) == (1, "")
    assert err.endswith(f"job.toml:5: results table no_such_schema_t16.history in "
                        f"{destination.display}: schema no_such_schema_t16 does not exist; "
                        "create it, or choose another results table\n")


@pytest.mark.slow
def test_ctrl_c_during_a_duckdb_history_write_exits_130(tmp_path: Path) -> None:
    # Issue 16 item 8: DuckDB reports Ctrl-C inside a statement as RuntimeError("Query
    # interrupted"), which bitsift printed as "unexpected RuntimeError" with exit code 1.
    destination = Destination(str(tmp_path / "h.duckdb"), "history")
    job_file = _job_file(tmp_path, destination)
    run_job(load_job(job_file), "first")
    marker = tmp_path / "writing"
    # The child runs a long statement in the write's transaction (after creating/deleting
    # nothing yet): the moment Ctrl-C lands is then inside DuckDB, as in the report.
    script = textwrap.dedent("""\
        import sys
        from pathlib import Path
        from bitsift.jobs import history_duckdb

        store = history_duckdb.DuckDBStore
        replace_run, check = store.replace_run, store.check
        writing = []

        def marked_replace_run(self, *args):
            writing.append(True)
            return replace_run(self, *args)

        def slow_check(self):
            if writing:
                # One thread: DuckDB notices a signal between tasks, and worker threads on
                # one long task would keep it waiting.
                self.connection.execute("SET threads = 1")
                Path(sys.argv[1]).touch()
                self.connection.execute("SELECT sum(hash(range)) FROM range(20000000000)")
            return check(self)

        store.replace_run = marked_replace_run
        store.check = slow_check
        from bitsift.cli import main
        main(sys.argv[2:])
    """)
    child = _child(script, str(marker), "run", str(job_file), "--run-id", "second")
    wait_for(lambda: marker.exists() or child.poll() is not None, 120, "the history write")
    time.sleep(0.3)
    child.send_signal(signal.SIGINT)
    code, out, err = finish(child, seconds=60)
    assert code == 130 and err.strip() in ("Aborted.", "Interrupted.")  # as in test_faults
    assert "wrote" not in out
    assert history_count(destination) == {"first": 7}  # the write was rolled back
