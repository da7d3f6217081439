"""Issue 21: inputs that used to get a confident answer to a wrong question are refused or
qualified. Item 1: continuous targets (refused by type or by class count; ``target_bins``);
item 4: redundancy and selection without identifiers, constants and noise; item 12: a table
in another schema."""

from __future__ import annotations

import json
from pathlib import Path

import duckdb
import numpy as np
import pytest
import sqlalchemy as sa
from helpers import run_main

import bitsift
from bitsift.analysis.redundancy import redundancy
from bitsift.analysis.selection import select_attributes
from bitsift.errors import ColumnError, DataError, SpecError, TableNotFoundError
from bitsift.run.target_bins import target_labels

ROWS = 400


def _rows() -> list[tuple[int, float, str, int, float]]:
    """Invented rows: a continuous 'growth' target, a grouping 'shade' that moves it, a noisy
    number 'moisture', and an integer 'tag' with one value per row."""
    rng = np.random.default_rng(21)
    shade = rng.integers(0, 3, ROWS)
    growth = np.round(shade * 2.0 + rng.normal(0, 1, ROWS), 6)
    moisture = np.round(rng.uniform(0, 1, ROWS), 6)
    return [(i, float(growth[i]), f"s{shade[i]}", int(i), float(moisture[i]))
            for i in range(ROWS)]


@pytest.fixture
def con() -> duckdb.DuckDBPyConnection:
    connection = duckdb.connect()
    connection.execute("CREATE TABLE trays (id INTEGER, growth DOUBLE, shade VARCHAR, "
                       "tag INTEGER, moisture DOUBLE, price DECIMAL(8, 2))")
    connection.executemany("INSERT INTO trays VALUES (?, ?, ?, ?, ?, ?)",
                           [(*r, round(r[1], 2)) for r in _rows()])
    return connection


def _ig_bits(x: np.ndarray, y: np.ndarray) -> float:
    """Information gain in bits from a NumPy contingency table (independent of bitsift)."""
    xs, xi = np.unique(x, return_inverse=True)
    ys, yi = np.unique(y, return_inverse=True)
    table = np.zeros((len(xs), len(ys)))
    np.add.at(table, (xi, yi), 1)
    n = table.sum()

    def h(counts: np.ndarray) -> float:
        p = counts[counts > 0] / n
        return float(-(p * np.log2(p)).sum())

    return h(table.sum(axis=0)) + h(table.sum(axis=1)) - h(table.ravel())


@pytest.mark.parametrize("target, typed", [("growth", "DOUBLE"), ("price", "DECIMAL(8,2)")])
def test_float_and_decimal_targets_are_refused_with_the_way_out(con, target, typed):
    with pytest.raises(SpecError) as caught:
        bitsift.rank(con, target=target, table="trays")
    message = str(caught.value)
    assert f"'{target}' ({typed})" in message and "target_bins N" in message
    assert con.execute("SELECT 1").fetchall() == [(1,)]  # nothing else was asked


def test_too_many_classes_are_refused_with_the_numbers(con):
    with pytest.raises(DataError) as caught:
        bitsift.rank(con, target="tag", table="trays")
    message = str(caught.value)
    assert f"{ROWS} classes" in message and "max_classes 100" in message
    assert "target_bins" in message  # an integer target can be binned
    ranking = bitsift.rank(con, target="tag", table="trays", max_classes=ROWS)
    assert ranking.classes == ROWS


def test_a_text_target_with_many_classes_is_not_offered_bins(con):
    with pytest.raises(DataError) as caught:
        bitsift.rank(con, target="shade", table="trays", max_classes=2)
    assert "target_bins" not in str(caught.value) and "3 classes" in str(caught.value)


def test_segments_are_held_to_the_cap_too(con):
    with pytest.raises(DataError, match="more than the max_classes 50"):
        bitsift.rank(con, target="tag", table="trays", by="shade", max_classes=50)


@pytest.mark.parametrize("value", [1, True, 2.5])
def test_max_classes_and_target_bins_values_are_checked(con, value):
    with pytest.raises(SpecError, match="max_classes must be"):
        bitsift.rank(con, target="shade", table="trays", max_classes=value)
    if value != True:  # noqa: E712 - True is 1 for Python, refused all the same
        with pytest.raises(SpecError, match="target_bins must be"):
            bitsift.rank(con, target="growth", table="trays", target_bins=value)


def test_target_bins_need_a_number_target(con):
    with pytest.raises(SpecError, match=r"target_bins needs a number target; 'shade'"):
        bitsift.rank(con, target="shade", table="trays", target_bins=3)


def test_target_bins_equal_numpy_quantiles_and_a_numpy_ranking(con):
    ranking = bitsift.rank(con, target="growth", table="trays", target_bins=4,
                           attributes="shade,tag", max_classes=ROWS)
    growth = np.array([r[1] for r in _rows()])
    # The cut points: numpy's linear interpolation (numpy.quantile's default method).
    expected = np.quantile(growth, [0.25, 0.5, 0.75])
    cuts = ranking.target_binning["cuts"]
    assert cuts == pytest.approx(list(expected), rel=0, abs=1e-12)
    assert ranking.classes == 4
    assert ranking.target_binning["labels"] == target_labels(cuts)
    classes = np.searchsorted(np.array(cuts), growth, side="right")  # x < cut[k]: bin k
    shade = np.array([r[2] for r in _rows()])
    assert ranking["shade"].information_gain == pytest.approx(_ig_bits(shade, classes), abs=1e-9)
    assert ranking["tag"].information_gain == pytest.approx(_ig_bits(np.arange(ROWS), classes),
                                                            abs=1e-9)


def test_target_bins_keep_nulls_out_and_reach_every_command(con):
    con.execute("UPDATE trays SET growth = NULL WHERE id < 10")
    ranking = bitsift.rank(con, target="growth", table="trays", target_bins=3, attributes="shade")
    assert ranking.rows == ROWS - 10 and ranking.rows_excluded == 10
    pairs = redundancy(con, target="growth", table="trays", target_bins=3,
                       attributes="shade,moisture", include_flagged=True)
    assert [p.first for p in pairs.matrix.ordered()] == ["shade"]


@pytest.mark.slow
def test_target_bins_in_every_format_and_the_cli(tmp_path: Path, capsys):
    path = tmp_path / "trays.duckdb"
    connection = duckdb.connect(str(path))
    connection.execute("CREATE TABLE trays (growth DOUBLE, shade VARCHAR)")
    connection.executemany("INSERT INTO trays VALUES (?, ?)", [(r[1], r[2]) for r in _rows()])
    connection.close()
    base = ("rank", str(path), "-t", "trays", "-y", "growth")
    refused = run_main(capsys, *base)
    assert refused.code == 1 and refused.out == ""
    assert refused.err.count("\n") == 1, refused.err  # one line
    assert "--target-bins N" in refused.err and "'growth' (DOUBLE)" in refused.err
    table = run_main(capsys, *base, "--target-bins", "3")
    assert table.code == 0, table.err
    assert "target 'growth' binned by quantile into 3 classes at:" in table.out
    markdown = run_main(capsys, *base, "--target-bins", "3", "--format", "markdown")
    assert "binned by quantile into 3 classes" in markdown.out
    data = json.loads(run_main(capsys, *base, "--target-bins", "3", "--format", "json").out)
    assert data["target_binning"]["bins"] == 3 and len(data["target_binning"]["cuts"]) == 2
    assert data["classes"] == 3
    pasted = run_main(capsys, "sql", str(path), "-t", "trays", "-y", "growth",
                      "--target-bins", "3", "--dialect", "postgres")
    assert pasted.code == 0 and "in 3 quantile bins" in pasted.out
    blind = run_main(capsys, "sql", "-t", "trays", "-y", "growth", "-a", "shade",
                     "--target-bins", "3")
    assert blind.code == 1 and "--target-bins needs a SOURCE" in blind.err
    many = run_main(capsys, "rank", str(path), "-t", "trays", "-y", "shade", "--max-classes", "2")
    assert many.code == 1 and "more than the --max-classes 2" in many.err


def test_target_bins_in_a_job_file(tmp_path: Path):
    path = tmp_path / "trays.duckdb"
    connection = duckdb.connect(str(path))
    connection.execute("CREATE TABLE trays (growth DOUBLE, shade VARCHAR)")
    connection.executemany("INSERT INTO trays VALUES (?, ?)", [(r[1], r[2]) for r in _rows()])
    connection.close()
    job = tmp_path / "job.toml"
    job.write_text(f'job = "growth"\nsource = "{path}"\n[results]\n'
                   f'destination = "{tmp_path / "history.duckdb"}"\n[[ranking]]\n'
                   'table = "trays"\ntarget = "growth"\ntarget_bins = 3\nmax_classes = 50\n')
    from bitsift.jobs.jobfile import JobError, load_job
    loaded = load_job(job)
    assert loaded.rankings[0].options["target_bins"] == 3
    job.write_text(job.read_text().replace("target_bins = 3", "target_bins = 1"))
    with pytest.raises(JobError, match="target_bins must be"):
        load_job(job)


def _server_table(engine: sa.Engine, schema: str, quote: str) -> str:
    table = f"{quote}{schema}{quote}.{quote}trays{quote}"
    with engine.begin() as connection:
        connection.exec_driver_sql(f"CREATE TABLE {table} (growth DOUBLE PRECISION, "
                                   "shade VARCHAR(8))")
        connection.execute(sa.text(f"INSERT INTO {table} VALUES (:g, :s)"),
                           [{"g": r[1], "s": r[2]} for r in _rows()])
    return f"{schema}.trays"


@pytest.mark.parametrize("engine", ["postgres", "mariadb"])
def test_target_bins_on_servers_equal_duckdb(request, engine, con):
    server = engine
    if server == "postgres":
        engine = request.getfixturevalue("postgres_engine")
        schema = request.getfixturevalue("pg_schema")
        table = _server_table(engine, schema, '"')
    else:
        engine = request.getfixturevalue("mariadb_engine")
        schema = request.getfixturevalue("mariadb_database")
        table = _server_table(engine, schema, "`")
    got = bitsift.rank(engine, target="growth", table=table, target_bins=4)
    want = bitsift.rank(con, target="growth", table="trays", target_bins=4, attributes="shade")
    assert got.target_binning == want.target_binning
    assert got["shade"].information_gain == want["shade"].information_gain


# Item 4: redundancy and selection leave out identifiers, constants and noise by default.

@pytest.fixture(scope="module")
def screened(tmp_path_factory) -> Path:
    """Invented trays: 'tray_id' an identifier, 'site' a constant, 'noise' unrelated to the
    target, 'bench' and 'bench_copy' informative and redundant with each other, 'light'
    informative on its own."""
    rng = np.random.default_rng(4)
    rows = 2000
    bench = rng.integers(0, 4, rows)
    light = rng.integers(0, 3, rows)
    outcome = np.where(rng.uniform(size=rows) < 0.7, (bench // 2) * 2 + (light == 0),
                       rng.integers(0, 4, rows))
    path = tmp_path_factory.mktemp("screened") / "trays.duckdb"
    with duckdb.connect(str(path)) as connection:
        connection.execute("CREATE TABLE trays (tray_id INTEGER, site VARCHAR, noise INTEGER, "
                           "bench INTEGER, bench_copy VARCHAR, light INTEGER, outcome INTEGER)")
        connection.executemany("INSERT INTO trays VALUES (?, ?, ?, ?, ?, ?, ?)", [
            (i, "north", int(rng.integers(0, 5)), int(bench[i]), f"b{bench[i]}", int(light[i]),
             int(outcome[i])) for i in range(rows)])
    return path


def test_select_leaves_out_identifiers_constants_and_noise(screened: Path):
    selection = select_attributes(str(screened), target="outcome", table="trays", k=5)
    assert set(selection.candidates) == {"bench", "bench_copy", "light"}
    assert selection.left_out["tray_id"] == "id_like"
    assert selection.left_out["site"] == "constant"
    assert selection.left_out["noise"].startswith("not significant, p = ")
    notes = [n for n in selection.notes if n.startswith("left out 3 attribute(s)")]
    assert len(notes) == 1 and "--include-flagged keeps them" in notes[0]
    assert selection.to_dict()["left_out"][0] == {"attribute": "tray_id", "reason": "id_like"}
    everything = select_attributes(str(screened), target="outcome", table="trays", k=2,
                                   include_flagged=True)
    assert everything.attributes[0] == "tray_id"  # what the guard rail is for
    assert everything.left_out == {}


def test_redundancy_pairs_only_the_candidates(screened: Path):
    result = redundancy(str(screened), target="outcome", table="trays")
    assert result.matrix.attributes == ("bench", "bench_copy", "light")
    assert [r["attribute"] for r in result.to_dict()["left_out"]] == ["tray_id", "noise", "site"]
    full = redundancy(str(screened), target="outcome", table="trays", include_flagged=True)
    assert len(full.matrix.pairs) == 15


def test_nothing_left_to_select_is_an_error(screened: Path):
    with pytest.raises(DataError, match="no candidate attribute left.*tray_id \\(id_like\\)"):
        select_attributes(str(screened), target="outcome", table="trays", k=2,
                          attributes="tray_id,site")


@pytest.mark.slow
def test_the_cli_says_so_in_one_line_and_keeps_them_when_asked(screened: Path, capsys,
                                                                tmp_path: Path):
    base = (str(screened), "-t", "trays", "-y", "outcome")
    chosen = run_main(capsys, "select", *base, "--k", "2")
    assert chosen.code == 0 and "tray_id" not in chosen.out
    assert sum(line.startswith("note: left out 3") for line in chosen.err.splitlines()) == 1
    kept = run_main(capsys, "select", *base, "--k", "2", "--include-flagged")
    assert "tray_id" in kept.out and "left out" not in kept.err
    pairs = run_main(capsys, "redundancy", *base, "--format", "json")
    assert len(json.loads(pairs.out)["pairs"]) == 3
    html = tmp_path / "r.html"
    report = run_main(capsys, "report", *base, "-o", str(html), "--select", "2")
    assert report.code == 0, report.err
    assert "left out 3 attribute(s)" in html.read_text()


def test_high_cardinality_pairs_go_in_batches_of_their_own(screened: Path, monkeypatch):
    from bitsift.analysis import redundancy as module
    monkeypatch.setattr(module, "MAX_BATCH_CELLS", 100)
    result = redundancy(str(screened), target="outcome", table="trays", include_flagged=True,
                        attributes="tray_id,bench,light,site")
    pairs_statements = [s for s in result.statements if "pair" in s.lower()]
    # 6 pairs: the three with tray_id (2,000 cells each) alone, then bench x light (20 cells),
    # bench x site and light x site (5 and 4): one statement for the last three.
    assert len(pairs_statements) == 4
    unbounded = redundancy(str(screened), target="outcome", table="trays", include_flagged=True,
                           attributes="tray_id,bench,light,site")
    assert unbounded.matrix.pairs == result.matrix.pairs


# Item 12: a table missing from the schema searched but present in others says where.

def test_duckdb_names_the_schemas_holding_the_table():
    connection = duckdb.connect()
    connection.execute("CREATE SCHEMA crm; CREATE SCHEMA archive; CREATE SCHEMA \"a.b\"")
    for schema in ("crm", "archive", '"a.b"'):
        connection.execute(f"CREATE TABLE {schema}.Accounts (region VARCHAR, churned BOOLEAN)")
    with pytest.raises(TableNotFoundError) as caught:
        bitsift.rank(connection, target="churned", table="accounts")
    message = str(caught.value)
    assert message.startswith("unknown table: 'accounts'")
    assert ('a table of that name exists as "a.b".Accounts, archive.Accounts, crm.Accounts: '
            "give that to table") in message
    with pytest.raises(TableNotFoundError) as nowhere:
        bitsift.rank(connection, target="churned", table="ledger")
    assert "exists as" not in str(nowhere.value)


def test_the_cli_spells_the_flag(tmp_path: Path, capsys):
    path = tmp_path / "customers.duckdb"
    with duckdb.connect(str(path)) as connection:
        connection.execute("CREATE SCHEMA crm; CREATE TABLE crm.accounts (r INTEGER, y INTEGER)")
    outcome = run_main(capsys, "rank", str(path), "-t", "accounts", "-y", "y")
    assert outcome.code == 1
    assert outcome.err == ("Error: unknown table: 'accounts'; a table of that name exists as "
                           "crm.accounts: give that to --table\n")


def test_postgres_names_the_schemas_holding_the_table(postgres_engine, pg_schema):
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(f'CREATE TABLE "{pg_schema}".accounts (r INTEGER, y INTEGER)')
    with pytest.raises(TableNotFoundError) as caught:
        bitsift.rank(postgres_engine, target="y", table="accounts")
    assert f"exists as {pg_schema}.accounts" in str(caught.value)
    with pytest.raises(TableNotFoundError) as other:
        bitsift.rank(postgres_engine, target="y", table="public.accounts")
    assert f"in schema 'public'; a table of that name exists as {pg_schema}.accounts" in str(
        other.value)


def test_mariadb_names_the_databases_holding_the_table(mariadb_engine, mariadb_database):
    with mariadb_engine.begin() as connection:
        connection.exec_driver_sql(f"CREATE TABLE `{mariadb_database}`.accounts (r INT, y INT)")
    with pytest.raises(TableNotFoundError) as caught:
        bitsift.rank(mariadb_engine, target="y", table="accounts")
    assert f"exists as {mariadb_database}.accounts" in str(caught.value)


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
