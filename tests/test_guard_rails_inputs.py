"""Issue 21, items 2 and 3: inputs read as the wrong kind. Dates and timestamps default to
binned time with ISO 8601 cut points; CSV files take reader options, and a text column holding
numbers gets a note. (Items 1, 4 and 12: tests/test_guard_rails.py.)"""

from __future__ import annotations

import json
from pathlib import Path

import duckdb
import numpy as np
import pytest
import sqlalchemy as sa
from helpers import run_main

import bitsift
from bitsift.errors import ColumnError, SpecError

# Item 3: reader options for CSV files, and a note when a text column holds numbers.

SEMICOLON_CSV = "tray;weight_g;ratio;grp\n" + "".join(
    f"{i};{100 + i % 7},{i % 10};{'inf' if i % 50 == 0 else str((i % 9) / 4).replace('.', ',')};"
    f"{'ab'[i % 7 > 3]}\n"
    for i in range(200))


@pytest.fixture
def semicolon_csv(tmp_path: Path) -> Path:
    path = tmp_path / "trays.csv"
    path.write_text(SEMICOLON_CSV)
    return path


def test_a_decimal_comma_file_gets_a_note_and_reads_as_numbers_with_options(semicolon_csv):
    plain = bitsift.rank(str(semicolon_csv), target="grp")
    assert plain["weight_g"].kind == "categorical"  # read as text: what the note is for
    notes = " | ".join(plain.notes)
    assert "column 'weight_g' is read as text" in notes and "decimal=," in notes
    assert "column 'ratio' is read as text" in notes
    commas = bitsift.rank(bitsift.FileSource.of(str(semicolon_csv), ["delimiter=;", "decimal=,"]),
                          target="grp")
    assert commas["weight_g"].kind == "numeric"
    assert [n for n in commas.notes if "'ratio'" in n and "double=ratio" in n]  # inf: still text
    read = bitsift.rank(bitsift.FileSource.of(str(semicolon_csv), ["delimiter=;", "decimal=,",
                                                                   "double=ratio"]),
                        target="grp")
    assert read["weight_g"].kind == "numeric" and read["ratio"].kind == "numeric"
    assert read.notes == []
    # The reference: the same numbers computed by Python from the text.
    weights = sorted(float(line.split(";")[1].replace(",", "."))
                     for line in SEMICOLON_CSV.splitlines()[1:])
    assert read["weight_g"].cuts == pytest.approx(
        sorted(set(np.quantile(weights, [j / 10 for j in range(1, 10)]))), abs=1e-12)


def test_numeric_on_a_text_column_holding_numbers_names_the_reader_option(semicolon_csv,
                                                                           capsys):
    # Found by hand on a fresh clone (issue 21 item 3): `--numeric` on a decimal-comma column
    # was refused without the way out the note gives, and the note never showed (the error
    # came first).
    with pytest.raises(ColumnError) as caught:
        bitsift.rank(str(semicolon_csv), target="grp", numeric="weight_g,tray")
    message = str(caught.value)
    assert message.startswith("numeric needs number columns")
    assert "'weight_g' is read as text, but its values read as numbers with a decimal comma: " \
           "read_option decimal=," in message
    assert "'tray' is read as text" not in message  # integers: read as numbers already
    with pytest.raises(ColumnError, match="'grp' \\(VARCHAR\\)$"):  # text: no hint
        bitsift.rank(str(semicolon_csv), target="weight_g", numeric="grp")
    cli = run_main(capsys, "rank", str(semicolon_csv), "-y", "grp", "--numeric", "weight_g")
    assert (cli.code, cli.out) == (1, "")
    assert cli.err.count("\n") == 1 and cli.err.startswith("Error: --numeric needs number")
    assert "--read-option decimal=, (and delimiter=; for a semicolon file)" in cli.err


def test_read_options_are_checked_all_at_once():
    from bitsift.engines.read_options import parse_read_options
    with pytest.raises(SpecError) as caught:
        parse_read_options(["delim=;", "decimal=;", "header=maybe", "skip=-1", "quote=ab",
                            "delimiter"])
    message = str(caught.value)
    assert "takes KEY=VALUE" in message
    with pytest.raises(SpecError) as caught:
        parse_read_options(["delim=;", "decimal=;", "header=maybe", "skip=-1", "quote=ab"])
    message = str(caught.value)
    for part in ("unknown key 'delim' (did you mean 'delimiter'?)", "decimal: must be one of",
                 "header: must be true or false", "skip: must be a whole number",
                 "quote: must be 1 to 1 character"):
        assert part in message
    assert parse_read_options(["delimiter==", "null=it's"]) == (("delimiter", "="),
                                                                 ("null", "it's"))


def test_read_option_values_reach_sql_as_literals(tmp_path: Path):
    path = tmp_path / "odd.csv"
    path.write_text("a|y\nit's|1\nx|0\nit's|1\n")
    ranking = bitsift.rank(bitsift.FileSource.of(str(path), {"delimiter": "|", "null": "it's"}),
                           target="y")
    assert ranking["a"].distinct == 2  # NULL and 'x': the null string was read as one
    assert any("nullstr = 'it''s'" in s.lower() for s in ranking.statements)


def test_read_options_only_for_csv_files(tmp_path: Path):
    parquet = tmp_path / "t.parquet"
    duckdb.sql(f"COPY (SELECT 1 AS a, 2 AS y) TO '{parquet}' (FORMAT parquet)")
    with pytest.raises(SpecError, match="read_option applies to CSV files only"):
        bitsift.rank(bitsift.FileSource.of(str(parquet), {"header": "yes"}), target="y")


@pytest.mark.slow
def test_read_options_on_the_cli_and_in_job_files(semicolon_csv, tmp_path: Path, capsys):
    refused = run_main(capsys, "rank", str(semicolon_csv), "-y", "grp", "--read-option",
                       "delim=;")
    assert refused.code == 1 and refused.err.startswith("Error: --read-option unknown key")
    read = run_main(capsys, "rank", str(semicolon_csv), "-y", "grp", "--read-option",
                    "delimiter=;", "--read-option", "decimal=,", "--format", "json")
    assert read.code == 0, read.err
    kinds = {a["attribute"]: a["kind"] for a in json.loads(read.out)["attributes"]}
    assert kinds["weight_g"] == "numeric"
    assert "note: column 'ratio' is read as text" in read.err
    spark = run_main(capsys, "rank", str(semicolon_csv), "-y", "grp", "--engine", "spark",
                     "--read-option", "delimiter=;")
    assert spark.code == 1 and "not with --engine spark" in spark.err
    job = tmp_path / "job.toml"
    job.write_text(f'job = "csv"\nsource = "{semicolon_csv}"\n'
                   'read_options = {delimiter = ";", decimal = ",", double = "ratio"}\n'
                   f'[results]\ndestination = "{tmp_path / "h.duckdb"}"\n'
                   '[[ranking]]\ntarget = "grp"\n')
    ran = run_main(capsys, "run", str(job))
    assert ran.code == 0, ran.err
    with duckdb.connect(str(tmp_path / "h.duckdb")) as history:
        tables = [t for (t,) in history.execute("SHOW TABLES").fetchall()]
        kinds = dict(history.execute(f"SELECT attribute, kind FROM {tables[0]}").fetchall())
    assert kinds["weight_g"] == "numeric" and kinds["ratio"] == "numeric"
    job.write_text(job.read_text().replace('decimal = ","', 'decimal = ";"'))
    checked = run_main(capsys, "run", str(job))
    assert checked.code == 1 and "decimal: must be one of" in checked.err


# Item 2: dates and timestamps default to binned time, cut points in ISO 8601 everywhere; a
# date part the type cannot have is refused; the part used is shown.

@pytest.fixture
def dated() -> duckdb.DuckDBPyConnection:
    connection = duckdb.connect()
    connection.execute(
        "CREATE TABLE trays AS SELECT DATE '2024-01-01' + CAST(i % 366 AS INTEGER) AS sown_on, "
        "TIMESTAMP '2024-01-01 00:00:00' + to_seconds(i * 3607) AS checked_at, "
        "CASE WHEN i % 366 < 183 THEN 'early' ELSE 'late' END AS season FROM range(2000) r(i)")
    return connection


def test_dates_and_timestamps_are_binned_as_time_with_iso_cuts(dated):
    ranking = bitsift.rank(dated, target="season", table="trays")
    sown, checked = ranking["sown_on"], ranking["checked_at"]
    assert sown.kind == checked.kind == "numeric" and "id_like" not in checked.flags
    assert sown.temporal == "date" and checked.temporal == "timestamp"
    # The reference: numpy.quantile of the epoch days/seconds, shown as the first day on the
    # right of each cut (dates) or the instant (timestamps), by Python's datetime.
    import datetime as dt
    days = np.array([(dt.date(2024, 1, 1) + dt.timedelta(days=i % 366)
                      - dt.date(1970, 1, 1)).days for i in range(2000)]) * 86400.0
    levels = [j / 10 for j in range(1, 10)]
    want = sorted(set(np.quantile(days, levels)))
    assert sown.cuts == pytest.approx(want, abs=1e-6)
    assert sown.to_dict()["cuts"] == [
        (dt.date(1970, 1, 1) + dt.timedelta(days=int(np.ceil(c / 86400)))).isoformat()
        for c in want]
    seconds = np.array([i * 3607 for i in range(2000)], dtype=float) + 1704067200.0
    instants = [dt.datetime(1970, 1, 1) + dt.timedelta(microseconds=round(c * 1e6))
                for c in np.quantile(seconds, levels)]
    assert checked.to_dict()["cuts"] == [t.isoformat() for t in instants]
    assert sown.information_gain > 0.85  # the season is a range of dates


def test_iso_cuts_in_every_format(dated, tmp_path: Path, capsys):
    path = tmp_path / "dated.duckdb"
    dated.execute(f"ATTACH '{path}' AS out; CREATE TABLE out.trays AS SELECT * FROM trays; "
                  "DETACH out")
    base = ("rank", str(path), "-t", "trays", "-y", "season")
    data = json.loads(run_main(capsys, *base, "--format", "json").out)
    cuts = {a["attribute"]: a["cuts"] for a in data["attributes"]}
    assert all(isinstance(c, str) and len(c) == 10 for c in cuts["sown_on"])
    assert all("T" in c for c in cuts["checked_at"])
    table = run_main(capsys, *base).out
    assert "sown_on     quantile of time, 10 bins: 2024-" in table
    csv_text = run_main(capsys, *base, "--format", "csv").out
    assert ";".join(cuts["sown_on"]) in csv_text
    markdown = run_main(capsys, *base, "--format", "markdown").out
    assert cuts["checked_at"][0] in markdown


def test_a_date_part_the_type_cannot_have_is_refused(dated, tmp_path: Path, capsys):
    with pytest.raises(ColumnError, match=r"hour of 'sown_on' \(DATE\)$"):
        bitsift.rank(dated, target="season", table="trays", date_part="sown_on=hour")
    with pytest.raises(ColumnError, match="name the columns that have it instead"):
        bitsift.rank(dated, target="season", table="trays", date_part="hour")
    hours = bitsift.rank(dated, target="season", table="trays", date_part="checked_at=hour")
    assert hours["checked_at"].kind == "categorical" and hours["checked_at"].date_part == "hour"
    assert hours["checked_at"].distinct == 24 and hours["sown_on"].kind == "numeric"
    assert hours["checked_at"].to_dict()["date_part"] == "hour"
    months = bitsift.rank(dated, target="season", table="trays", date_part="month")
    assert {a.attribute: a.date_part for a in months.attributes} == {
        "sown_on": "month", "checked_at": "month"}
    exact = bitsift.rank(dated, target="season", table="trays", categorical="sown_on")
    assert exact["sown_on"].kind == "categorical" and exact["sown_on"].distinct == 366


@pytest.mark.slow
def test_the_cli_refuses_hour_on_a_date_in_one_line_and_shows_the_part(dated, tmp_path, capsys):
    path = tmp_path / "dated.duckdb"
    dated.execute(f"ATTACH '{path}' AS out; CREATE TABLE out.trays AS SELECT * FROM trays; "
                  "DETACH out")
    base = ("rank", str(path), "-t", "trays", "-y", "season")
    refused = run_main(capsys, *base, "--date-part", "sown_on=hour")
    assert refused.code == 1 and refused.err == (
        "Error: --date-part asks for a part these columns cannot have: hour of 'sown_on' "
        "(DATE)\n")
    shown = run_main(capsys, *base, "--date-part", "checked_at=hour")
    assert "date parts ranked as categories:\n  checked_at  hour" in shown.out


@pytest.mark.parametrize("engine", ["postgres", "mariadb"])
def test_dates_are_binned_as_time_on_servers(request, engine, dated):
    if engine == "postgres":
        server, schema, quote = (request.getfixturevalue("postgres_engine"),
                                 request.getfixturevalue("pg_schema"), '"')
        stamp = "TIMESTAMP"
    else:
        server, schema, quote = (request.getfixturevalue("mariadb_engine"),
                                 request.getfixturevalue("mariadb_database"), "`")
        stamp = "DATETIME"
    rows = dated.execute("SELECT sown_on, checked_at, season FROM trays").fetchall()
    table = f"{quote}{schema}{quote}.trays"
    with server.begin() as connection:
        connection.exec_driver_sql(f"CREATE TABLE {table} (sown_on DATE, checked_at {stamp}, "
                                   "season VARCHAR(8))")
        connection.execute(sa.text(f"INSERT INTO {table} VALUES (:d, :t, :s)"),
                           [{"d": d, "t": t, "s": s} for d, t, s in rows])
    got = bitsift.rank(server, target="season", table=f"{schema}.trays")
    want = bitsift.rank(dated, target="season", table="trays")
    for name in ("sown_on", "checked_at"):
        assert got[name].to_dict()["cuts"] == want[name].to_dict()["cuts"]
    with pytest.raises(ColumnError, match="hour of 'sown_on'"):
        bitsift.rank(server, target="season", table=f"{schema}.trays", date_part="sown_on=hour")


def test_the_drill_down_labels_dated_bins_in_iso(dated):
    from bitsift.analysis.profile import profile
    run = profile(dated, target="season", table="trays", attributes="sown_on,checked_at")
    sown = run.profiles.attributes["sown_on"]
    assert sown.temporal == "date" and sown.values[0].label.startswith("< 2024-")
    assert sown.to_dict()["cuts"][0].startswith("2024-")
    assert "T" in run.profiles.attributes["checked_at"].values[1].label
