"""Model files: one plain SELECT per ranking whose rows, run on DuckDB or PostgreSQL, are the
history rows of ``bitsift rank``'s ranking (tests/test_models_history.py: as history)."""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest
import sqlalchemy as sa
import sqlglot
from click.testing import CliRunner
from sqlglot import exp
from test_jobs import POSTGRES_URL, duckdb_source, postgres_source, random_rows, write_job

import bitsift
from bitsift.cli import cli
from bitsift.errors import SpecError
from bitsift.jobs.jobfile import Job, load_job
from bitsift.jobs.models import write_models

METRICS = ("information_gain", "gain_ratio", "symmetric_uncertainty", "conditional_entropy",
           "attribute_entropy", "g_statistic")


def job_text(source: str, table: str) -> str:
    return f"""job = "Models Test"
source = "{source}"
[results]
destination = "unused.duckdb"
[defaults]
table = "{table}"
target = "y"
[[ranking]]
name = "all"
[[ranking]]
name = "binned / dropped"
numeric = ["a"]
bins = 3
missing = "drop"
where = "amount > 0.5"
limit = 2
"""


def check_models(job: Job, out: Path, dialect: str, run_sql: object) -> None:
    files = write_models(job, out, dialect)
    assert [f.path.name for f in files] == ["models_test__all.sql",
                                            "models_test__binned_dropped.sql"]
    for model, ranking in zip(files, job.rankings, strict=True):
        text = model.path.read_text(encoding="utf-8")
        assert text.startswith(f"-- bitsift {bitsift.__version__} model: job Models Test, "
                               f"ranking {ranking.name}\n")
        assert not text.rstrip().endswith(";")
        trees = [t for t in sqlglot.parse(text, read=dialect) if t is not None]
        assert len(trees) == 1 and isinstance(trees[0], exp.Select)
        assert not any(isinstance(n, exp.DDL | exp.DML) for n in trees[0].walk())
        rows = {r["attribute"]: r for r in run_sql(text)}  # type: ignore[operator]
        ranked = bitsift.rank(job.source, ranking.target, ranking.table, **ranking.options)
        # One row per attribute (no row for the target), limit applied as a run applies it.
        assert list(rows) and set(rows) == {s.attribute for s in ranked.attributes}
        for position, scored in enumerate(ranked.attributes, start=1):
            got = rows[scored.attribute]
            assert int(got["position"]) == position
            assert int(got["distinct_values"]) == scored.distinct
            assert int(got["dof"]) == scored.dof
            assert (got["job"], got["ranking"]) == ("Models Test", ranking.name)
            assert got["flags"] == ",".join(scored.flags)
            for metric in METRICS:
                assert float(got[metric]) == pytest.approx(getattr(scored, metric),
                                                           rel=1e-9, abs=1e-12), metric
    second = files[1].path.read_text(encoding="utf-8")
    assert "-- where: amount > 0.5" in second
    assert "-- limit: the top 2 attributes of each segment" in second
    assert "a (numeric)" in second


@pytest.mark.slow
def test_models_on_duckdb_equal_rank(tmp_path: Path) -> None:
    source = duckdb_source(tmp_path / "src.duckdb")
    job = load_job(write_job(tmp_path, job_text(str(source), "t")))

    def run_sql(text: str) -> list[dict[str, object]]:
        with duckdb.connect(str(source), read_only=True) as con:
            cursor = con.execute(text)
            names = [d[0] for d in cursor.description or []]
            return [dict(zip(names, r, strict=True)) for r in cursor.fetchall()]

    check_models(job, tmp_path / "models", "duckdb", run_sql)


@pytest.mark.postgres
def test_models_on_postgres_equal_rank(tmp_path: Path, postgres_engine: sa.Engine,
                                       pg_schema: str) -> None:
    postgres_source(postgres_engine, pg_schema, random_rows())
    job = load_job(write_job(tmp_path, job_text(POSTGRES_URL, f"{pg_schema}.t")))

    def run_sql(text: str) -> list[dict[str, object]]:
        with postgres_engine.connect() as connection:
            return [dict(r._mapping) for r in connection.exec_driver_sql(text)]

    check_models(job, tmp_path / "models", "postgres", run_sql)


@pytest.mark.slow
def test_models_cli_and_name_clashes(tmp_path: Path) -> None:
    source = duckdb_source(tmp_path / "src.duckdb")
    path = write_job(tmp_path, job_text(str(source), "t"))
    result = CliRunner().invoke(cli, ["models", str(path), "--dialect", "postgres",
                                      "--out", str(tmp_path / "out")])
    assert result.exit_code == 0, result.output
    assert "models_test__all.sql  (ranking all)" in result.output
    text = (tmp_path / "out" / "models_test__all.sql").read_text()
    assert "--dialect postgres --out DIR" in text and "postgres has no chi-square" in text
    clash = job_text(str(source), "t").replace('name = "all"', 'name = "Binned, dropped"')
    with pytest.raises(SpecError, match="models_test__binned_dropped"):
        write_models(load_job(write_job(tmp_path, clash, "clash.toml")), tmp_path / "x")
    assert not (tmp_path / "x").exists()
    bad = job_text(str(source), "t").replace('numeric = ["a"]', 'numeric = ["aa"]')
    failed = CliRunner().invoke(cli, ["models", str(write_job(tmp_path, bad, "bad.toml")),
                                      "--out", str(tmp_path / "y")])
    assert failed.exit_code == 1
    assert ("bad.toml:12: ranking 'binned / dropped': numeric: unknown column: 'aa' "
            "(did you mean 'a'?) in t") in str(failed.exception)
