"""Stored counts (docs/stored-counts.md): ``bitsift counts`` and ``rank --from-counts``.

The data are invented for these checks (tests/helpers.random_dataset plus a day column). The
equality tests compare a window ranked from the counts with the rows of that window ranked
directly, numeric attributes cut at the stored cut points, to 1e-9 on every executed engine.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import json
import os
import subprocess
import sys
import threading
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
from sqlglot import exp

from bitsift.errors import BitsiftError
from bitsift.jobs import counts_store
from bitsift.jobs.counts_build import build_counts, paste_counts
from bitsift.run.counts_meta import CountsMeta
from bitsift.run.counts_rank import rank_counts
from bitsift.run.cuts import fetch_cuts
from bitsift.run.readout import read_ranking, read_segments
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.run.session import Session
from bitsift.spec.rankspec import RankOptions
from bitsift.sql.dialects import CAPABILITIES
from bitsift.sql.sqlbuild import rank_statement
from tests.helpers import (
    ENGINES,
    POSTGRES_URL,
    QUOTING_DIALECT,
    Dataset,
    assert_same_ranking,
    invalid_constructs,
    loaded,
    random_dataset,
    run_main,
)

#: Every test here opens DuckDB files or servers several times: seconds each on this machine.
pytestmark = pytest.mark.slow

FIRST_DAY = _dt.date(2026, 3, 1)
DAYS = 8


def dated_dataset(seed: int = 19, rows: int = 900) -> Dataset:
    """random_dataset with a ``sown`` day (ISO text, so every driver takes it; NULL now and
    then: such rows belong to no partition)."""
    base = random_dataset(seed, rows)
    rows_out = []
    for i, row in enumerate(base.rows):
        day = None if i % 97 == 5 else (FIRST_DAY + _dt.timedelta(days=i % DAYS)).isoformat()
        rows_out.append((*row, day))
    return Dataset(columns=(*base.columns, ("sown", "date")), rows=rows_out)


def _day(offset: int) -> str:
    return (FIRST_DAY + _dt.timedelta(days=offset)).isoformat()


def direct(source: Any, table: str, cuts: dict[str, list[float]], where: str | None,
           *, by: tuple[str, ...] = ()) -> Ranking | SegmentedRanking:
    """The rows ranked directly, numeric attributes cut at ``cuts`` (the stored ones)."""
    with Session.open(source, table) as session:
        spec = session.resolve(RankOptions(target="y", exclude=("sown",), where=where, by=by))
        statement = rank_statement(spec, session.engine.caps, cuts)
        records = session.engine.fetch(statement.sql).records()
        if by:
            return read_segments(records, spec, cuts, dialect=session.engine.caps.name)
        return read_ranking(records, spec, cuts, dialect=session.engine.caps.name)


def _destination(engine: str, where: Any, tmp_path: Path) -> tuple[str, str]:
    """(DEST, counts table) on the engine under test: the counts live beside the data."""
    if engine == "duckdb":
        return str(tmp_path / "counts.duckdb"), "bitsift_counts"
    table = f"{where.schema}.bitsift_counts" if where.schema else "bitsift_counts"
    return where.url, table


def _stored_cuts(ranking: Ranking) -> dict[str, list[float]]:
    return {a.attribute: list(a.cuts or []) for a in ranking.attributes if a.kind == "numeric"}


@pytest.mark.parametrize("engine", ENGINES)
def test_window_equals_the_direct_ranking(engine: str, request: pytest.FixtureRequest,
                                          tmp_path: Path) -> None:
    data = dated_dataset()
    with loaded(engine, data, request, duckdb_file=True) as where:
        dest, table = _destination(engine, where, tmp_path)
        report = build_counts(where.source, table=where.table, target="y", partition="sown",
                              into=dest, counts_table=table)
        assert report.partitions == [_day(i) for i in range(DAYS)]
        assert sorted(report.attributes) == ["level", "noise", "price", "ratio", "score",
                                             "word"]
        window = rank_counts(dest, counts_table=table, since=_day(2), until=_day(6))
        assert isinstance(window, Ranking)
        cuts = _stored_cuts(window)
        assert set(cuts) == {"score", "ratio", "price"}
        literal = "DATE '{}'"
        predicate = (f"sown >= {literal.format(_day(2))} AND sown < {literal.format(_day(6))}")
        want = direct(where.source, where.table, cuts, predicate)
        assert isinstance(want, Ranking)
        assert_same_ranking(window, want, f"{engine} window")
        assert window.rows_excluded == want.rows_excluded > 0
        # Every stored partition, and one partition by itself, as --by-partition gives it.
        whole = rank_counts(dest, counts_table=table)
        assert isinstance(whole, Ranking)
        everything = direct(where.source, where.table, cuts, "sown IS NOT NULL")
        assert isinstance(everything, Ranking)
        assert_same_ranking(whole, everything, f"{engine} all")
        trend = rank_counts(dest, counts_table=table, since=_day(3), until=_day(5),
                            by_partition=True)
        assert isinstance(trend, SegmentedRanking)
        assert [s.segment for s in trend.segments] == [{"sown": _day(3)}, {"sown": _day(4)}]
        one = direct(where.source, where.table, cuts, f"sown = {literal.format(_day(4))}")
        assert isinstance(one, Ranking)
        assert_same_ranking(trend.segments[1], one, f"{engine} one partition")


def test_missing_drop_and_sort_apply_when_ranking(tmp_path: Path,
                                                  request: pytest.FixtureRequest) -> None:
    with loaded("duckdb", dated_dataset(), request, duckdb_file=True) as where:
        dest = str(tmp_path / "c.duckdb")
        build_counts(where.source, table=where.table, target="y", partition="sown", into=dest)
        got = rank_counts(dest, missing="drop", sort="gain_ratio", limit=3)
        assert isinstance(got, Ranking)
        with Session.open(where.source, where.table) as session:
            spec = session.resolve(RankOptions(target="y", exclude=("sown",), missing="drop",
                                               sort="gain_ratio", limit=3,
                                               where="sown IS NOT NULL"))
            cuts = _stored_cuts(rank_counts(dest))  # type: ignore[arg-type]
            records = session.engine.fetch(rank_statement(spec, session.engine.caps,
                                                          cuts).sql).records()
            want = read_ranking(records, spec, cuts, dialect="duckdb")
        assert_same_ranking(got, want, "drop")
        assert len(got.attributes) == 3


# --- attacks, on DuckDB files ----------------------------------------------------------------

def _trays(path: Path, rows: list[tuple[Any, ...]]) -> None:
    """A small invented greenhouse table: day, zone, moisture, outcome."""
    with duckdb.connect(str(path)) as con:
        con.execute('CREATE TABLE IF NOT EXISTS trays (day DATE, zone VARCHAR, "zoné" VARCHAR,'
                    ' "feuchte ☂" DOUBLE, outcome VARCHAR)')
        con.executemany("INSERT INTO trays VALUES (?, ?, ?, ?, ?)", rows)


def _tray_rows(day: str, count: int, shift: int = 0) -> list[tuple[Any, ...]]:
    zones = ["a", "A", "b", None]
    return [(day, zones[(i + shift) % 4], f"Z{i % 3}", float((i * 7 + shift) % 13),
             ["thrived", "stunted", None][i % 3] if i % 5 else "failed") for i in range(count)]


def _total(dest: Path, table: str = "bitsift_counts") -> list[tuple[Any, ...]]:
    with duckdb.connect(str(dest), read_only=True) as con:
        return con.execute(f'SELECT "partition", SUM(n) FROM {table} WHERE attribute_index = 0 '
                           'GROUP BY 1 ORDER BY 1').fetchall()


def test_counting_twice_adds_nothing_and_new_days_are_appended(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40) + _tray_rows("2026-03-02", 30))
    first = build_counts(str(source), table="trays", target="outcome", partition="day",
                         into=str(dest))
    assert first.partitions == ["2026-03-01", "2026-03-02"]
    again = build_counts(str(source), table="trays", target="outcome", partition="day",
                         into=str(dest))
    assert (again.partitions, again.rows) == ([], 0)
    assert _total(dest) == [("2026-03-01", 40), ("2026-03-02", 30)]
    _trays(source, _tray_rows("2026-03-03", 25))
    third = build_counts(str(source), table="trays", target="outcome", partition="day",
                         into=str(dest))
    assert third.partitions == ["2026-03-03"]
    assert _total(dest) == [("2026-03-01", 40), ("2026-03-02", 30), ("2026-03-03", 25)]


def test_a_late_partition_is_recounted_and_cuts_stay_fixed(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40) + _tray_rows("2026-03-02", 30))
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest),
                 bins=3)
    cuts = _meta(dest).cuts
    # Late rows for the 2nd, far outside the first cut points.
    _trays(source, [("2026-03-02", "b", "Z1", 1000.0 + i, "thrived") for i in range(20)])
    stale = build_counts(str(source), table="trays", target="outcome", partition="day",
                         into=str(dest), bins=3)
    assert stale.partitions == []
    assert _total(dest)[1] == ("2026-03-02", 30)
    late = build_counts(str(source), table="trays", target="outcome", partition="day",
                        into=str(dest), bins=3, recount_from="2026-03-02")
    assert late.partitions == ["2026-03-02"]
    assert _total(dest) == [("2026-03-01", 40), ("2026-03-02", 50)]
    assert _meta(dest).cuts == cuts
    got = rank_counts(str(dest), since="2026-03-02")
    assert isinstance(got, Ranking)
    want = direct_trays(source, cuts, "day >= DATE '2026-03-02'")
    assert_same_ranking(got, want, "recounted")
    refit = build_counts(str(source), table="trays", target="outcome", partition="day",
                         into=str(dest), bins=3, refit=True)
    assert refit.partitions == ["2026-03-01", "2026-03-02"]
    assert _meta(dest).cuts != cuts


def direct_trays(source: Path, cuts: dict[str, list[float]], where: str) -> Ranking:
    with Session.open(str(source), "trays") as session:
        spec = session.resolve(RankOptions(target="outcome", exclude=("day",), where=where))
        records = session.engine.fetch(rank_statement(spec, session.engine.caps,
                                                      cuts).sql).records()
        return read_ranking(records, spec, cuts, dialect="duckdb")


def _meta(dest: Path) -> CountsMeta:
    with duckdb.connect(str(dest), read_only=True) as con:
        return CountsMeta.from_rows(con.execute("SELECT key, value FROM bitsift_counts_meta"
                                                ).fetchall(), "test")


def test_case_twins_unicode_and_null_values_match_the_direct_ranking(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 60) + _tray_rows("2026-03-02", 45, shift=1)
           + [(None, "a", "Z1", 2.0, "thrived")] * 7)
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest))
    got = rank_counts(str(dest))
    assert isinstance(got, Ranking)
    assert sorted(a.attribute for a in got.attributes) == ["feuchte ☂", "zone", "zoné"]
    # The rows without a day are in no partition.
    assert _total(dest) == [("2026-03-01", 60), ("2026-03-02", 45)]
    want = direct_trays(source, _meta(dest).cuts, "day IS NOT NULL")
    assert_same_ranking(got, want, "twins")
    assert got["zone"].distinct == 4  # a, A, b and NULL


def test_a_failed_write_leaves_nothing_half_way(tmp_path: Path,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40))
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest))
    before = _total(dest)
    _trays(source, _tray_rows("2026-03-02", 30))

    def killed(self: CountsMeta) -> list[tuple[str, str]]:
        raise KeyboardInterrupt  # after the counts rows were inserted, before the metadata

    monkeypatch.setattr(counts_store, "_BATCH", 3)
    monkeypatch.setattr(CountsMeta, "rows", killed)
    with pytest.raises(KeyboardInterrupt):
        build_counts(str(source), table="trays", target="outcome", partition="day",
                     into=str(dest))
    assert _total(dest) == before


def test_concurrent_runs_into_one_destination_do_not_double_rows(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, [row for d in range(1, 6) for row in _tray_rows(f"2026-03-0{d}", 50)])
    command = [sys.executable, "-m", "bitsift.cli", "counts", str(source), "-t", "trays",
               "-y", "outcome", "--partition", "day", "--into", str(dest)]
    environment = {**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[1] / "src")}
    runs = [subprocess.Popen(command, env=environment, stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True) for _ in range(3)]
    outputs = [run.communicate(timeout=120) for run in runs]
    # Each run reads the source while the others may hold the destination: all succeed.
    assert [run.returncode for run in runs] == [0, 0, 0], outputs
    assert _total(dest) == [(f"2026-03-0{d}", 50) for d in range(1, 6)]


def test_mismatched_options_empty_window_and_bad_grain_are_one_line_errors(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40))
    base = ["counts", str(source), "-t", "trays", "--partition", "day", "--into", str(dest)]
    assert run_main(capsys, *base, "-y", "outcome").code == 0
    other = run_main(capsys, *base, "-y", "zone")
    assert other.code == 1
    assert other.err.count("\n") == 1
    assert "target 'zone' asked, 'outcome' stored" in other.err and "--refit" in other.err
    fewer = run_main(capsys, *base, "-y", "outcome", "-a", "zone")
    assert fewer.code == 1 and "attributes" in fewer.err
    empty = run_main(capsys, "rank", str(dest), "--from-counts", "--since", "2027-01-01")
    assert empty.code == 1 and empty.err.count("\n") == 1
    assert "no stored partitions" in empty.err and "2026-03-01 to 2026-03-01" in empty.err
    missing = run_main(capsys, "rank", str(dest), "--from-counts", "--counts-table", "nope")
    assert missing.code == 1 and missing.err.count("\n") == 1
    assert f"counts table nope in {dest}" in missing.err and "bitsift counts" in missing.err
    bad_date = run_main(capsys, "rank", str(dest), "--from-counts", "--since", "March")
    assert bad_date.code == 1 and "YYYY-MM-DD" in bad_date.err
    grain = run_main(capsys, "counts", str(source), "-t", "trays", "-y", "outcome",
                     "--partition", "zone", "--grain", "month", "--into",
                     str(tmp_path / "other.duckdb"))
    assert grain.code == 1 and "needs a date or timestamp column" in grain.err
    stray = run_main(capsys, "rank", str(dest), "--from-counts", "-y", "outcome")
    assert stray.code == 2 and "decides what is counted" in stray.err
    no_target = run_main(capsys, "rank", str(source), "-t", "trays")
    assert no_target.code == 2 and "--target" in no_target.err


def test_rank_from_counts_prints_like_rank(tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40) + _tray_rows("2026-03-02", 40, shift=2))
    counted = run_main(capsys, "counts", str(source), "-t", "trays", "-y", "outcome",
                       "--partition", "day", "--into", str(dest))
    assert counted.code == 0
    assert "counted 2 partition(s), 2026-03-01 to 2026-03-02" in counted.out
    shown = run_main(capsys, "rank", str(dest), "--from-counts", "--until", "2026-03-02",
                     "-f", "json")
    assert shown.code == 0, shown.err
    assert '"target": "outcome"' in shown.out and '"attribute": "zone"' in shown.out
    trend = run_main(capsys, "rank", str(dest), "--from-counts", "--by-partition", "-f", "csv")
    assert trend.code == 0 and "2026-03-02" in trend.out


def test_a_partition_column_named_like_the_internal_alias_is_refused(tmp_path: Path) -> None:
    source = tmp_path / "src.duckdb"
    with duckdb.connect(str(source)) as con:
        con.execute("CREATE TABLE t AS SELECT DATE '2026-01-01' AS d, 1 AS bitsift_partition, "
                    "'x' AS y")
    with pytest.raises(BitsiftError, match="bitsift_partition"):
        build_counts(str(source), table="t", target="y", partition="d",
                     into=str(tmp_path / "c.duckdb"))


def test_values_round_trip() -> None:
    from bitsift.run.counts_values import decode, encode

    values = ["", "a:b", "日本", 0, -7, 2**62, 1e-300, float("inf"), True, False,
              _dt.date(2026, 3, 1), _dt.datetime(2026, 3, 1, 12, 30, 1, 5)]
    assert [decode(encode(v)) for v in values] == values
    assert encode(-0.0) == encode(0.0)
    assert encode(b"\xff\x00") == "x:ff00" and decode("x:ff00") == b"\xff\x00"
    assert encode(None) is None



@pytest.mark.parametrize("engine", ("duckdb", "postgres"))
def test_the_benchmark_runs_at_a_small_size(engine: str, tmp_path: Path,
                                            request: pytest.FixtureRequest) -> None:
    """benchmarks/stored_counts.py at a tiny size, so it never rots (timings live in
    benchmarks/RESULTS.md, never in tests)."""
    server = []
    if engine == "postgres":
        request.getfixturevalue("postgres_engine")  # skips (or fails in CI) without a server
        server = ["--engine", "postgres", "--postgres-url", POSTGRES_URL]
    script = Path(__file__).resolve().parents[1] / "benchmarks" / "stored_counts.py"
    out = tmp_path / "result.json"
    environment = {**os.environ, "PYTHONPATH": str(script.parents[1] / "src")}
    completed = subprocess.run(
        [sys.executable, str(script), "--days", "3", "--rows-per-day", "2000",
         "--attributes", "4", "--repeats", "2", "--json", str(out), *server],
        capture_output=True, text=True, timeout=300, env=environment)
    assert completed.returncode == 0, completed.stderr
    assert "ratio a/b:" in completed.stdout
    result = json.loads(out.read_text())
    assert result["data_rows"] == 4 * 2000
    assert result["counts_rows"] > 0
    assert len(result["seconds"]["a"]) == len(result["seconds"]["b"]) == 2
    assert result["largest_categorical_difference"] < 1e-9


# --- bitsift sql --counts: the statements pasted into the warehouse -------------------------

def _execute(where: Any, statements: list[str]) -> list[dict[str, Any]]:
    """Run pasted statements in order as a user would; the rows of the last one."""
    if where.engine == "duckdb":
        with duckdb.connect(where.source) as con:
            for sql in statements[:-1]:
                con.execute(sql)
            cursor = con.execute(statements[-1])
            names = [d[0] for d in cursor.description]
            return [dict(zip(names, row, strict=True)) for row in cursor.fetchall()]
    engine = sa.create_engine(where.url, poolclass=sa.pool.NullPool)
    try:
        with engine.begin() as connection:
            for sql in statements[:-1]:
                connection.exec_driver_sql(sql, execution_options={"no_parameters": True})
            result = connection.exec_driver_sql(statements[-1],
                                                execution_options={"no_parameters": True})
            return [dict(row._mapping) for row in result]
    finally:
        engine.dispose()


def _stored_rows(where: Any, table: str) -> int:
    rows = _execute(where, [f"SELECT COUNT(*) AS n FROM {table}"])
    return int(next(iter(rows[0].values())))


@pytest.mark.parametrize("engine", ENGINES)
def test_pasted_statements_keep_counts_in_the_warehouse(engine: str, tmp_path: Path,
                                                        request: pytest.FixtureRequest) -> None:
    with loaded(engine, dated_dataset(), request, duckdb_file=True) as where:
        table = f"{where.schema}.bitsift_counts" if where.schema else "bitsift_counts"
        text = paste_counts(where.source, table=where.table, target="y", partition="sown",
                            counts_table=table, since=_day(2), until=_day(6))
        assert text.startswith("-- bitsift")
        create, insert, ranking = [s for s in text.split(";\n\n") if s.strip()]
        assert "CREATE TABLE IF NOT EXISTS" in create and insert.lstrip().count("INSERT") == 1
        quoted_table = ".".join(exp.to_identifier(p, quoted=True).sql(
            QUOTING_DIALECT[engine]) for p in table.split("."))
        _execute(where, [create, insert, "SELECT 1 AS done"])
        stored = _stored_rows(where, quoted_table)
        assert stored > 0
        # The nightly insert again: no partition is newer than the newest stored one.
        _execute(where, [create, insert, "SELECT 1 AS done"])
        assert _stored_rows(where, quoted_table) == stored
        records = _execute(where, [ranking.rstrip(";\n")])
        with Session.open(where.source, where.table) as session:
            predicate = f"sown >= DATE '{_day(2)}' AND sown < DATE '{_day(6)}'"
            spec = session.resolve(RankOptions(target="y", exclude=("sown",), where=predicate))
            cuts = fetch_cuts(session.engine, dataclasses.replace(spec, where=None))
            pasted = read_ranking(records, spec, cuts, dialect=engine)
            direct_records = session.engine.fetch(
                rank_statement(spec, session.engine.caps, cuts).sql).records()
            want = read_ranking(direct_records, spec, cuts, dialect=engine)
        assert_same_ranking(pasted, want, f"{engine} pasted")
        # The client-side path gives the same ranking from its own counts.
        dest = str(tmp_path / "client.duckdb")
        build_counts(where.source, table=where.table, target="y", partition="sown", into=dest)
        client = rank_counts(dest, since=_day(2), until=_day(6))
        assert isinstance(client, Ranking)
        assert_same_ranking(pasted, client, f"{engine} client")


def test_sql_counts_on_the_command_line(tmp_path: Path,
                                        capsys: pytest.CaptureFixture[str]) -> None:
    source = tmp_path / "src.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40))
    shown = run_main(capsys, "sql", str(source), "--counts", "-t", "trays", "-y", "outcome",
                     "--partition", "day", "-d", "sqlite")
    assert shown.code == 0, shown.err
    assert shown.out.count(";\n") == 3 and "numeric cut points" in shown.out
    stray = run_main(capsys, "sql", str(source), "-t", "trays", "-y", "outcome",
                     "--partition", "day")
    assert stray.code == 2 and "--partition needs --counts" in stray.err
    month = run_main(capsys, "sql", str(source), "--counts", "-t", "trays", "-y", "outcome",
                     "--partition", "day", "--grain", "month", "-d", "sqlite")
    assert month.code == 1 and "not available on sqlite" in month.err


@pytest.mark.parametrize(("grain", "windows"), [
    ("week", [("2026-03-02", "2026-03-16"), ("2026-03-09", None)]),
    ("month", [("2026-03-01", "2026-04-01"), ("2026-04-01", None)]),
])
@pytest.mark.parametrize("engine", ("duckdb", "postgres", "mariadb"))
def test_weeks_and_months_match_the_direct_ranking(
        engine: str, grain: str, windows: list[tuple[str, str | None]], tmp_path: Path,
        request: pytest.FixtureRequest) -> None:
    base = random_dataset(23, 700)
    start = _dt.date(2026, 2, 27)  # a Friday: weeks and months straddle the days
    rows = [(*row, (start + _dt.timedelta(days=(i * 5) % 45)).isoformat())
            for i, row in enumerate(base.rows)]
    data = Dataset(columns=(*base.columns, ("sown", "timestamp" if engine == "postgres"
                                            else "date")), rows=rows)
    with loaded(engine, data, request, duckdb_file=True) as where:
        dest = str(tmp_path / "counts.duckdb")
        report = build_counts(where.source, table=where.table, target="y", partition="sown",
                              into=dest, grain=grain, attributes="word,level,noise")
        if grain == "week":
            assert report.partitions[0] == "2026-02-23"  # the Monday of the first week
        else:
            assert report.partitions == ["2026-02-01", "2026-03-01", "2026-04-01"]
        for since, until in windows:
            got = rank_counts(dest, since=since, until=until)
            assert isinstance(got, Ranking)
            predicate = f"sown >= DATE '{since}'" + (f" AND sown < DATE '{until}'"
                                                     if until else "")
            want = direct(where.source, where.table, {}, predicate)
            assert isinstance(want, Ranking)
            want_spec_attributes = {a.attribute for a in want.attributes}
            assert {a.attribute for a in got.attributes} <= want_spec_attributes
            for scored in got.attributes:
                other = want[scored.attribute]
                assert abs(scored.information_gain - other.information_gain) <= 1e-9, grain
                assert (scored.rows, scored.distinct) == (other.rows, other.distinct), grain


def test_integer_and_text_partitions(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    with duckdb.connect(str(source)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 12 AS batch, "
                    "chr(CAST(65 + i % 3 AS INTEGER)) AS bench, i % 5 AS a, "
                    "CASE WHEN i % 4 = 0 THEN 'late' ELSE 'ok' END AS y "
                    "FROM range(600) r(i)")
    numbered = build_counts(str(source), table="t", target="y", partition="batch",
                            grain="value", into=str(dest), exclude="bench")
    assert numbered.partitions == list(range(12))  # integers, in numeric order
    got = rank_counts(str(dest), since="2", until="10")
    assert isinstance(got, Ranking) and got.rows == 400
    with pytest.raises(BitsiftError, match="integer"):
        rank_counts(str(dest), since="two")
    lettered = build_counts(str(source), table="t", target="y", partition="bench",
                            grain="value", into=str(dest), counts_table="by_bench",
                            exclude="batch")
    assert lettered.partitions == ["A", "B", "C"]
    one = rank_counts(str(dest), counts_table="by_bench", since="B", until="C")
    assert isinstance(one, Ranking) and one.rows == 200


@pytest.mark.parametrize("engine", ("postgres", "mariadb"))
def test_concurrent_runs_into_a_server_destination_take_turns(
        engine: str, request: pytest.FixtureRequest) -> None:
    """Four runs at once into one PostgreSQL/MariaDB counts table: the writer lock makes them
    take turns, and each replaces the partitions it carries, so no row is doubled."""
    data = dated_dataset(rows=400)
    with loaded(engine, data, request) as where:
        table = f"{where.schema}.bitsift_counts"
        errors: list[BaseException] = []

        def one_run() -> None:
            try:
                build_counts(where.source, table=where.table, target="y", partition="sown",
                             into=where.url, counts_table=table, attributes="word,noise")
            except BaseException as error:  # noqa: BLE001 - reported below
                errors.append(error)

        runs = [threading.Thread(target=one_run) for _ in range(4)]
        for run in runs:
            run.start()
        for run in runs:
            run.join(timeout=120)
        assert errors == []
        dialect = QUOTING_DIALECT[engine]
        quoted_table = ".".join(exp.to_identifier(p, quoted=True).sql(dialect)
                                for p in table.split("."))
        partition = exp.to_identifier("partition", quoted=True).sql(dialect)
        totals = _execute(where, [f"SELECT {partition} AS p, SUM(n) AS n FROM {quoted_table} "
                                  "WHERE attribute_index = 0 GROUP BY 1 ORDER BY 1"])
        days = data.column("sown")
        assert [(str(r["p"]), int(r["n"])) for r in totals] == [
            (_day(i), sum(1 for d in days if d == _day(i))) for i in range(DAYS)]


def test_the_same_options_spelled_otherwise_are_the_same_counts(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40))
    build_counts(str(source), table="trays", target="outcome", partition="day", into=str(dest),
                 exclude="zoné", binning_for="feuchte ☂=equal-width:3")
    _trays(source, _tray_rows("2026-03-02", 30))
    again = build_counts(str(source), table="trays", target="outcome", partition="DAY",
                         into=str(dest), exclude=["zoné"],
                         binning_for=["feuchte ☂=equal-width:3"])
    assert again.partitions == ["2026-03-02"]
    assert _meta(dest).cuts["feuchte ☂"] == pytest.approx([4.0, 8.0])
    with duckdb.connect(str(source)) as con:
        con.execute("ALTER TABLE trays DROP COLUMN zone")
    with pytest.raises(BitsiftError, match="no longer has: zone; rebuild"):
        build_counts(str(source), table="trays", target="outcome", partition="day",
                     into=str(dest), exclude="zoné",
                     binning_for="feuchte ☂=equal-width:3")


def test_pasted_statements_for_every_dialect(tmp_path: Path) -> None:
    """The three statements parse in every dialect of the capability table and avoid the
    constructs a dialect rejects (tests/helpers.invalid_constructs); weeks and months where
    the dialect can truncate dates."""
    source = tmp_path / "src.duckdb"
    _trays(source, _tray_rows("2026-03-01", 40))
    for dialect in CAPABILITIES:
        text = paste_counts(str(source), table="trays", target="outcome", partition="day",
                            since="2026-03-01", dialect=dialect)
        statements = [s for s in text.split(";\n\n") if s.strip()]
        assert len(statements) == 3, dialect
        for number, statement in enumerate(statements):
            problems = invalid_constructs(statement.rstrip(";\n"), dialect)
            assert problems == [], f"{dialect} statement {number + 1}: {problems}"
        if dialect in ("tsql", "oracle"):  # LOBs there cannot be grouped as such
            assert "MAX)" not in text and "CLOB" not in text, dialect


def test_nan_infinities_empty_and_one_row_tables(tmp_path: Path) -> None:
    source, dest = tmp_path / "src.duckdb", tmp_path / "dest.duckdb"
    with duckdb.connect(str(source)) as con:
        con.execute("CREATE TABLE odd AS SELECT DATE '2026-01-01' + CAST(i % 2 AS INTEGER) AS d, "
                    "CASE WHEN i % 3 = 0 THEN 'nan'::DOUBLE WHEN i % 3 = 1 THEN '-inf'::DOUBLE "
                    "ELSE i END AS a, CASE WHEN i % 5 = 0 THEN 'inf'::DOUBLE ELSE i END AS x, "
                    "i % 2 = 0 AS y FROM range(60) r(i)")
        con.execute("CREATE TABLE empty (d DATE, a VARCHAR, y VARCHAR)")
        con.execute("CREATE TABLE one AS SELECT DATE '2026-01-01' AS d, 'a' AS a, 'ok' AS y")
    build_counts(str(source), table="odd", target="y", partition="d", into=str(dest),
                 categorical="a", bins=3)
    got = rank_counts(str(dest))
    assert isinstance(got, Ranking)
    cuts = _meta(dest).cuts
    with Session.open(str(source), "odd") as session:
        spec = session.resolve(RankOptions(target="y", exclude=("d",), categorical=("a",),
                                           bins=3))
        want = read_ranking(session.engine.fetch(rank_statement(spec, session.engine.caps,
                                                                cuts).sql).records(),
                            spec, cuts, dialect="duckdb")
    assert_same_ranking(got, want, "non-finite")
    assert got["a"].distinct == 22  # NaN and -inf are one value each
    empty = build_counts(str(source), table="empty", target="y", partition="d",
                         into=str(dest), counts_table="e")
    assert (empty.partitions, empty.rows) == ([], 0)
    with pytest.raises(BitsiftError, match="none stored"):
        rank_counts(str(dest), counts_table="e")
    build_counts(str(source), table="one", target="y", partition="d", into=str(dest),
                 counts_table="o")
    with pytest.raises(BitsiftError, match="single class"):
        rank_counts(str(dest), counts_table="o")


@pytest.mark.parametrize("engine", ("duckdb", "postgres"))
def test_refit_may_change_the_partition_kind(engine: str, tmp_path: Path,
                                             request: pytest.FixtureRequest) -> None:
    data = dated_dataset(rows=200)
    numbered = Dataset(columns=(*data.columns, ("batch", "integer")),
                       rows=[(*row, i % 4) for i, row in enumerate(data.rows)])
    with loaded(engine, numbered, request, duckdb_file=True) as where:
        dest, table = _destination(engine, where, tmp_path)
        build_counts(where.source, table=where.table, target="y", partition="sown",
                     into=dest, counts_table=table, exclude="batch")
        with pytest.raises(BitsiftError, match="--refit"):
            build_counts(where.source, table=where.table, target="y", partition="batch",
                         grain="value", into=dest, counts_table=table, exclude="sown")
        rebuilt = build_counts(where.source, table=where.table, target="y",
                               partition="batch", grain="value", into=dest,
                               counts_table=table, exclude="sown", refit=True)
        assert rebuilt.partitions == [0, 1, 2, 3]
        got = rank_counts(dest, counts_table=table, since=1, until=3)
        assert isinstance(got, Ranking) and got.rows + got.rows_excluded == 100
