"""Job files: validation with line numbers, runs on DuckDB and PostgreSQL, one transaction per run.

Data: random, generated with a seeded numpy generator.
"""

from __future__ import annotations

import shutil
import uuid
from pathlib import Path

import duckdb
import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa
from click.testing import CliRunner

from bitsift.cli import cli
from bitsift.jobs.history import Destination
from bitsift.jobs.history_open import open_store
from bitsift.jobs.job_lines import scan_lines
from bitsift.jobs.job_run import preflight, run_job
from bitsift.jobs.jobfile import JobError, RunError, load_job

ROOT = Path(__file__).resolve().parents[1]
POSTGRES_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"


def random_rows(n: int = 1500, seed: int = 3) -> list[dict[str, object]]:
    """y depends on a (strongly) and b (weakly); label is text that does not cast to a number."""
    rng = np.random.default_rng(seed)
    a = rng.integers(0, 4, n)
    b = rng.choice(["x", "y", "z"], n)
    noisy = rng.random(n) < 0.3
    y = np.where(noisy, rng.choice(["yes", "no"], n), np.where(a >= 2, "yes", "no"))
    amount = rng.normal(size=n) + a
    return [
        {"a": int(a[i]), "b": str(b[i]), "amount": float(amount[i]), "label": f"L{i % 7}",
         "y": str(y[i])}
        for i in range(n)
    ]


def duckdb_source(path: Path, rows: list[dict[str, object]] | None = None) -> Path:
    rows = rows if rows is not None else random_rows()
    frame = pd.DataFrame(rows, columns=["a", "b", "amount", "label", "y"])
    con = duckdb.connect(str(path))
    con.register("frame", frame)
    con.execute("CREATE TABLE t AS SELECT CAST(a AS INTEGER) AS a, b, amount, label, y "
                "FROM frame")
    con.close()
    return path


def write_job(folder: Path, text: str, name: str = "job.toml") -> Path:
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


def two_rankings(source: str, destination: str, table: str = "history", *,
                 second_where: str = "amount > 0", source_table: str = "t") -> str:
    return f"""
job = "nightly"
source = "{source}"

[results]
destination = "{destination}"
table = "{table}"

[defaults]
table = "{source_table}"
target = "y"

[[ranking]]
name = "all"
exclude = ["label"]

[[ranking]]
name = "positive"
where = "{second_where}"
missing = "drop"
"""


def history_count(destination: Destination, job: str = "nightly") -> dict[str, int]:
    with open_store(destination) as store:
        return {r.run_id: r.rows for r in store.runs(job)}


# --- validation -------------------------------------------------------------------------------


def test_scan_lines_skips_text_inside_multiline_values() -> None:
    text = '\n'.join([
        'job = "j"',                 # 1
        '[[ranking]]',               # 2
        'where = """',               # 3
        'bins = 99',                 # 4: inside the string, not a key
        '"""',                       # 5
        'exclude = [',               # 6
        '  "a", # x = 1',            # 7
        ']',                         # 8
        'bins = 4',                  # 9
        '[[ranking]]',               # 10
        "'quoted key' = 1",          # 11
    ])
    lines = scan_lines(text)
    assert lines.of("ranking", 0, "bins") == 9
    assert lines.of("ranking", 0, "exclude") == 6
    assert lines.of("ranking", 1) == 10
    assert lines.of("ranking", 1, "quoted key") == 11
    assert lines.of("ranking", 1, "bins") == 10  # not set there: the header line


def test_valid_job_merges_defaults_and_resolves_paths(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb")))
    assert job.name == "nightly"
    assert job.source == str(tmp_path / "src.duckdb")
    assert job.destination.path == tmp_path / "hist.duckdb"
    assert [r.name for r in job.rankings] == ["all", "positive"]
    second = job.ranking("positive")
    assert (second.table, second.target) == ("t", "y")
    assert second.options == {"where": "amount > 0", "missing": "drop"}
    assert second.line_of("target") == 11  # from [defaults]
    assert second.line_of("missing") == 20


def test_every_problem_is_reported_at_once_with_its_line(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    text = """job = "bad"
source = "src.duckdb"
colour = "blue"

[results]
destination = "no/such/folder/h.duckdb"
tabel = "x"

[[ranking]]
name = "one"
table = "t"
target = "y"
bins = "ten"
missing = "sometimes"

[[ranking]]
name = "one"
table = "t"
sort = "gain"
limit = 0
"""
    with pytest.raises(JobError) as caught:
        load_job(write_job(tmp_path, text))
    found = [(p.line, p.message) for p in caught.value.problems]
    expected = [
        (3, "unknown key 'colour'"),
        (6, "folder of the results file does not exist"),
        (7, "unknown key 'tabel' in [results] (did you mean 'table'?)"),
        (13, "bins must be a whole number, not 'ten'"),
        (14, "missing must be one of category, drop, not 'sometimes'"),
        (16, "target is required"),
        (17, "ranking name 'one' is already used at line 10"),
        (19, "sort must be one of"),
        (20, "limit must be at least 1, not 0"),
    ]
    assert len(found) == len(expected), found
    for (line, message), (want_line, want_text) in zip(found, expected, strict=True):
        assert line == want_line and want_text in message, (line, message)
    assert f"{tmp_path / 'job.toml'}:13: ranking 1: bins" in str(caught.value)


def test_toml_syntax_error_names_its_line(tmp_path: Path) -> None:
    path = write_job(tmp_path, 'job = "x"\nsource = "a.duckdb"\n[results\n')
    with pytest.raises(JobError) as caught:
        load_job(path)
    assert [p.line for p in caught.value.problems] == [3]
    assert "not valid TOML" in str(caught.value)


def test_table_required_for_database_and_refused_for_data_files(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    (tmp_path / "data.csv").write_text("a,y\n1,2\n")
    text = """source = "src.duckdb"
[results]
destination = "h.duckdb"
[[ranking]]
target = "y"
"""
    with pytest.raises(JobError, match=r"job.toml:4: ranking 1: table is required"):
        load_job(write_job(tmp_path, text))
    csv = text.replace("src.duckdb", "data.csv").replace('target = "y"',
                                                          'target = "y"\ntable = "t"')
    with pytest.raises(JobError, match=r"job.toml:6: ranking 1: table is not used"):
        load_job(write_job(tmp_path, csv))


def test_preflight_reports_catalog_problems_of_every_ranking(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    text = """source = "src.duckdb"
[results]
destination = "h.duckdb"
[[ranking]]
name = "r1"
table = "t"
target = "y"
exclude = ["lable"]
[[ranking]]
name = "r2"
table = "tt"
target = "y"
[[ranking]]
name = "r3"
table = "t"
target = "y"
where = "amount > 0 AND colour = 'red'"
"""
    job = load_job(write_job(tmp_path, text))
    with pytest.raises(JobError) as caught:
        run_job(job)
    found = {p.line: p.message for p in caught.value.problems}
    assert set(found) == {8, 11, 17}
    assert "'lable' (did you mean 'label'?)" in found[8]
    assert "unknown table" in found[11] and "'tt'" in found[11]
    assert "'colour'" in found[17]
    assert not (tmp_path / "h.duckdb").exists()  # nothing ran, nothing was written


# --- runs on DuckDB ---------------------------------------------------------------------------


@pytest.mark.slow
def test_run_twice_then_rerun_with_same_id_on_duckdb(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb", "main.h")))
    first = run_job(job, "first")
    second = run_job(job)
    # ranking "all": a, b, amount; ranking "positive": a, b, amount, label
    assert first.rows_written == second.rows_written == 7
    counts = history_count(job.destination)
    assert counts == {"first": 7, second.run_id: 7}
    with open_store(job.destination) as store:
        before = {r.run_id: r.run_at for r in store.runs("nightly")}
    again = run_job(job, "first")
    with open_store(job.destination) as store:
        runs = store.runs("nightly")
        rows = store.read("nightly", ["first"])
    assert {r.run_id: r.rows for r in runs} == counts  # replaced, not appended
    assert runs[0].run_id == "first" and runs[0].run_at > before["first"]
    assert again.run_at.replace(tzinfo=None) == runs[0].run_at
    all_rows = sorted((r["ranking"], r["position"], r["attribute"]) for r in rows)
    assert [r[1] for r in all_rows if r[0] == "all"] == [1, 2, 3]
    assert {r["job"] for r in rows} == {"nightly"} and {r["segment"] for r in rows} == {""}
    assert {r["source_table"] for r in rows} == {"t"}


@pytest.mark.slow
def test_a_failing_ranking_leaves_no_rows(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    good = load_job(write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb")))
    run_job(good, "good")
    # The cast passes every check (label is a column, CAST is allowed) and fails only when the
    # second ranking runs, after the first one succeeded.
    failing = load_job(write_job(
        tmp_path, two_rankings("src.duckdb", "hist.duckdb",
                               second_where="CAST(label AS INTEGER) > 0"), "failing.toml"))
    with pytest.raises(RunError, match=r"ranking 'positive' .* failed, so run bad wrote nothing"):
        run_job(failing, "bad")
    with pytest.raises(RunError):
        run_job(failing, "good")  # a failed re-run keeps the earlier rows of that run
    assert history_count(good.destination) == {"good": 7}
    fresh = load_job(write_job(
        tmp_path, two_rankings("src.duckdb", "fresh.duckdb",
                               second_where="CAST(label AS INTEGER) > 0"), "fresh.toml"))
    with pytest.raises(RunError):
        run_job(fresh, "bad")
    assert not (tmp_path / "fresh.duckdb").exists()


@pytest.mark.slow
def test_cli_run_and_dry_run(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    path = write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb"))
    runner = CliRunner()
    dry = runner.invoke(cli, ["run", str(path), "--dry-run"])
    assert dry.exit_code == 0, dry.output
    assert "2 ranking(s) checked" in dry.output and not (tmp_path / "hist.duckdb").exists()
    result = runner.invoke(cli, ["run", str(path), "--run-id", "2026-01-01"])
    assert result.exit_code == 0, result.output
    assert "job nightly, run 2026-01-01" in result.output
    assert "wrote 7 rows to history in" in result.output
    assert "  all: t, target y, 1,500 rows, 3 attributes; top IG: a " in result.output
    bad = runner.invoke(cli, ["run", str(path), "--run-id", ""])
    assert bad.exit_code == 1 and "run_id must be 1 to 100 printable" in str(bad.exception)


@pytest.mark.slow
def test_example_job_runs_on_the_demo_data(tmp_path: Path, demo_db: Path) -> None:
    (tmp_path / "data").mkdir()
    shutil.copy(demo_db, tmp_path / "data" / "greenhouse.duckdb")
    shutil.copy(ROOT / "examples" / "greenhouse_job.toml", tmp_path / "greenhouse_job.toml")
    job = load_job(tmp_path / "greenhouse_job.toml")
    result = run_job(job, "demo")
    ranked = dict((r.name, out) for r, out in result.rankings)
    assert set(ranked) == {"all-trays", "organic-trays"}
    assert ranked["all-trays"].attributes[0].attribute == "qa_grade"  # the planted leak
    assert "tray_id" not in {s.attribute for s in ranked["all-trays"].attributes}
    assert ranked["organic-trays"].rows < ranked["all-trays"].rows
    assert history_count(job.destination, "greenhouse-nightly") == {"demo": 28}


# --- runs on PostgreSQL -----------------------------------------------------------------------


def postgres_source(engine: sa.Engine, schema: str, rows: list[dict[str, object]]) -> None:
    table = sa.Table("t", sa.MetaData(), sa.Column("a", sa.Integer), sa.Column("b", sa.Text),
                     sa.Column("amount", sa.Double), sa.Column("label", sa.Text),
                     sa.Column("y", sa.Text), schema=schema)
    with engine.begin() as connection:
        table.create(connection)
        connection.execute(table.insert(), rows)


@pytest.mark.postgres
def test_postgres_runs_failure_and_rerun(tmp_path: Path, postgres_engine: sa.Engine,
                                         pg_schema: str) -> None:
    postgres_source(postgres_engine, pg_schema, random_rows())
    text = two_rankings(POSTGRES_URL, POSTGRES_URL, f"{pg_schema}.history",
                        source_table=f"{pg_schema}.t")
    job = load_job(write_job(tmp_path, text))
    first = run_job(job, "one")
    second = run_job(job, "two")
    assert first.rows_written == second.rows_written == 7
    failing = load_job(write_job(
        tmp_path, two_rankings(POSTGRES_URL, POSTGRES_URL, f"{pg_schema}.history",
                               second_where="CAST(label AS INTEGER) > 0",
                               source_table=f"{pg_schema}.t"), "failing.toml"))
    with pytest.raises(RunError, match="postgres error"):
        run_job(failing, "three")
    run_job(job, "two")
    assert history_count(job.destination) == {"one": 7, "two": 7}
    with postgres_engine.connect() as connection:
        total = connection.exec_driver_sql(
            f'SELECT COUNT(*), COUNT(DISTINCT run_id) FROM "{pg_schema}".history').one()
    assert tuple(total) == (14, 2)
    # The same numbers as the DuckDB engine computes on the same rows.
    duck = load_job(write_job(tmp_path, two_rankings(
        str(duckdb_source(tmp_path / "src.duckdb")), "hist.duckdb"), "duck.toml"))
    run_job(duck, "one")
    with open_store(duck.destination) as a, open_store(job.destination) as b:
        ig_duck = {(r["ranking"], r["attribute"]): r["information_gain"]
                   for r in a.read("nightly", ["one"])}
        ig_pg = {(r["ranking"], r["attribute"]): r["information_gain"]
                 for r in b.read("nightly", ["one"])}
    assert ig_duck.keys() == ig_pg.keys()
    assert all(abs(ig_duck[k] - ig_pg[k]) < 1e-9 for k in ig_duck)


@pytest.mark.postgres
def test_postgres_preflight_names_missing_schema_table(tmp_path: Path, postgres_engine: sa.Engine,
                                                       pg_schema: str) -> None:
    text = two_rankings(POSTGRES_URL, POSTGRES_URL, f"{pg_schema}.history",
                        source_table=f"{pg_schema}.missing_{uuid.uuid4().hex[:6]}")
    job = load_job(write_job(tmp_path, text))
    with pytest.raises(JobError) as caught:
        preflight(job)
    assert [p.line for p in caught.value.problems] == [10, 10]
    assert all("unknown table" in p.message for p in caught.value.problems)
