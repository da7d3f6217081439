"""Columns whose type the database cannot group (issue 16, item 4).

PostgreSQL has no equality to GROUP BY json, xml, the geometric types (point...) nor arrays of
json: picked up by default such a column is left out with a note naming it and its type; named
as target, attribute, segment or weight it is refused in one line naming it and its type. Types
the engine does group (PostgreSQL jsonb, int arrays, tsvector; DuckDB LIST/STRUCT/MAP/UNION/
JSON; MariaDB JSON and geometry; SQLite anything) are ranked, and ``check``'s NumPy reference
counts list and struct values too. Every table here is invented for the test.
"""

from __future__ import annotations

import sqlite3
import textwrap
from pathlib import Path

import duckdb
import pytest
import sqlalchemy as sa
from conftest import MARIADB_URL, POSTGRES_URL
from helpers import Outcome, run_main

import bitsift

#: The columns PostgreSQL cannot group, with the type the note must name.
PG_UNGROUPABLE = {"j": "json", "x": "xml", "p": "point", "ja": "json[]"}
#: Columns of types outside bitsift's families that PostgreSQL does group: ranked.
PG_GROUPABLE = ("jb", "arr", "ts")


@pytest.fixture
def pg_table(postgres_engine: sa.Engine, pg_schema: str) -> str:
    """``<schema>.t``: target y, a plain k, then one column of each awkward type."""
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(
            f'CREATE TABLE "{pg_schema}".t AS SELECT i %% 3 AS y, i %% 5 AS k, '
            "json_build_object('a', i %% 2) AS j, XMLPARSE(CONTENT '<a>' || (i %% 2) || '</a>') "
            "AS x, point(i %% 2, 0) AS p, ARRAY[json_build_object('a', 1)] AS ja, "
            "jsonb_build_object('a', i %% 2) AS jb, ARRAY[i %% 2, i %% 3] AS arr, "
            "to_tsvector('simple', 'w' || (i %% 2)) AS ts FROM generate_series(1, 60) AS i")
    return f"{pg_schema}.t"


def _job(tmp_path: Path, source: str, table: str) -> Path:
    path = tmp_path / "job.toml"
    path.write_text(textwrap.dedent(f"""\
        job = "awkward"
        source = "{source}"

        [results]
        destination = "{tmp_path / 'history.duckdb'}"

        [[ranking]]
        name = "t"
        table = "{table}"
        target = "y"
        """), encoding="utf-8")
    return path


def _commands(source: str, table: str, tmp_path: Path) -> dict[str, list[str]]:
    """Every command that reads SOURCE, on ``table`` with target y and default attributes."""
    common = [source, "--table", table, "--target", "y"]
    return {
        "rank": ["rank", *common],
        "sql": ["sql", *common],
        "check": ["check", *common],
        "profile": ["profile", *common, "--attribute", "k"],
        "report": ["report", *common, "--out", str(tmp_path / "report.html")],
        "redundancy": ["redundancy", *common],
        "select": ["select", *common, "--k", "2"],
        "run": ["run", str(_job(tmp_path, source, table))],
    }


def _assert_clean(done: Outcome, context: str) -> None:
    assert "Traceback" not in done.err and "unhashable" not in done.err, (context, done.err)


def test_postgres_ungroupable_columns_are_left_out_with_a_note_by_every_command(
        pg_table: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    for command, args in _commands(POSTGRES_URL, pg_table, tmp_path).items():
        done = run_main(capsys, *args)
        assert done.code == 0, (command, done.err)
        _assert_clean(done, command)
        # Paste mode has no stderr reader: its notes are comments in the statement.
        told = done.out if command == "sql" else done.err
        for name, type_name in PG_UNGROUPABLE.items():
            note = f"column {name!r} ({type_name}) is not ranked: postgres cannot group"
            assert note.lower() in told.lower(), (command, told)
    ranked = run_main(capsys, "rank", POSTGRES_URL, "--table", pg_table, "--target", "y",
                      "--format", "csv")
    names = {line.split(",")[0] for line in ranked.out.splitlines()[1:]}
    assert names == {"k", *PG_GROUPABLE}


@pytest.mark.parametrize(("option", "named", "role"), [
    (["--target", "j"], "'j' (json, as target)", "target"),
    (["--target", "y", "--attributes", "k,x"], "'x' (xml, as --attributes)", "attributes"),
    (["--target", "y", "--by", "p"], "'p' (point, as --by)", "by"),
    (["--target", "y", "--weight", "ja"], "'ja' (json[], as --weight)", "weight"),
], ids=["target", "attributes", "by", "weight"])
def test_postgres_named_ungroupable_column_is_refused_in_one_line(
        pg_table: str, option: list[str], named: str, role: str, tmp_path: Path,
        capsys: pytest.CaptureFixture[str]) -> None:
    commands = {"rank": ["rank"], "sql": ["sql"], "check": ["check"],
                "report": ["report", "--out", str(tmp_path / "r.html")],
                "redundancy": ["redundancy"], "select": ["select", "--k", "1"],
                "profile": ["profile", "--attribute", "k"]}
    segmented = {"rank", "sql", "report"}  # those whose --by is segments
    weighted = {"rank", "sql"}
    for command, head in commands.items():
        if (role == "by" and command not in segmented) or (
                role == "weight" and command not in weighted) or (
                role == "attributes" and command == "profile"):  # profile has --attribute
            continue
        done = run_main(capsys, *head, POSTGRES_URL, "--table", pg_table, *option)
        assert done.code == 1, (command, done.out)
        _assert_clean(done, command)
        lines = done.err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("Error: "), (command, done.err)
        assert named.lower() in lines[0].lower(), (command, lines[0])


def _nested_duckdb(tmp_path: Path) -> Path:
    path = tmp_path / "nested.duckdb"
    with duckdb.connect(str(path)) as connection:
        connection.execute(
            "CREATE TABLE t AS SELECT i % 3 AS y, [i % 2, i % 3] AS l, {'a': i % 2} AS s, "
            "MAP([1], [i % 2]) AS m, CAST(CAST(i % 4 AS VARCHAR) AS JSON) AS j, "
            "union_value(num := i % 2)::UNION(num INTEGER, str VARCHAR) AS u, i % 5 AS k "
            "FROM range(60) r(i)")
    return path


@pytest.mark.slow
def test_duckdb_nested_types_are_ranked_and_checked(tmp_path: Path,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    path = _nested_duckdb(tmp_path)
    for command, args in _commands(str(path), "t", tmp_path).items():
        done = run_main(capsys, *args)
        assert done.code == 0, (command, done.err)
        _assert_clean(done, command)
        assert "cannot group" not in done.err + done.out, command
    checked = run_main(capsys, "check", str(path), "--table", "t", "--target", "y")
    assert "result: database and reference agree" in checked.out
    assert "t: 6 attributes" in checked.out


@pytest.mark.parametrize("target", ["l", "s", "m"])
def test_duckdb_nested_types_as_the_target(target: str, tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    path = _nested_duckdb(tmp_path)
    common = [str(path), "--table", "t", "--target", target]
    for args in (["check", *common], ["profile", *common, "--attribute", "k"],
                 ["report", *common, "--out", str(tmp_path / "r.html")]):
        done = run_main(capsys, *args)
        assert done.code == 0, (args[0], done.err)
        _assert_clean(done, args[0])
    profiled = run_main(capsys, "profile", *common, "--attribute", "k")
    assert ("[0, 0]" if target == "l" else "{") in profiled.out  # classes shown as they came


def test_postgres_arrays_are_checked_against_the_reference(
        pg_table: str, capsys: pytest.CaptureFixture[str]) -> None:
    done = run_main(capsys, "check", POSTGRES_URL, "--table", pg_table, "--target", "y",
                    "--attributes", "k,arr,jb,ts")
    assert done.code == 0, done.err
    assert "result: database and reference agree" in done.out


def test_mariadb_json_and_geometry_are_ranked(mariadb_engine: sa.Engine, mariadb_database: str,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    with mariadb_engine.begin() as connection:
        connection.exec_driver_sql(
            f"CREATE TABLE `{mariadb_database}`.t (y INT, j JSON, g GEOMETRY, pt POINT)")
        connection.exec_driver_sql(
            f"INSERT INTO `{mariadb_database}`.t SELECT seq MOD 3, JSON_OBJECT('a', seq MOD 2), "
            "ST_GeomFromText(CONCAT('LINESTRING(0 0, 1 ', seq MOD 2, ')')), POINT(seq MOD 2, 0) "
            "FROM seq_1_to_60")
    url = sa.make_url(MARIADB_URL).set(database=mariadb_database).render_as_string(False)
    for command in ("rank", "check"):
        done = run_main(capsys, command, url, "--table", "t", "--target", "y")
        assert done.code == 0, (command, done.err)
        _assert_clean(done, command)
        assert "cannot group" not in done.err and "Did not recognize" not in done.err
    ranked = run_main(capsys, "rank", url, "--table", "t", "--target", "y", "--format", "csv")
    assert {line.split(",")[0] for line in ranked.out.splitlines()[1:]} == {"j", "g", "pt"}


def test_sqlite_columns_of_any_declared_type_are_ranked(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "any.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE t (y INTEGER, j JSON, p POINT, w WHATEVER)")
        connection.executemany("INSERT INTO t VALUES (?, ?, ?, ?)",
                               [(i % 3, f'{{"a": {i % 2}}}', f"({i % 2},0)", i % 4)
                                for i in range(60)])
    connection.close()
    for command in ("rank", "check"):
        done = run_main(capsys, command, f"sqlite:///{path}", "--table", "t", "--target", "y")
        assert done.code == 0, (command, done.err)
        _assert_clean(done, command)
        assert "cannot group" not in done.err


def test_postgres_probe_leaves_the_callers_open_transaction_usable(
        postgres_engine: sa.Engine, pg_table: str) -> None:
    schema, table = pg_table.split(".")
    with postgres_engine.connect() as connection, connection.begin():
        connection.exec_driver_sql("SELECT 1")  # the caller's transaction is open
        ranking = bitsift.rank(connection, table=pg_table, target="y")
        assert {s.attribute for s in ranking.attributes} == {"k", *PG_GROUPABLE}
        assert any("'j' (json)" in note.lower() for note in ranking.notes)
        # Still usable: a failed probe did not abort it.
        assert connection.exec_driver_sql(
            f'SELECT COUNT(*) FROM "{schema}"."{table}"').scalar() == 60
