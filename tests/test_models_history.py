"""Model files whose rows are history rows: a scheduler appends them, ``bitsift drift`` reads
them like rows of ``bitsift run``.

On DuckDB, SQLite, PostgreSQL and MariaDB: one run by ``bitsift run``, one appended by the
model's ``--insert`` script run unmodified in the engine's own client (psql, mariadb, sqlite3;
DuckDB's Python API) on the same data -> drift exit 0 and equal values; a planted leak and
another scheduled append -> drift exit 3 naming the attribute. The 7 emitted dialects without an
engine here are translated back to DuckDB by sqlglot and executed there.

Data: random, generated with a seeded numpy generator (tests/test_jobs.py).
"""

from __future__ import annotations

import datetime as _dt
import json
import os
import shutil
import sqlite3
import subprocess
import sys
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
import sqlglot
from click.testing import CliRunner
from conftest import MARIADB_URL
from sqlglot import exp
from test_jobs import POSTGRES_URL, duckdb_source, postgres_source, random_rows, write_job

import bitsift
from bitsift.cli import cli
from bitsift.engines.duckdb_engine import connect as safe_connect
from bitsift.jobs.drift import DRIFT_EXIT_CODE, compare
from bitsift.jobs.history import COLUMN_NAMES, COLUMNS, SCHEMA_VERSION
from bitsift.jobs.history_open import open_store
from bitsift.jobs.jobfile import Job, load_job
from bitsift.jobs.models import write_models
from bitsift.run.metrics import flags_for
from bitsift.spec.rankspec import Thresholds
from bitsift.sql.dialects import CAPABILITIES

FLOATS = [c.name for c in COLUMNS if c.family == "float" and c.name != "p_value"]
#: Fields computed from the square root of a variance snapped to 1e-12 (issue 18).
SE_FIELDS = ("information_gain_se", "information_gain_low", "information_gain_high")
EXACT = ["schema_version", "job", "ranking", "source_table", "target", "segment", "attribute",
         "position", "kind", "distinct_values", "rows_used", "rows_excluded", "classes", "dof",
         "flags", "options", "bitsift_version"]
#: Dialects emitted but not executed here (MySQL is executed as MariaDB, Spark and ClickHouse
#: have their own engine tests).
TRANSLATED = ("snowflake", "bigquery", "redshift", "trino", "tsql", "oracle", "databricks")


def job_text(source: str, destination: str, table: str, source_table: str) -> str:
    return f"""job = "nightly"
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
name = "binned / dropped"
numeric = ["a"]
bins = 3
where = "amount > 0.5"
missing = "drop"
sort = "gain_ratio"
limit = 2
[[ranking]]
name = "by label"
by = ["label"]
"""


@dataclass
class Place:
    """A database holding the source table ``t`` and the job's history."""

    job: Job
    #: Runs one ``--insert`` script in the engine's own client.
    run_script: Callable[[Path], None]
    #: Runs one statement (the planted change), ``{t}`` standing for the source table.
    execute: Callable[[str], None]


def _client(*argv: str, stdin: Path | None = None, env: Mapping[str, str] | None = None
            ) -> None:
    with (open(stdin, encoding="utf-8") if stdin else open(os.devnull)) as feed:
        done = subprocess.run(argv, stdin=feed, capture_output=True, text=True, timeout=120,
                              env={**os.environ, **(env or {})}, check=False)
    assert done.returncode == 0, done.stderr


def _need(*names: str) -> str:
    for name in names:
        if shutil.which(name):
            return name
    pytest.skip(f"no {' or '.join(names)} client installed")


def duckdb_place(tmp_path: Path) -> Place:
    path = duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, job_text(str(path), str(path), "bitsift_history", "t")))

    def run_script(script: Path) -> None:
        # DuckDB's Python API (no CLI here). Its build here has no ICU extension, so no
        # TimeZone setting: the zone is exercised on PostgreSQL (PGTZ).
        with safe_connect(str(path)) as con:
            con.execute(script.read_text(encoding="utf-8"))

    def execute(statement: str) -> None:
        with safe_connect(str(path)) as con:
            con.execute(statement.format(t="t"))

    return Place(job, run_script, execute)


def sqlite_place(tmp_path: Path) -> Place:
    path = tmp_path / "src.sqlite"
    with sqlite3.connect(path) as con:
        con.execute("CREATE TABLE t (a INTEGER, b TEXT, amount REAL, label TEXT, y TEXT)")
        con.executemany("INSERT INTO t VALUES (:a, :b, :amount, :label, :y)", random_rows())
    url = f"sqlite:///{path}"
    job = load_job(write_job(tmp_path, job_text(url, url, "bitsift_history", "t")))
    client = _need("sqlite3")

    def execute(statement: str) -> None:
        with sqlite3.connect(path) as con:
            con.execute(statement.format(t="t"))

    return Place(job, lambda script: _client(client, "-bail", str(path), stdin=script), execute)


def postgres_place(tmp_path: Path, engine: sa.Engine, schema: str) -> Place:
    postgres_source(engine, schema, random_rows())
    job = load_job(write_job(tmp_path, job_text(POSTGRES_URL, POSTGRES_URL,
                                                 f"{schema}.bitsift_history", f"{schema}.t")))
    client = _need("psql")
    url = sa.engine.make_url(POSTGRES_URL)

    def run_script(script: Path) -> None:
        _client(client, "-X", "-q", "-v", "ON_ERROR_STOP=1", "-h", str(url.host), "-p",
                str(url.port), "-U", str(url.username), "-d", str(url.database), "-f",
                str(script), env={"PGTZ": "Pacific/Auckland"})

    def execute(statement: str) -> None:
        with engine.begin() as connection:
            connection.exec_driver_sql(statement.format(t=f'"{schema}".t'))

    return Place(job, run_script, execute)


def mariadb_place(tmp_path: Path, engine: sa.Engine, database: str) -> Place:
    url = sa.engine.make_url(MARIADB_URL).set(database=database)
    table = sa.Table("t", sa.MetaData(), sa.Column("a", sa.Integer),
                     sa.Column("b", sa.String(20)), sa.Column("amount", sa.Double),
                     sa.Column("label", sa.String(20)), sa.Column("y", sa.String(20)),
                     schema=database)
    with engine.begin() as connection:
        table.create(connection)
        connection.execute(table.insert(), random_rows())
    text_url = url.render_as_string(hide_password=False)
    job = load_job(write_job(tmp_path, job_text(text_url, text_url, "bitsift_history", "t")))
    client = _need("mariadb", "mysql")

    def run_script(script: Path) -> None:
        _client(client, "-h", str(url.host), "-P", str(url.port or 3306), "-u",
                str(url.username), database, stdin=script)

    def execute(statement: str) -> None:
        with engine.begin() as connection:
            connection.exec_driver_sql(statement.format(t=f"`{database}`.t"))

    return Place(job, run_script, execute)


def _runs(job: Job) -> list[str]:
    with open_store(job.destination) as store:
        return [r.run_id for r in store.runs(job.name)]


def _rows(job: Job, run_id: str) -> dict[tuple[str, str, str], dict[str, Any]]:
    with open_store(job.destination) as store:
        rows = store.read(job.name, [run_id])
    return {(r["ranking"], r["segment"] or "", r["attribute"]): r for r in rows}


def _drift(job: Job) -> tuple[int, dict[str, Any]]:
    result = CliRunner().invoke(cli, ["drift", str(job.path), "--format", "json"])
    assert result.exit_code in (0, DRIFT_EXIT_CODE), result.output
    return result.exit_code, json.loads(result.stdout)


def check_history_flow(place: Place, tmp_path: Path) -> None:
    job = place.job
    ran = CliRunner().invoke(cli, ["run", str(job.path), "--run-id", "by-bitsift-run"])
    assert ran.exit_code == 0, ran.output
    files = write_models(job, tmp_path / "models", insert=True)
    script = files[0].script
    assert script is not None and script.name == "nightly.insert.sql"
    assert len(files) == 3 and {f.script for f in files} == {script}
    before = _dt.datetime.now(_dt.UTC).replace(tzinfo=None)
    place.run_script(script)
    runs = _runs(job)
    assert len(runs) == 2 and runs[1] == "by-bitsift-run", runs
    by_run, by_model = _rows(job, runs[1]), _rows(job, runs[0])
    # Every row of the run, no other: limit = 2 keeps the top 2 of "binned / dropped" too.
    assert set(by_run) == set(by_model)
    assert len([k for k in by_run if k[0] == "binned / dropped"]) == 2
    for key, expected in by_run.items():
        got = by_model[key]
        assert list(got) == list(COLUMN_NAMES)
        for name in EXACT:
            assert got[name] == expected[name], (key, name)
        for name in FLOATS:
            # G relative: a run keeps 13 significant digits of it.
            # The interval: from the square root of a variance snapped to 1e-12 (issue 18),
            # so ~1e-6 apart where the variance is near 0.
            tolerance = 1e-6 if name in SE_FIELDS else 1e-9
            assert float(got[name]) == pytest.approx(float(expected[name]), rel=1e-12,
                                                     abs=tolerance), (key, name)
        assert expected["p_value"] is not None and got["p_value"] is None
        # Quantile cut points are computed by the statement: unknown (NULL) in its rows.
        assert (expected["cut_points"] is None) == (expected["kind"] != "numeric")
        assert got["cut_points"] is None
        assert got["run_id"] == runs[0]
        # The statement's start time in UTC, whatever the client's time zone.
        assert abs((got["run_at"] - before).total_seconds()) < 120, (got["run_at"], before)
    assert {r["run_at"] for r in by_model.values()} == {by_model[key]["run_at"]}
    segments = {k[1] for k in by_model if k[0] == "by label"}
    assert segments == {json.dumps({"label": f"L{i}"}, separators=(",", ":"))
                        for i in range(7)}
    code, report = _drift(job)
    assert code == 0 and report["changes"] == [], report
    # A leak planted in the data: b now copies the target. The next scheduled append drifts.
    place.execute("UPDATE {t} SET b = y")
    place.run_script(script)
    assert len(_runs(job)) == 3
    code, report = _drift(job)
    assert code == DRIFT_EXIT_CODE
    changed = {(c["ranking"], c["attribute"], c["kind"]) for c in report["changes"]}
    assert ("all", "b", "information_gain") in changed
    assert ("all", "b", "flag_gained") in changed
    # Others only move aside for b (rank, or out of the top 2 of "binned / dropped").
    assert {c["kind"] for c in report["changes"] if c["attribute"] != "b"} <= {
        "rank", "disappeared"}
    text = CliRunner().invoke(cli, ["drift", str(job.path)])
    assert text.exit_code == DRIFT_EXIT_CODE and "near_perfect" in text.output


@pytest.mark.slow
def test_history_from_models_on_duckdb(tmp_path: Path) -> None:
    check_history_flow(duckdb_place(tmp_path), tmp_path)


@pytest.mark.slow
def test_history_from_models_on_sqlite(tmp_path: Path) -> None:
    check_history_flow(sqlite_place(tmp_path), tmp_path)


@pytest.mark.postgres
def test_history_from_models_on_postgres(tmp_path: Path, postgres_engine: sa.Engine,
                                         pg_schema: str) -> None:
    check_history_flow(postgres_place(tmp_path, postgres_engine, pg_schema), tmp_path)


@pytest.mark.mariadb
def test_history_from_models_on_mariadb(tmp_path: Path, mariadb_engine: sa.Engine,
                                        mariadb_database: str) -> None:
    check_history_flow(mariadb_place(tmp_path, mariadb_engine, mariadb_database), tmp_path)


# --- the 7 dialects without an engine here: translated back to DuckDB --------------------------

#: What sqlglot's translation back to DuckDB cannot carry, per dialect, and the fix applied
#: before executing there (docs/scheduled-runs.md, "Keeping the history from your scheduler"):
#: ``clock``: the dialect's UTC clock (CURRENT_DATETIME('UTC'), AT_TIMEZONE, SYS_EXTRACT_UTC,
#: CURRENT_TIMEZONE()) has no DuckDB function; DuckDB's own clock replaces it.
#: ``blob_length``: SQL Server's byte-exact key VARBINARY(8000) becomes BLOB(8000), which
#: DuckDB refuses; the length is dropped.
#: ``plus_concat``: SQL Server joins text with ``+``, which comes back as arithmetic; text
#: joined with ``+`` becomes ``||`` again. ``float_width``: SQL Server's FLOAT (53 bits) comes
#: back as DuckDB's REAL (24 bits); DOUBLE as bitsift writes it.
#: ``bignumeric_scale``: BigQuery's BIGNUMERIC (38 decimal places) comes back as DECIMAL(38, 5),
#: which rounds the exact sums' terms (IG off by ~1e-8); DECIMAL(38, 18) as bitsift writes it.
ARTEFACTS: dict[str, set[str]] = {
    "snowflake": set(),
    "redshift": set(),
    "bigquery": {"clock", "bignumeric_scale"},
    "trino": {"clock"},
    "oracle": {"clock"},
    "databricks": {"clock"},
    "tsql": {"clock", "blob_length", "plus_concat", "float_width"},
}


def _textual(node: exp.Expr) -> bool:
    """Whether ``node`` is text bitsift joins (a string, a CASE of strings, a REPLACE...)."""
    if isinstance(node, exp.Literal):
        return bool(node.is_string)
    if isinstance(node, exp.Case):
        return _textual(node.args["default"]) if node.args.get("default") else False
    if isinstance(node, exp.Paren | exp.Add | exp.DPipe):
        return _textual(node.this) or (not isinstance(node, exp.Paren)
                                       and _textual(node.expression))
    if isinstance(node, exp.Cast):
        return node.to.is_type(*exp.DataType.TEXT_TYPES)
    return isinstance(node, exp.Anonymous | exp.Func) and node.name.upper() == "REPLACE"


def back_to_duckdb(text: str, dialect: str, fixes: set[str]) -> str:
    """``text`` (one statement in ``dialect``) translated to DuckDB by sqlglot, with ``fixes``."""
    (tree,) = [t for t in sqlglot.parse(text, read=dialect) if t is not None]
    duckdb_clock = sqlglot.parse_one(CAPABILITIES["duckdb"].utc_now, read="duckdb")
    if "clock" in fixes:
        for cte in list(tree.find_all(exp.CTE)):
            if cte.alias == "history_clock":
                cte.this.expressions[0].set("this", duckdb_clock.copy())
    if "bignumeric_scale" in fixes:
        for node in tree.find_all(exp.DataType):
            if node.this == exp.DataType.Type.BIGDECIMAL and not node.expressions:
                node.replace(exp.DataType.build("DECIMAL(38, 18)"))
    if "float_width" in fixes:
        for node in list(tree.find_all(exp.DataType)):
            if node.this == exp.DataType.Type.FLOAT:
                node.replace(exp.DataType.build("DOUBLE"))
    if "plus_concat" in fixes:
        joins = [n for n in tree.find_all(exp.Add) if _textual(n)]
        for join in reversed(joins):  # innermost first: replacing leaves the others in place
            join.replace(exp.DPipe(this=join.this.copy(), expression=join.expression.copy()))
    if "blob_length" in fixes:
        for node in tree.find_all(exp.DataType):
            if node.this == exp.DataType.Type.VARBINARY:
                node.set("expressions", [])
    return tree.sql("duckdb")


def _fetch(path: Path, sql: str) -> list[dict[str, Any]]:
    with safe_connect(str(path), read_only=True) as con:
        cursor = con.execute(sql)
        names = [d[0] for d in cursor.description or []]
        return [dict(zip(names, r, strict=True)) for r in cursor.fetchall()]


@pytest.mark.slow
@pytest.mark.parametrize("dialect", TRANSLATED)
def test_translated_dialects_give_the_runs_rows(tmp_path: Path, dialect: str) -> None:
    assert set(ARTEFACTS) == set(TRANSLATED)
    path = duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, job_text(str(path), str(path), "bitsift_history", "t")))
    files = write_models(job, tmp_path / "models", dialect, insert=True)
    expected_rows = 0
    for model, ranking in zip(files, job.rankings, strict=True):
        text = model.path.read_text(encoding="utf-8")
        fixes = ARTEFACTS[dialect]
        if fixes:  # the artefacts are real: without the fixes DuckDB refuses the statement
            with pytest.raises(duckdb.Error):
                _fetch(path, back_to_duckdb(text, dialect, set()))
        rows = _fetch(path, back_to_duckdb(text, dialect, fixes))
        assert rows and all(list(r) == list(COLUMN_NAMES) for r in rows)
        ranked = bitsift.rank(str(path), ranking.target, ranking.table, **ranking.options)
        parts = getattr(ranked, "segments", [ranked])
        expected_rows += sum(len(p.attributes) for p in parts)
        assert len(rows) == sum(len(p.attributes) for p in parts)
        if parts == [ranked]:
            by_name = {r["attribute"]: r for r in rows}
            for position, scored in enumerate(ranked.attributes, start=1):
                got = by_name[scored.attribute]
                assert got["position"] == position and got["flags"] == ",".join(scored.flags)
                assert got["information_gain"] == pytest.approx(scored.information_gain,
                                                                abs=1e-9)
    script = files[0].script
    assert script is not None
    # (sqlglot reads T-SQL's IF ... CREATE TABLE as a block holding what follows.)
    inserts = [n for t in sqlglot.parse(script.read_text(encoding="utf-8"), read=dialect)
               if t is not None for n in t.find_all(exp.Insert)]
    assert len(inserts) == 1
    select = inserts[0].expression
    if inserts[0].args.get("with_") is not None:  # T-SQL writes the WITH before INSERT
        select.set("with_", inserts[0].args["with_"])
    rows = _fetch(path, back_to_duckdb(select.sql(dialect), dialect, ARTEFACTS[dialect]))
    assert len(rows) == expected_rows and len({r["run_id"] for r in rows}) == 1


# --- determinism, flags, generic columns, drift ------------------------------------------------


@pytest.mark.slow
def test_regenerated_model_files_are_byte_identical(tmp_path: Path) -> None:
    path = duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, job_text(str(path), str(path), "bitsift_history", "t")))
    for dialect in ("duckdb", "postgres", "tsql"):
        first = write_models(job, tmp_path / "one", dialect, insert=True)
        second = write_models(job, tmp_path / "two", dialect, insert=True)
        paths = [f.path for f in first] + [first[0].script]
        others = [f.path for f in second] + [second[0].script]
        for one, two in zip(paths, others, strict=True):
            assert one is not None and two is not None
            assert one.read_bytes() == two.read_bytes(), one.name
            text = one.read_text(encoding="utf-8")
            # No generation time: neither today's date nor a clock reading in the file.
            assert _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d") not in text
            assert "UTC," not in text.splitlines()[0]


def test_flags_in_sql_follow_the_python_rules() -> None:
    """The SQL flags against :func:`bitsift.run.metrics.flags_for` on every threshold's edge."""
    from bitsift.sql.history_select import flags_expression

    con = duckdb.connect()
    for thresholds in (Thresholds(), Thresholds(id_like_ratio=0.5, id_min_values=3,
                                                near_perfect_ratio=0.8, high_cardinality=5)):
        cases = []
        for distinct in (0, 1, 2, 3, 4, 5, 6, 9, 10, 11, 50, 900, 999, 1000, 1001):
            for rows in (1, 10, 11, 100, 1000, 1110):
                for gain, entropy in ((0.0, 0.0), (0.5, 1.0), (0.8, 1.0), (0.95, 1.0),
                                      (0.9499999, 1.0), (1.0, 1.0), (0.0, 1.58)):
                    cases.append((distinct, rows, gain, entropy))
        values = ", ".join(f"({d}, {r}, {g!r}, {e!r})" for d, r, g, e in cases)
        sql = (f"SELECT {flags_expression(thresholds).sql('duckdb')} FROM (VALUES {values}) "
               "AS h(distinct_values, rows_used, information_gain, target_entropy)")
        got = [row[0] for row in con.execute(sql).fetchall()]
        expected = [",".join(flags_for(d, r, g, e, thresholds)) for d, r, g, e in cases]
        assert got == expected


@dataclass(frozen=True)
class _Column:
    name: str
    family: str
    nullable: bool = False


@pytest.mark.slow
def test_ranking_columns_flow_through_by_name(tmp_path: Path) -> None:
    """A history column the ranking statement produces needs no edit here (issue 18's
    uncertainty columns): mapped by name; an unknown one is NULL, or refused when required."""
    from bitsift.run.session import Session
    from bitsift.sql.history_select import history_select
    from bitsift.sql.sqlbuild import BuildError

    path = duckdb_source(tmp_path / "src.duckdb")
    constants = {"job": "j"}
    with Session.open(str(path), "t") as session:
        spec = session.resolve(bitsift.run.api.make_options("y", exclude="label"))
        caps = CAPABILITIES["duckdb"]
        extra = [_Column("job", "text"), _Column("attribute", "text"),
                 _Column("attribute_index", "integer"), _Column("information_gain", "float"),
                 _Column("later_metric", "float", nullable=True)]
        rows = _fetch(path, history_select(spec, caps, extra, constants).sql)
        assert sorted(r["attribute_index"] for r in rows) == [1, 2, 3]
        assert {r["later_metric"] for r in rows} == {None}
        with pytest.raises(BuildError, match="later_metric"):
            history_select(spec, caps, [_Column("later_metric", "float")], constants)


def test_positions_round_as_a_run_rounds() -> None:
    from bitsift.run.metrics import RESOLUTION_DIGITS
    from bitsift.sql.history_select import SNAP_PLACES

    assert SNAP_PLACES == RESOLUTION_DIGITS


def test_drift_reads_a_null_p_value_as_unknown() -> None:
    row = {"ranking": "all", "segment": "", "attribute": "a", "position": 1,
           "information_gain": 0.3, "flags": "", "options": "{}", "p_value": 0.01}
    changes, notes = compare([row], [{**row, "p_value": None}])
    # Neither row has an interval (a hand-made row): the gains are compared with --ig-change,
    # and a note says so; the NULL p-value itself changes nothing.
    assert changes == [] and all("interval" in n for n in notes)
    changes, _ = compare([{**row, "p_value": None}], [{**row, "information_gain": 0.5,
                                                        "p_value": None}])
    assert [c.kind for c in changes] == ["information_gain"]


@pytest.mark.slow
def test_segment_values_are_written_as_a_run_writes_them(tmp_path: Path) -> None:
    """Quotes, backslashes, non-ASCII text, NULL and integers in segment columns."""
    rows = random_rows(600)
    labels = ['say "hi"', "back\\slash", "grün ✓", None, "plain"]
    for i, row in enumerate(rows):
        row["label"] = labels[i % len(labels)]
    path = duckdb_source(tmp_path / "src.duckdb", rows)
    text = job_text(str(path), str(path), "bitsift_history", "t").replace(
        'by = ["label"]', 'by = ["label", "a"]')
    job = load_job(write_job(tmp_path, text))
    assert CliRunner().invoke(cli, ["run", str(job.path), "--run-id", "r1"]).exit_code == 0
    files = write_models(job, tmp_path / "models", insert=True)
    assert files[0].script is not None
    with safe_connect(str(path)) as con:
        con.execute(files[0].script.read_text(encoding="utf-8"))
    runs = _runs(job)
    by_run, by_model = _rows(job, "r1"), _rows(job, runs[0])
    assert set(by_model) == set(by_run)
    assert any('\\"hi\\"' in k[1] for k in by_model) and any("grün ✓" in k[1] for k in by_model)
    assert CliRunner().invoke(cli, ["drift", str(job.path)]).exit_code == 0
    assert {r["schema_version"] for r in by_model.values()} == {SCHEMA_VERSION}


@pytest.mark.slow
def test_weights_binnings_and_typed_segments_match_a_run(tmp_path: Path) -> None:
    """The demo's trays (invented data): a weighted ranking with mdl cut points (computed by
    bitsift, inlined), best-split bins and a date part, boolean and date segments."""
    root = Path(__file__).resolve().parents[1]
    subprocess.run([sys.executable, str(root / "examples" / "make_demo.py"), "--rows", "3000",
                    "--out", str(tmp_path)], check=True, capture_output=True, timeout=300)
    source = tmp_path / "greenhouse.duckdb"
    job = load_job(write_job(tmp_path, f"""job = "variants"
source = "{source}"
[results]
destination = "{source}"
table = "history"
[defaults]
table = "trays"
target = "outcome"
exclude = ["tray_id"]
[[ranking]]
name = "weighted"
weight = "germination_days"
binning = "mdl"
[[ranking]]
name = "dated"
by = ["is_organic", "sown_on"]
date_part = "sown_on=month"
attributes = ["moisture_pct", "substrate", "light_hours"]
binning = "best-split"
"""))
    assert CliRunner().invoke(cli, ["run", str(job.path), "--run-id", "r1"]).exit_code == 0
    files = write_models(job, tmp_path / "models", insert=True)
    assert files[0].script is not None
    with safe_connect(str(source)) as con:
        con.execute(files[0].script.read_text(encoding="utf-8"))
    by_run, by_model = _rows(job, "r1"), _rows(job, _runs(job)[0])
    assert set(by_model) == set(by_run) and len({k[1] for k in by_run}) > 100
    for key, expected in by_run.items():
        for name in EXACT:
            assert by_model[key][name] == expected[name], (key, name)
        for name in FLOATS:
            # se: the square root of a variance snapped to 1e-12 (issue 18), so ~1e-6 apart
            # where the variance is near 0.
            assert by_model[key][name] == pytest.approx(
                expected[name], rel=1e-12,
                abs=1e-6 if name in SE_FIELDS else 1e-9), (key, name)
        # mdl's cut points are inlined, so the model stores the run's JSON; best-split's are
        # computed by the statement (NULL).
        computed = key[0] == "dated" and expected["kind"] == "numeric"
        assert by_model[key]["cut_points"] == (None if computed else expected["cut_points"])
    weighted = {k[2]: r["cut_points"] for k, r in by_run.items() if k[0] == "weighted"}
    assert json.loads(weighted["sown_on"]) == []  # binned as time; mdl finds no cut there
    moisture = json.loads(weighted["moisture_pct"])
    assert moisture and all(isinstance(c, float) for c in moisture)
    assert CliRunner().invoke(cli, ["drift", str(job.path)]).exit_code == 0


@pytest.mark.slow
@pytest.mark.clickhouse
def test_clickhouse_script_runs_in_embedded_clickhouse(tmp_path: Path) -> None:
    """ClickHouse has an engine here (chdb): its script, split at its statements, runs there
    twice (two runs), its table created with MergeTree, its values those of `bitsift rank`."""
    chdb_session = pytest.importorskip("chdb.session")
    path = duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, job_text(str(path), str(path), "bitsift_history", "t")))
    files = write_models(job, tmp_path / "models", "clickhouse", insert=True)
    assert files[0].script is not None
    parquet = tmp_path / "t.parquet"
    with safe_connect(str(path), read_only=True) as con:
        con.execute(f"COPY t TO '{parquet}' (FORMAT parquet)")
    session = chdb_session.Session()
    try:
        session.query("CREATE DATABASE IF NOT EXISTS main")
        session.query(f"CREATE TABLE main.t ENGINE = Memory AS SELECT * FROM "
                      f"file('{parquet}', 'Parquet')")
        text = files[0].script.read_text(encoding="utf-8")
        body = "\n".join(line for line in text.splitlines() if not line.startswith("--"))
        statements = [s for s in body.split(";\n") if s.strip()]
        assert [s.split()[0] for s in statements] == ["CREATE", "INSERT"]  # no transactions
        for statement in [*statements, statements[1]]:
            session.query(statement)
        runs = str(session.query("SELECT count(DISTINCT run_id) FROM bitsift_history", "CSV"))
        assert runs.strip() == "2"
        got = str(session.query(
            "SELECT attribute, position, information_gain, flags FROM bitsift_history "
            "WHERE ranking = 'all' ORDER BY run_id, position", "CSV")).split()
    finally:
        session.close()
    ranked = bitsift.rank(str(path), "y", "t", exclude="label")
    expected = [(s.attribute, position, s.information_gain, ",".join(s.flags))
                for position, s in enumerate(ranked.attributes, start=1)]
    rows = [line.split(",") for line in got]
    assert len(rows) == 2 * len(expected)
    for row, (attribute, position, gain, flags) in zip(rows, expected * 2, strict=True):
        assert row[0].strip('"') == attribute and int(row[1]) == position
        assert float(row[2]) == pytest.approx(gain, abs=1e-9) and row[3].strip('"') == flags


QUOTED_COLUMN = "it's \"x\""


@pytest.mark.slow
def test_quotes_and_unicode_in_names_and_values(tmp_path: Path) -> None:
    """Job, ranking, column and table names with quotes, spaces and non-ASCII characters, a
    --where with a quoted literal: literals and identifiers survive into the history."""
    path = tmp_path / "src.duckdb"
    with safe_connect(str(path)) as con:
        con.execute('CREATE SCHEMA "ops ✓"')
        quoted = exp.to_identifier(QUOTED_COLUMN, quoted=True).sql("duckdb")
        con.execute(f'CREATE TABLE "Tray\'s data" ("größe" INTEGER, {quoted} VARCHAR, '
                    '"select" DOUBLE, "ÿ" VARCHAR)')
        con.execute("""INSERT INTO "Tray's data" SELECT i % 5, CASE WHEN i % 3 = 0 THEN 'O''Brien'
                       ELSE 'back\\slash' END, i / 7.0, CASE WHEN i % 5 < 2 THEN 'ja' ELSE 'nein'
                       END FROM range(400) r(i)""")
    # TOML basic strings are JSON strings for these characters.
    settings = {
        "job": "O'Brien's trays ✓", "source": str(path), "destination": str(path),
        "table": '"ops ✓"."hist\'s"', "name": 'it\'s "all"',
        "where": f"{quoted} <> 'O''Brien'", "by": QUOTED_COLUMN, "source_table": '"Tray\'s data"',
    }
    toml = {k: json.dumps(v, ensure_ascii=False) for k, v in settings.items()}
    job = load_job(write_job(tmp_path, f"""job = {toml["job"]}
source = {toml["source"]}
[results]
destination = {toml["destination"]}
table = {toml["table"]}
[defaults]
table = {toml["source_table"]}
target = "ÿ"
[[ranking]]
name = {toml["name"]}
where = {toml["where"]}
[[ranking]]
name = "by quote"
by = [{toml["by"]}]
"""))
    ran = CliRunner().invoke(cli, ["run", str(job.path), "--run-id", "r1"])
    assert ran.exit_code == 0, ran.output
    files = write_models(job, tmp_path / "models", insert=True)
    assert files[0].script is not None
    with safe_connect(str(path)) as con:
        con.execute(files[0].script.read_text(encoding="utf-8"))
    by_run, by_model = _rows(job, "r1"), _rows(job, _runs(job)[0])
    assert set(by_model) == set(by_run) and len(by_run) >= 4
    assert {k[2] for k in by_run} >= {"größe", "select"}
    for key, expected in by_run.items():
        for name in EXACT:
            assert by_model[key][name] == expected[name], (key, name)
    assert CliRunner().invoke(cli, ["drift", str(job.path)]).exit_code == 0


@pytest.mark.slow
def test_empty_and_one_row_tables_append_what_they_have(tmp_path: Path) -> None:
    """An empty table gives no history rows (a run refuses it); one row gives its attributes
    with gain 0 in a segmented ranking, as a run writes a single-class segment."""
    path = duckdb_source(tmp_path / "src.duckdb", [])
    with safe_connect(str(path)) as con:
        con.execute("CREATE TABLE one AS SELECT 1 AS a, 'x' AS b, 0.5 AS amount, 'L0' AS label, "
                    "'yes' AS y")
    text = job_text(str(path), str(path), "bitsift_history", "t")
    job = load_job(write_job(tmp_path, text))
    files = write_models(job, tmp_path / "models", insert=True)
    assert files[0].script is not None
    with safe_connect(str(path)) as con:
        con.execute(files[0].script.read_text(encoding="utf-8"))
        assert con.execute("SELECT count(*) FROM bitsift_history").fetchone() == (0,)
    one = load_job(write_job(tmp_path, text.replace('table = "t"', 'table = "one"')
                             .replace('job = "nightly"', 'job = "one"'), "one.toml"))
    files = write_models(one, tmp_path / "one", insert=True)
    assert files[0].script is not None
    with safe_connect(str(path)) as con:
        con.execute(files[0].script.read_text(encoding="utf-8"))
        rows = con.execute("SELECT ranking, segment, attribute, information_gain, flags "
                           "FROM bitsift_history ORDER BY ranking, position").fetchall()
    assert ("by label", '{"label":"L0"}', "a", 0.0, "constant") in rows
    assert {r[3] for r in rows} == {0.0}


@pytest.mark.parametrize("dialect", sorted(CAPABILITIES))
def test_every_scripts_create_table_may_run_every_night(dialect: str) -> None:
    """The script's CREATE TABLE never fails on an existing table, and lists every column."""
    from bitsift.jobs.history_script import create_sql

    caps = CAPABILITIES[dialect]
    text = create_sql("ops.bitsift_history", caps)
    guarded = caps.create_guard is not None and text.startswith(caps.create_guard.split()[0])
    assert guarded or "CREATE TABLE IF NOT EXISTS" in text
    assert all(name in text for name in COLUMN_NAMES)
