"""Issue 21: inputs that used to get a confident answer to a wrong question are refused or
qualified. Item 1: continuous targets (refused by type or by class count; ``target_bins``);
item 4: redundancy and selection without identifiers, constants and noise; item 12: a table
in another schema. Items 2 and 3 (dates, CSV reader options): tests/test_guard_rails_inputs.py."""

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
from bitsift.errors import DataError, SpecError, TableNotFoundError
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
