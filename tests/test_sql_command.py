"""``bitsift sql``: a data file as the schema of a warehouse statement; --limit and --timeout.

Issue 21 item 7: ``bitsift sql data.parquet --dialect postgres`` wrote ``FROM READ_PARQUET``,
which no warehouse runs, ``--table`` was refused for files, and ``--limit`` / ``--timeout``
were accepted and silently ignored.
"""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest
import sqlalchemy as sa
import sqlglot
from helpers import run_main

import bitsift
from bitsift.errors import SpecError
from bitsift.sql.dialects import CAPABILITIES

ROWS = [(i % 3, i * 1.5, f"s{i % 4}", "yes" if i % 2 else "no") for i in range(60)]


@pytest.fixture
def parquet(tmp_path: Path) -> Path:
    path = tmp_path / "trays.parquet"
    with duckdb.connect() as connection:
        connection.execute("CREATE TABLE t (shelf INTEGER, light DOUBLE, soil VARCHAR, "
                           "wilted VARCHAR)")
        connection.executemany("INSERT INTO t VALUES (?, ?, ?, ?)", ROWS)
        connection.execute(f"COPY t TO '{path}' (FORMAT PARQUET)")
    return path


@pytest.mark.slow
def test_a_file_without_table_is_refused_where_the_dialect_cannot_read_files(
        parquet: Path, capsys: pytest.CaptureFixture[str]) -> None:
    for dialect in sorted(CAPABILITIES):
        outcome = run_main(capsys, "sql", str(parquet), "-y", "wilted", "--dialect", dialect)
        if CAPABILITIES[dialect].reads_files:
            assert outcome.code == 0, outcome.err
            assert "READ_PARQUET" in outcome.out.upper()
            continue
        assert (outcome.code, outcome.out) == (1, ""), dialect
        assert outcome.err == (
            f"Error: a {dialect} statement cannot read the file {parquet} in place: name the "
            f"{dialect} table it should read with --table (the file then only gives the "
            "columns)\n")
    assert [d for d, c in CAPABILITIES.items() if c.reads_files] == ["duckdb"]


def test_a_file_gives_the_columns_of_a_statement_reading_the_table(
        parquet: Path, capsys: pytest.CaptureFixture[str]) -> None:
    outcome = run_main(capsys, "sql", str(parquet), "-y", "wilted", "--dialect", "postgres",
                       "--table", 'wh."Trays 2026"')
    assert outcome.code == 0, outcome.err
    assert "-- table: wh.\"Trays 2026\"" in outcome.out
    tree = sqlglot.parse_one(outcome.out, read="postgres")
    steps = {cte.alias for cte in tree.find_all(sqlglot.exp.CTE)}
    read = {(t.db, t.name) for t in tree.find_all(sqlglot.exp.Table) if t.name not in steps}
    assert read == {("wh", "Trays 2026")}
    assert "PARQUET" not in outcome.out.upper()
    # The library says the same.
    text = bitsift.statement(str(parquet), "wilted", table="wh.trays", dialect="mariadb")
    assert "`wh`.`trays`" in text and "PARQUET" not in text.upper()


@pytest.mark.postgres
def test_the_statement_from_a_parquet_schema_runs_on_postgres(
        parquet: Path, postgres_engine: sa.Engine, pg_schema: str) -> None:
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(
            f'CREATE TABLE "{pg_schema}".trays (shelf INTEGER, light DOUBLE PRECISION, '
            "soil TEXT, wilted TEXT)")
        connection.execute(sa.text(f'INSERT INTO "{pg_schema}".trays VALUES '
                                   "(:a, :b, :c, :d)"),
                           [dict(zip("abcd", r, strict=True)) for r in ROWS])
    text = bitsift.statement(str(parquet), "wilted", table=f"{pg_schema}.trays",
                             dialect="postgres")
    with postgres_engine.connect() as connection:
        rows = connection.exec_driver_sql(text.rstrip().rstrip(";")).mappings().all()
    pasted = {r["attribute"]: r["information_gain"] for r in rows if r["attribute_index"]}
    ranked = bitsift.rank(str(parquet), "wilted")
    assert isinstance(ranked, bitsift.Ranking)
    assert set(pasted) == {s.attribute for s in ranked.attributes}
    for score in ranked.attributes:
        assert pasted[score.attribute] == pytest.approx(score.information_gain, abs=1e-9)


def test_limit_is_refused_and_timeout_needs_a_source(
        parquet: Path, capsys: pytest.CaptureFixture[str]) -> None:
    limit = run_main(capsys, "sql", str(parquet), "-y", "wilted", "--limit", "3")
    assert (limit.code, limit.out) == (1, "")
    assert limit.err == ("Error: --limit is not used for a printed statement: it returns every "
                         "attribute, ordered by --sort (add a LIMIT when you paste it)\n")
    no_source = run_main(capsys, "sql", "-t", "t", "-a", "a", "-y", "y", "--timeout", "5")
    assert (no_source.code, no_source.out) == (1, "")
    assert no_source.err == (
        "Error: --timeout applies to the statements bitsift runs, and without a SOURCE it runs "
        "none: set a timeout in the console that runs the printed statement\n")
    with pytest.raises(SpecError, match="^limit is not used for a printed statement"):
        bitsift.statement(str(parquet), "wilted", limit=3)
    # With a SOURCE the timeout is applied to what runs there (the catalog, MDL cut points).
    applied = run_main(capsys, "sql", str(parquet), "-y", "wilted", "--timeout", "30",
                       "--binning", "mdl")
    assert applied.code == 0, applied.err


@pytest.mark.slow
def test_timeout_with_a_source_cuts_the_mdl_pre_pass(tmp_path: Path,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    # A table large enough that the MDL histogram cannot finish in a millisecond.
    database = tmp_path / "big.duckdb"
    with duckdb.connect(str(database)) as connection:
        connection.execute("CREATE TABLE t AS SELECT random() AS x, random() AS z, "
                           "(i % 3)::VARCHAR AS y FROM range(3000000) r(i)")
    outcome = run_main(capsys, "sql", str(database), "-t", "t", "-y", "y", "--binning", "mdl",
                       "--timeout", "0.001")
    assert (outcome.code, outcome.out) == (1, "")
    assert outcome.err == ("Error: the query ran longer than --timeout 0.001 s and was "
                           "cancelled\n")
