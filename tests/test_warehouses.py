"""SQLAlchemy sources: URLs, Engines and Connections on SQLite, PostgreSQL and MariaDB give the
DuckDB numbers, through the library and through the command line; missing drivers say which
extra to install.
"""

from __future__ import annotations

import importlib.util
import json
import sqlite3
from pathlib import Path

import pytest
import sqlalchemy as sa
from click.testing import CliRunner
from conftest import MARIADB_URL, POSTGRES_URL
from helpers import ENGINES, assert_same_ranking, loaded, random_dataset

import bitsift
from bitsift.cli import cli
from bitsift.engines import sqlite_support
from bitsift.engines.sources import open_source
from bitsift.errors import MissingDriverError, SourceError, TableNotFoundError
from bitsift.sql.dialects import capabilities

DATASET = random_dataset(seed=31, rows=1000)


def _cli_json(*args: str) -> dict:
    result = CliRunner().invoke(cli, ["rank", *args, "--format", "json"])
    assert result.exit_code == 0, result.output
    return json.loads(result.output)


def _assert_same_json(got: dict, want: dict, context: str) -> None:
    for key in ("target", "rows", "rows_excluded", "classes"):
        assert got[key] == want[key], f"{context}: {key}"
    assert abs(got["target_entropy"] - want["target_entropy"]) <= 1e-9, context
    assert [a["attribute"] for a in got["attributes"]] == [
        a["attribute"] for a in want["attributes"]], context
    for a, b in zip(got["attributes"], want["attributes"], strict=True):
        for key, value in b.items():
            if isinstance(value, float):
                assert abs(a[key] - value) <= 1e-9 * max(1.0, abs(value)), (context, key)
            elif key == "cuts" and value is not None:
                # Interpolated quantiles may differ in the last bit between engines.
                assert len(a[key]) == len(value), (context, a["attribute"], key)
                assert all(abs(x - w) <= 1e-12 * max(1.0, abs(w))
                           for x, w in zip(a[key], value, strict=True)), (context, key)
            else:
                assert a[key] == value, (context, a["attribute"], key)


@pytest.mark.slow
@pytest.mark.mariadb
@pytest.mark.postgres
def test_done_when_cli_rank_on_every_engine_gives_the_duckdb_numbers(
        request: pytest.FixtureRequest) -> None:
    # The acceptance check: `bitsift rank <URL> --table s.t --target y` on
    # PostgreSQL, MariaDB and SQLite prints what DuckDB prints.
    with loaded("duckdb", DATASET, request, duckdb_file=True) as where:
        want = _cli_json(where.source, "--table", "t", "--target", "y")
    assert want["attributes"] and want["rows_excluded"] > 0
    for engine in ("sqlite", "postgres", "mariadb"):
        with loaded(engine, DATASET, request) as where:
            table = where.table.replace('"', "").replace("`", "")  # as a user types it
            got = _cli_json(where.source, "--table", table, "--target", "y")
        _assert_same_json(got, want, engine)


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["sqlite", "postgres", "mariadb"])
def test_engine_and_connection_sources_equal_the_url(engine: str,
                                                     request: pytest.FixtureRequest) -> None:
    with loaded(engine, DATASET, request) as where:
        by_url = bitsift.rank(where.source, table=where.table, target="y")
        sa_engine = sa.create_engine(where.source)
        try:
            by_engine = bitsift.rank(sa_engine, table=where.table, target="y")
            with sa_engine.connect() as connection:
                by_connection = bitsift.rank(connection, table=where.table, target="y")
                assert not connection.closed  # the caller's connection stays open
        finally:
            sa_engine.dispose()
    assert by_url.dialect == {"sqlite": "sqlite", "postgres": "postgres",
                              "mariadb": "mariadb"}[engine]
    assert_same_ranking(by_engine, by_url, f"{engine} Engine")
    assert_same_ranking(by_connection, by_url, f"{engine} Connection")


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_columns_are_introspected_with_their_kinds(engine: str,
                                                   request: pytest.FixtureRequest) -> None:
    with loaded(engine, DATASET, request) as where:
        ranking = bitsift.rank(where.source, table=where.table, target="y")
    kinds = {a.attribute: a.kind for a in ranking.attributes}
    assert kinds == {"word": "categorical", "level": "categorical", "noise": "categorical",
                     "score": "numeric", "ratio": "numeric", "price": "numeric"}


def test_mysql_url_on_a_mariadb_server_uses_the_mariadb_entry(mariadb_database: str) -> None:
    opened = open_source(MARIADB_URL, f"{mariadb_database}.t")
    with opened.engine as engine:
        assert engine.caps.name == "mariadb"
        assert engine.caps.exact_key_type == "BINARY"


@pytest.mark.postgres
def test_unknown_table_lists_a_close_match(request: pytest.FixtureRequest) -> None:
    with loaded("postgres", DATASET, request, table="orders") as where:
        schema = where.schema
        with pytest.raises(TableNotFoundError, match="did you mean 'orders'"):
            bitsift.rank(POSTGRES_URL, table=f"{schema}.ordres", target="y")


@pytest.mark.mariadb
def test_paste_statement_from_a_connection_uses_its_dialect(
        request: pytest.FixtureRequest) -> None:
    with loaded("mariadb", DATASET, request) as where:
        sql = bitsift.statement(where.source, table=where.table, target="y")
        postgres_sql = bitsift.statement(where.source, table=where.table, target="y",
                                         dialect="postgres")
    assert "dialect mariadb" in sql and "CAST(`word` AS BINARY)" not in sql
    assert "CAST(src.`word` AS BINARY)" in sql  # text is grouped byte-exactly
    assert "GROUPING SETS" not in sql
    # Written for PostgreSQL: its quoting, no BINARY casts, its pasted count strategy.
    assert "dialect postgres" in postgres_sql and 'src."word"' in postgres_sql
    assert "`" not in postgres_sql.split("\n", 2)[2] and "BINARY" not in postgres_sql
    paste_strategy = capabilities("postgres").for_paste.count_strategy
    assert ("GROUPING SETS" in postgres_sql) == (paste_strategy == "grouping_sets")


# --- drivers ----------------------------------------------------------------------------------

MISSING_DRIVERS = [
    ("postgresql+psycopg2://u@127.0.0.1/db", "psycopg2", ".venv/bin/pip install -e '.[postgres]'",
     "postgresql+psycopg://"),
    ("mysql+mysqldb://u@127.0.0.1/db", "MySQLdb", ".venv/bin/pip install -e '.[mysql]'", "mysql+pymysql://"),
    ("postgresql+asyncpg://u@127.0.0.1/db", "asyncpg", ".venv/bin/pip install -e '.[postgres]'",
     "postgresql+psycopg://"),
]


@pytest.mark.parametrize(("url", "module", "extra", "scheme"), MISSING_DRIVERS)
def test_missing_driver_names_the_extra(url: str, module: str, extra: str, scheme: str) -> None:
    if importlib.util.find_spec(module) is not None:
        pytest.skip(f"{module} is installed here, so it is not missing")
    with pytest.raises(MissingDriverError) as caught:
        bitsift.rank(url, table="t", target="y")
    message = str(caught.value)
    assert "\n" not in message
    assert f"'{module}'" in message and extra in message and scheme in message


def test_missing_driver_is_one_line_in_the_cli() -> None:
    if importlib.util.find_spec("MySQLdb") is not None:
        pytest.skip("MySQLdb is installed here")
    result = CliRunner().invoke(cli, ["rank", "mysql+mysqldb://u@h/db", "-t", "t", "-y", "y"])
    assert result.exit_code == 1
    assert isinstance(result.exception, MissingDriverError)
    # The same working advice as the README: bitsift is installed from its checkout.
    assert ("install the extra in the bitsift checkout: .venv/bin/pip install -e '.[mysql]' "
            "and use mysql+pymysql://") in str(result.exception)


def test_missing_sqlite_file_is_not_created(tmp_path: Path) -> None:
    path = tmp_path / "typo.sqlite"
    with pytest.raises(SourceError, match="no such SQLite database"):
        bitsift.rank(f"sqlite:///{path}", table="t", target="y")
    assert not path.exists()


def test_unknown_sqlalchemy_dialect_is_a_source_error() -> None:
    with pytest.raises(MissingDriverError, match="no dialect 'nosuchdb'"):
        bitsift.rank("nosuchdb://u@h/db", table="t", target="y")


# --- SQLite's math functions ------------------------------------------------------------------


def test_sqlite_has_or_gets_ln_and_floor() -> None:
    connection = sqlite3.connect(":memory:")
    try:
        # Whatever this build has, after registration both functions work and agree with
        # Python's (the registration is what runs when a build lacks them).
        sqlite_support.register_math_functions(connection)
        assert sqlite_support.missing_math_functions(connection) == []
        assert connection.execute("SELECT ln(8.0) / ln(2.0), floor(2.7)").fetchone() == (3.0, 2)
        registered = sqlite_support.register_math_functions(connection, ["ln", "floor"])
        assert registered == ["ln", "floor"]
        assert connection.execute("SELECT ln(8.0) / ln(2.0), floor(-2.5)").fetchone() == (
            3.0, -3)
    finally:
        connection.close()
