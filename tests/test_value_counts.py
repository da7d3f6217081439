"""Run mode where attributes are counted one by one and their metrics computed in the client.

bitsift.run.value_counts (run policy ``run_counts = "client"``: DuckDB, MariaDB, SQLite) against two
independent checks: the NumPy reference (bitsift.run.reference: p log p formulas on tables
counted in Python) and the ranking statement (``run_counts = "statement"``, metrics in SQL) on
the same table. Data: helpers.random_dataset (NULLs, case and padding variants, ties), seeded
and invented here.
"""

from __future__ import annotations

import random
import re
import sqlite3
from pathlib import Path

import duckdb
import pytest
from helpers import (
    NUMERIC_COLUMNS,
    Dataset,
    assert_matches_reference,
    assert_same_ranking,
    fill_duckdb,
    loaded,
    random_dataset,
    rank_with,
)

import bitsift
from bitsift.engines.policy import run_policy
from bitsift.engines.sqlalchemy_engine import SqlAlchemyEngine
from bitsift.errors import DataError
from bitsift.run import value_counts
from bitsift.run.result import Ranking

STATEMENT = {"run_counts": "statement", "run_sessions": 1}
CLIENT = {"run_counts": "client", "run_sessions": 2}
#: The engines whose run policy counts in the client, and DuckDB with it forced.
ENGINES = ("sqlite", "mariadb", "duckdb")


def _bare(ranking: Ranking) -> list[str]:
    """The per-attribute counting statements sent (templates/value_counts.sql.j2)."""
    return [s for s in ranking.statements if re.search(r"\bAS v\b.* LIMIT \d+$", s)]


def _ranking_statements(ranking: Ranking) -> list[str]:
    return [s for s in ranking.statements if "information_gain" in s]


def test_duckdb_mariadb_and_sqlite_count_in_the_client() -> None:
    for engine in ("duckdb", "mariadb", "sqlite"):
        policy = run_policy(engine)
        assert (policy.run_counts, policy.run_sessions) == ("client", 2), engine
    assert run_policy("postgres").run_counts == "statement"


@pytest.mark.slow
@pytest.mark.parametrize("missing", ["category", "drop"])
@pytest.mark.parametrize("engine", ENGINES)
def test_client_counts_equal_the_statement_and_the_reference(
        engine: str, missing: str, request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=71, rows=1200)
    with loaded(engine, dataset, request) as where:
        client = rank_with(where.source, where.table, "y", policy=CLIENT, missing=missing)
        statement = rank_with(where.source, where.table, "y", policy=STATEMENT,
                              missing=missing)
    # Every attribute but the quantile-counted ones has its own bare GROUP BY, and no
    # ranking statement is sent; the numbers are the statement's and the reference's.
    assert len(_bare(client)) == 3 and not _ranking_statements(client), engine
    assert _ranking_statements(statement) and not _bare(statement), engine
    assert_same_ranking(client, statement, context=f"{engine} {missing}")
    assert_matches_reference(client, dataset, "y", numeric=NUMERIC_COLUMNS, missing=missing,
                             context=f"{engine} {missing}")


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["sqlite", "mariadb"])
def test_where_and_other_binnings_are_counted_alike(engine: str,
                                                    request: pytest.FixtureRequest) -> None:
    # Equal-width and best-split bins come from the bounds pre-pass, then each binned
    # attribute is grouped by the ranking's own CASE; --where filters every statement.
    dataset = random_dataset(seed=5, rows=900)
    options = {"binning": "best-split", "binning_for": "ratio=equal-width",
               "where": "level <> 3 OR word IS NULL"}
    with loaded(engine, dataset, request) as where:
        client = rank_with(where.source, where.table, "y", policy=CLIENT, **options)
        statement = rank_with(where.source, where.table, "y", policy=STATEMENT, **options)
    assert len(_bare(client)) == len(client.attributes) and not _ranking_statements(client)
    assert all(" WHERE " in s for s in _bare(client))
    assert_same_ranking(client, statement, context=engine)
    for a, b in zip(client.attributes, statement.attributes, strict=True):
        assert a.cuts == b.cuts, a.attribute


@pytest.mark.mariadb
def test_mariadb_groups_text_byte_exactly(request: pytest.FixtureRequest) -> None:
    # utf8mb4_general_ci merges 'a'/'A' and 'x'/'x ': the bare counts group the BINARY key,
    # as the statement does (reference: every variant its own value).
    dataset = random_dataset(seed=8, rows=400)
    with loaded("mariadb", dataset, request) as where:
        ranking = rank_with(where.source, where.table, "y", policy=CLIENT,
                            attributes="word,noise")
    word = next(s for s in _bare(ranking) if "`word`" in s)
    assert "CAST(src.`word` AS BINARY) AS v" in word and "CAST(src.`y` AS BINARY) AS y" in word
    assert ranking["word"].distinct == len({w for w in dataset.column("word")})
    assert_matches_reference(ranking, dataset, "y")


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["sqlite", "mariadb"])
def test_too_many_cells_go_to_the_statement(engine: str,
                                            request: pytest.FixtureRequest) -> None:
    # An identifier-like column has a cell per row: above client_cells the engine sends one
    # cell more than the cap (LIMIT), and the attribute is ranked by the statement instead.
    rng = random.Random(4)
    rows = [(rng.choice("pq"), i, rng.choice("abc")) for i in range(300)]
    dataset = Dataset(columns=(("y", "text"), ("id", "integer"), ("small", "text")), rows=rows)
    with loaded(engine, dataset, request) as where:
        capped = rank_with(where.source, where.table, "y",
                           policy={**CLIENT, "client_cells": 50})
        statement = rank_with(where.source, where.table, "y", policy=STATEMENT)
    assert all(s.endswith("LIMIT 51") for s in _bare(capped)) and len(_bare(capped)) == 2
    (fallback,) = _ranking_statements(capped)
    assert '"id"' in fallback or "`id`" in fallback
    assert not ('"small"' in fallback or "`small`" in fallback)
    assert_same_ranking(capped, statement, context=engine)
    assert_matches_reference(capped, dataset, "y")
    assert "id_like" in capped["id"].flags


def test_a_dense_table_too_large_goes_to_the_statement(monkeypatch: pytest.MonkeyPatch,
                                                       tmp_path: Path) -> None:
    # Few cells can still make a large value x class table (many values, many classes):
    # above DENSE_CELLS entries the attribute is ranked by the statement.
    path = tmp_path / "t.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE t (y INTEGER, a INTEGER, b INTEGER)")
        connection.executemany("INSERT INTO t VALUES (?, ?, ?)",
                               [(i % 10, i, i % 3) for i in range(100)])
    monkeypatch.setattr(value_counts, "DENSE_CELLS", 500)  # a: 100 values x 10 classes
    ranking = bitsift.rank(str(path), table="t", target="y")
    (fallback,) = _ranking_statements(ranking)
    assert '"a"' in fallback and '"b"' not in fallback
    assert_same_ranking(ranking, rank_with(str(path), "t", "y", policy=STATEMENT))


@pytest.mark.parametrize("rows", [[], [(None, "p"), (None, "q")]], ids=["empty", "no-target"])
def test_no_row_with_a_target_fails_as_the_statement_does(rows: list[tuple[object, ...]],
                                                          tmp_path: Path) -> None:
    path = tmp_path / "t.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE t (y TEXT, a TEXT, b TEXT)")
        connection.executemany("INSERT INTO t VALUES (?, ?, ?)", [(y, a, a) for y, a in rows])
    with pytest.raises(DataError) as client:
        bitsift.rank(str(path), table="t", target="y")
    with pytest.raises(DataError) as statement:
        rank_with(str(path), "t", "y", policy=STATEMENT)
    assert str(client.value) == str(statement.value)
    assert ("2 rows" in str(client.value)) == bool(rows), str(client.value)


def test_sqlite_file_ranks_on_two_sessions(tmp_path: Path) -> None:
    # Each SQLite connection makes itself read-only once: two pragmas, two sessions.
    path = tmp_path / "t.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE t (y TEXT, a TEXT, b TEXT, c INTEGER)")
        connection.executemany("INSERT INTO t VALUES (?, ?, ?, ?)",
                               [("pq"[i % 2], "ab"[i % 3 % 2], "xyz"[i % 3], i % 5)
                                for i in range(60)])
    ranking = bitsift.rank(f"sqlite:///{path}", table="t", target="y")
    assert ranking.statements.count("PRAGMA query_only = ON") == 2
    assert len(_bare(ranking)) == 3


def test_in_memory_sqlite_opens_no_sibling(tmp_path: Path) -> None:
    # A second connection to an in-memory database would see an empty one.
    for url in ("sqlite://", "sqlite:///file:mem?mode=memory&uri=true"):
        with SqlAlchemyEngine.open_url(url) as engine:
            assert not engine.can_open_siblings(), url
    path = tmp_path / "t.sqlite"
    sqlite3.connect(path).close()
    with SqlAlchemyEngine.open_url(f"sqlite:///{path}") as engine:
        assert engine.can_open_siblings()


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_segments_and_weights_keep_the_statement(engine: str,
                                                 request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=2, rows=300)
    with loaded(engine, dataset, request) as where:
        segmented = bitsift.rank(where.source, table=where.table, target="y", by="noise",
                                 attributes="word,level")
        weighted = bitsift.rank(where.source, table=where.table, target="y", weight="ratio",
                                attributes="word,noise")
    for result in (segmented, weighted):
        assert not _bare(result) and _ranking_statements(result), engine


# --- DuckDB: the client path's edge cases (issue 20) ---------------------------------------------


def _duckdb_file(tmp_path: Path, create: str) -> str:
    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as connection:
        connection.execute(create)
    return str(path)


def test_duckdb_nonfinite_values_and_nulls_are_counted_like_the_statement(
        tmp_path: Path) -> None:
    # NaN is one value, ±inf two more, NULL one more (missing=category); the numeric column
    # holding NaN too.
    path = _duckdb_file(tmp_path, """
        CREATE TABLE t AS SELECT
          CASE WHEN i % 7 = 0 THEN NULL ELSE ['p', 'q', 'r'][i % 3 + 1] END AS y,
          CASE i % 6 WHEN 0 THEN 'NaN'::DOUBLE WHEN 1 THEN 'inf'::DOUBLE
                     WHEN 2 THEN '-inf'::DOUBLE WHEN 3 THEN NULL ELSE i % 4 END AS odd,
          CASE WHEN i % 5 = 0 THEN 'NaN'::DOUBLE WHEN i % 11 = 0 THEN NULL
               ELSE (i * 37 % 101) / 7.0 END AS measure
        FROM range(400) r(i)""")
    for missing in ("category", "drop"):
        client = rank_with(path, "t", "y", categorical="odd", missing=missing)
        statement = rank_with(path, "t", "y", policy=STATEMENT, categorical="odd",
                              missing=missing)
        # odd is counted bare; measure holds NaN, so its quantile part falls back to binning
        # row by row in the ranking statement (quantile_counts), which ranks it alone.
        assert len(_bare(client)) == 1 and '"odd" AS v' in _bare(client)[0], missing
        (fallback,) = _ranking_statements(client)
        assert '"measure"' in fallback and '"odd"' not in fallback
        assert_same_ranking(client, statement, context=missing)
        assert client["measure"].cuts == statement["measure"].cuts
    category = rank_with(path, "t", "y", categorical="odd")
    assert category["odd"].distinct == 8  # NaN, inf, -inf, NULL and i % 4 (0..3)
    assert category.rows_excluded == len([i for i in range(400) if i % 7 == 0])


@pytest.mark.parametrize("rows", [[], [(None, "a")]], ids=["empty", "no-target"])
def test_duckdb_without_a_target_row_fails_as_the_statement_does(
        rows: list[tuple[object, ...]]) -> None:
    connection = duckdb.connect()
    connection.execute("CREATE TABLE t (y TEXT, a TEXT, b INTEGER)")
    for y, a in rows:
        connection.execute("INSERT INTO t VALUES (?, ?, 1)", [y, a])
    with pytest.raises(DataError) as client:
        bitsift.rank(connection, table="t", target="y")
    with pytest.raises(DataError) as statement:
        rank_with(connection, "t", "y", policy=STATEMENT)
    assert str(client.value) == str(statement.value)


def test_duckdb_one_row_and_two(tmp_path: Path) -> None:
    # One row has one class: the same error both ways; two rows rank alike.
    path = _duckdb_file(tmp_path, "CREATE TABLE t AS SELECT 'p' AS y, 'a' AS a, 2.5 AS m")
    with pytest.raises(DataError) as client_error:
        bitsift.rank(path, table="t", target="y")
    with pytest.raises(DataError) as statement_error:
        rank_with(path, "t", "y", policy=STATEMENT)
    assert str(client_error.value) == str(statement_error.value)
    path = _duckdb_file(tmp_path / "..", "CREATE TABLE t AS SELECT * FROM (VALUES "
                                         "('p', 'a', 2.5), ('q', 'b', 3.5)) v(y, a, m)")
    client = bitsift.rank(path, table="t", target="y")
    statement = rank_with(path, "t", "y", policy=STATEMENT)
    assert _bare(client) and not _ranking_statements(client)
    assert_same_ranking(client, statement)
    assert (client.rows, client["a"].distinct, client["a"].information_gain) == (2, 2, 1.0)


def test_duckdb_unicode_names_and_case_twin_values(tmp_path: Path) -> None:
    # DuckDB refuses column names that differ in case only (a catalog error), so the twins
    # here are values: 'a'/'A' and 'x'/'x ' are four values, as in the reference.
    rng = random.Random(12)
    rows = [(rng.choice(["Ja", "ja", "JA"]), rng.choice(["a", "A", "x", "x "]),
             rng.choice(["α", "β", None]), rng.randrange(4)) for _ in range(500)]
    names = ("Zielgröße", 'we"ird name', "名前", "Größe")
    dataset = Dataset(columns=tuple(zip(names, ("text", "text", "text", "integer"),
                                        strict=True)), rows=rows)
    connection = duckdb.connect(str(tmp_path / "t.duckdb"))
    fill_duckdb(connection, ["Tä ble"], dataset)
    connection.close()
    client = bitsift.rank(str(tmp_path / "t.duckdb"), table="Tä ble", target="Zielgröße")
    assert len(_bare(client)) == 3 and not _ranking_statements(client)
    assert client['we"ird name'].distinct == 4
    assert_matches_reference(client, dataset, "Zielgröße")
    statement = rank_with(str(tmp_path / "t.duckdb"), "Tä ble", "Zielgröße", policy=STATEMENT)
    assert_same_ranking(client, statement)


def test_duckdb_nested_values_are_counted_like_the_statement(tmp_path: Path) -> None:
    # LIST/ARRAY arrive in Python as lists, STRUCT/MAP as dicts: unhashable. Before, the client
    # path failed with "unexpected TypeError: unhashable type"; NaN inside a list is one value.
    path = _duckdb_file(tmp_path, """
        CREATE TABLE t AS SELECT ['p', 'q', 'r'][i % 3 + 1] AS y,
          [i % 2, i % 3] AS l, {'a': i % 2, 'b': [i % 5]} AS s, MAP([i % 2], [i % 3]) AS m,
          [CASE WHEN i % 4 = 0 THEN 'NaN'::DOUBLE ELSE (i % 3)::DOUBLE END] AS f,
          [i % 2, i % 3]::INTEGER[2] AS a
        FROM range(300) r(i)""")
    client = bitsift.rank(path, table="t", target="y")
    statement = rank_with(path, "t", "y", policy=STATEMENT)
    assert len(_bare(client)) == 5 and not _ranking_statements(client)
    assert_same_ranking(client, statement)
    # f holds [NaN], [0], [1] and [2].
    assert [client[name].distinct for name in ("l", "s", "m", "f", "a")] == [6, 10, 6, 4, 6]


def test_duckdb_too_many_cells_go_to_the_statement(tmp_path: Path) -> None:
    path = _duckdb_file(tmp_path, "CREATE TABLE t AS SELECT ['p', 'q'][i % 2 + 1] AS y, "
                                  "i AS id, i % 3 AS small FROM range(300) r(i)")
    capped = rank_with(path, "t", "y", policy={"client_cells": 50})
    statement = rank_with(path, "t", "y", policy=STATEMENT)
    assert all(s.endswith("LIMIT 51") for s in _bare(capped)) and len(_bare(capped)) == 2
    (fallback,) = _ranking_statements(capped)
    assert '"id"' in fallback and '"small"' not in fallback
    assert_same_ranking(capped, statement)
    assert "id_like" in capped["id"].flags
