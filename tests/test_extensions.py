"""No engine fetches or loads extensions; a SQLite file given as a path opens with SQLite.

Issue 21 item 6: DuckDB opened a SQLite file path through its ``sqlite_scanner`` extension,
which it tried to download (offline: a confusing error; online: fetching and running a
binary), against the README's promise that nothing is sent anywhere.
"""

from __future__ import annotations

import socket
import sqlite3
from pathlib import Path
from typing import Any

import duckdb
import pytest
from helpers import run_main

import bitsift
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.sources import open_source
from bitsift.engines.sqlalchemy_engine import SqlAlchemyEngine
from bitsift.engines.sqlite_support import is_sqlite_file
from bitsift.jobs.history import Destination
from bitsift.jobs.history_open import open_store


def _no_network(monkeypatch: pytest.MonkeyPatch) -> list[Any]:
    """Make every socket connection from Python fail, and record the attempts."""
    attempts: list[Any] = []

    def refuse(self: socket.socket, address: Any) -> None:
        attempts.append(address)
        raise OSError("network use in a test that must not use the network")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    return attempts


def _sqlite_file(path: Path) -> Path:
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE trays (soil TEXT, light REAL, wilted TEXT)")
        connection.executemany("INSERT INTO trays VALUES (?, ?, ?)", [
            ("peat", 1.0, "yes"), ("peat", 2.0, "yes"), ("loam", 3.0, "no"),
            ("loam", 4.0, "no"), ("sand", 5.0, "yes"), ("sand", None, "no")])
    connection.close()
    return path


def test_a_sqlite_path_ranks_with_the_sqlite_engine_offline(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
        capsys: pytest.CaptureFixture[str]) -> None:
    # Named like a DuckDB file on purpose: the header decides, not the name.
    path = _sqlite_file(tmp_path / "trays.duckdb")
    attempts = _no_network(monkeypatch)
    assert is_sqlite_file(str(path))
    opened = open_source(str(path), "trays")
    try:
        assert isinstance(opened.engine, SqlAlchemyEngine)
        assert opened.engine.caps.name == "sqlite"
    finally:
        opened.engine.close()
    ranking = bitsift.rank(str(path), "wilted", table="trays")
    assert isinstance(ranking, bitsift.Ranking)
    assert ranking.dialect == "sqlite" and ranking.rows == 6
    # Hand-counted: soil splits wilted 2/0, 0/2, 1/1 -> H(Y|soil) = 1/3 bit; H(Y) = 1 bit.
    soil = next(s for s in ranking.attributes if s.attribute == "soil")
    assert soil.information_gain == pytest.approx(2 / 3, abs=1e-12)
    cli = run_main(capsys, "rank", str(path), "--table", "trays", "--target", "wilted")
    assert cli.code == 0, cli.err
    assert "soil" in cli.out
    assert attempts == []
    # The file is left as it was: the SQLite session is read-only.
    with sqlite3.connect(path) as connection:
        assert connection.execute("SELECT count(*) FROM trays").fetchone() == (6,)
    connection.close()


def test_a_sqlite_path_still_needs_a_table(tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    path = _sqlite_file(tmp_path / "trays.db")
    outcome = run_main(capsys, "rank", str(path), "--target", "wilted")
    assert outcome.code == 1
    assert outcome.err == f"Error: --table is required to read from {path}\n"


def test_other_files_are_not_taken_for_sqlite(tmp_path: Path) -> None:
    almost = tmp_path / "almost.db"
    almost.write_bytes(b"SQLite format 3")  # 15 bytes: no terminating NUL
    duck = tmp_path / "real.duckdb"
    duckdb.connect(str(duck)).close()
    assert not is_sqlite_file(str(almost))
    assert not is_sqlite_file(str(duck))
    assert not is_sqlite_file(str(tmp_path / "missing.db"))
    assert not is_sqlite_file(str(tmp_path))


def _settings(connection: duckdb.DuckDBPyConnection) -> tuple[Any, ...]:
    row = connection.execute(
        "SELECT current_setting('autoinstall_known_extensions'), "
        "current_setting('autoload_known_extensions'), "
        "current_setting('allow_community_extensions')").fetchone()
    assert row is not None
    return tuple(row)


def test_duckdb_connections_never_install_or_load_extensions(tmp_path: Path) -> None:
    database = tmp_path / "d.duckdb"
    with duckdb.connect(str(database)) as connection:
        connection.execute("CREATE TABLE t AS SELECT 1 AS a, 'x' AS y")
    csv = tmp_path / "t.csv"
    csv.write_text("a,y\n1,x\n")
    for location in (str(database), str(csv)):
        engine = DuckDBEngine.open_file(location)
        try:
            assert _settings(engine.con) == (False, False, False)
            # A sibling session (run mode's parallel parts) has the same settings.
            sibling = engine.open_sibling(None)
            assert isinstance(sibling, DuckDBEngine)
            assert _settings(sibling.con) == (False, False, False)
            sibling.close()
        finally:
            engine.close()
    with open_store(Destination(str(database), "history")) as store:
        assert isinstance(store.connection, duckdb.DuckDBPyConnection)  # type: ignore[attr-defined]
        assert _settings(store.connection) == (False, False, False)  # type: ignore[attr-defined]


def test_an_extension_needing_statement_fails_without_fetching(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # What the extension settings are for: a DuckDB source reading a SQLite file through
    # sqlite_scan would fetch the sqlite extension. It must fail at once, offline.
    path = _sqlite_file(tmp_path / "trays.sqlite")
    attempts = _no_network(monkeypatch)
    csv = tmp_path / "t.csv"
    csv.write_text("a,y\n1,x\n")
    engine = DuckDBEngine.open_file(str(csv))
    try:
        with pytest.raises(duckdb.Error, match="(?i)autoload|extension"):
            engine.con.execute(f"SELECT * FROM sqlite_scan('{path}', 'trays')").fetchall()
    finally:
        engine.close()
    assert attempts == []
