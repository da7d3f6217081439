"""The results history table: documented schema, creation, refusal of incompatible tables, and
one transaction per run (on DuckDB and PostgreSQL)."""

from __future__ import annotations

import datetime as _dt
import re
from collections.abc import Iterator
from pathlib import Path

import duckdb
import pytest
import sqlalchemy as sa
from conftest import MARIADB_URL
from test_jobs import POSTGRES_URL, duckdb_source

import bitsift
from bitsift.history import (
    COLUMN_NAMES,
    COLUMNS,
    SCHEMA_VERSION,
    Destination,
    HistoryError,
    open_store,
    ranking_rows,
)
from bitsift.jobs import load_job, preflight

ROOT = Path(__file__).resolve().parents[1]
RUN_AT = _dt.datetime(2026, 3, 1, 4, 5, 6, 789000, tzinfo=_dt.UTC)


@pytest.fixture(scope="module")
def ranking(tmp_path_factory: pytest.TempPathFactory) -> bitsift.Ranking:
    path = duckdb_source(tmp_path_factory.mktemp("history") / "src.duckdb")
    return bitsift.rank(str(path), target="y", table="t")


def rows_of(ranking: bitsift.Ranking, run_id: str = "r1") -> list[dict[str, object]]:
    return ranking_rows(ranking, run_id=run_id, run_at=RUN_AT, job="j", ranking_name="all",
                        options={"target": "y", "bins": 10})


@pytest.fixture(params=["duckdb", "sqlite", "postgres", "mariadb"])
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
        assert "is not a bitsift history table of schema version 1" in message
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


def test_rows_from_a_newer_schema_are_refused(tmp_path: Path, ranking: bitsift.Ranking) -> None:
    destination = Destination(str(tmp_path / "h.duckdb"), "history")
    with open_store(destination, write=True) as store:
        store.replace_run("j", "r1", rows_of(ranking))
    execute(destination, f"UPDATE history SET schema_version = {SCHEMA_VERSION + 1}")
    with open_store(destination) as store, pytest.raises(HistoryError, match="newer bitsift"):
        store.check()


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
