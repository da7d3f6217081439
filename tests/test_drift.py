"""Drift between runs: the comparison rules, and a planted change found end to end (exit 3)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
from click.testing import CliRunner
from helpers import run_main
from test_jobs import (
    POSTGRES_URL,
    duckdb_source,
    postgres_source,
    random_rows,
    two_rankings,
    write_job,
)

from bitsift.cli import cli
from bitsift.errors import BitsiftError, SpecError
from bitsift.jobs.drift import DriftThresholds, compare, drift
from bitsift.jobs.job_run import run_job
from bitsift.jobs.jobfile import load_job


def row(attribute: str, position: int, ig: float, flags: str = "", ranking: str = "r",
        options: str = "{}") -> dict[str, Any]:
    return {"ranking": ranking, "segment": "", "attribute": attribute, "position": position,
            "information_gain": ig, "flags": flags, "options": options}


def test_compare_finds_every_kind_of_change() -> None:
    old = [row("a", 1, 0.50), row("b", 2, 0.30), row("c", 3, 0.20, "near_perfect"),
           row("d", 4, 0.10), row("e", 5, 0.05), row("gone", 6, 0.01),
           row("x", 1, 0.1, ranking="dropped")]
    new = [row("a", 1, 0.505), row("b", 2, 0.10), row("c", 3, 0.20, "id_like"),
           row("e", 4, 0.05), row("new", 5, 0.04), row("d", 8, 0.09),
           row("x", 1, 0.1, ranking="added")]
    changes, notes = compare(old, new, DriftThresholds(ig_change=0.01, rank_change=3,
                                                       ig_rule="change"))
    found = {(c.kind, c.ranking, c.attribute) for c in changes}
    assert found == {
        ("information_gain", "r", "b"),   # 0.30 -> 0.10; a moved 0.005 only
        ("flag_gained", "r", "c"),
        ("flag_lost", "r", "c"),
        ("rank", "r", "d"),               # 4 -> 8; e moved one place only
        ("disappeared", "r", "gone"),
        ("appeared", "r", "new"),
        ("ranking_disappeared", "dropped", None),
        ("ranking_appeared", "added", None),
    }
    b = next(c for c in changes if c.attribute == "b")
    assert (b.before, b.after) == (0.30, 0.10)
    assert notes == []


def spread(attribute: str, position: int, ig: float, low: float | None,
           high: float | None) -> dict[str, Any]:
    """A history row with the gain's interval (schema version 2)."""
    return {**row(attribute, position, ig), "information_gain_low": low,
            "information_gain_high": high}


def test_by_default_a_gain_moved_when_its_intervals_are_apart() -> None:
    # Issue 18: "a" moves 0.05 bits (over --ig-change) inside overlapping intervals: noise.
    # "b" moves 0.005 bits (under it), but its intervals do not touch: a real move.
    old = [spread("a", 1, 0.40, 0.30, 0.50), spread("b", 2, 0.100, 0.099, 0.101)]
    new = [spread("a", 1, 0.45, 0.35, 0.55), spread("b", 2, 0.105, 0.104, 0.106)]
    changes, notes = compare(old, new)
    assert [(c.kind, c.attribute) for c in changes] == [("information_gain", "b")]
    assert notes == []
    by_change, _ = compare(old, new, DriftThresholds(ig_rule="change"))
    assert [(c.kind, c.attribute) for c in by_change] == [("information_gain", "a")]
    # Touching ends overlap; equal gains never move, whatever their intervals.
    touching = [spread("a", 1, 0.45, 0.50, 0.60), spread("b", 2, 0.100, 0.0, 0.0)]
    assert compare(old, touching)[0] == []


def test_rows_without_an_interval_fall_back_to_the_change_and_say_so() -> None:
    # An old history row (schema version 1: no interval) against a new one, and a row of a
    # ranking with fractional weights (NULL interval): compared by --ig-change, with a note.
    old = [row("a", 1, 0.40), spread("b", 2, 0.10, None, None)]
    new = [spread("a", 1, 0.45, 0.35, 0.55), spread("b", 2, 0.30, None, None)]
    changes, notes = compare(old, new)
    assert [(c.kind, c.attribute) for c in changes] == [("information_gain", "a"),
                                                        ("information_gain", "b")]
    assert len(notes) == 1 and "--ig-change (0.01 bits)" in notes[0]


def test_an_unknown_ig_rule_is_one_problem() -> None:
    with pytest.raises(SpecError, match="ig_rule must be one of interval, change, not 'x'"):
        DriftThresholds(ig_rule="x")


def test_compare_thresholds_are_strict_and_ignore_rounding() -> None:
    old = [row("a", 1, 0.5), row("b", 2, 0.25)]
    same = [row("a", 1, 0.5 + 1e-15), row("b", 2, 0.25)]
    exact = DriftThresholds(ig_change=0, rank_change=0, ig_rule="change")
    assert compare(old, same, exact) == ([], [])
    moved = [row("b", 1, 0.26), row("a", 2, 0.5)]
    changes, _ = compare(old, moved, DriftThresholds(ig_change=0.01, rank_change=1,
                                                     ig_rule="change"))
    assert changes == []  # exactly at the thresholds is not beyond them
    changes, _ = compare(old, moved, DriftThresholds(ig_change=0.009, rank_change=0,
                                                     ig_rule="change"))
    assert [(c.kind, c.attribute) for c in changes] == [
        ("rank", "a"), ("information_gain", "b"), ("rank", "b")]
    _, notes = compare(old, [row("a", 1, 0.5, options='{"bins":4}'), row("b", 2, 0.25)])
    assert notes and "settings of ranking 'r' changed" in notes[0]
    with pytest.raises(SpecError, match="^ig_change must be at least 0"):
        DriftThresholds(ig_change=-1)


def test_moved_cut_points_are_a_note_not_drift() -> None:
    # Issue 21: history of schema version 3 keeps the cut points; NULL (older rows, models
    # whose statement computes them, categorical attributes) is unknown, never a move.
    def cut(attribute: str, position: int, cuts: str | None, ranking: str = "r",
            segment: str = "") -> dict[str, Any]:
        return {**row(attribute, position, 0.5 / position, ranking=ranking),
                "segment": segment, "cut_points": cuts}

    old = [cut("a", 1, "[1.000001,2.5]"), cut("b", 2, '["2026-03-05"]'), cut("c", 3, None),
           cut("d", 4, "[3.5]"), cut("a", 1, "[1.000001,2.5]", "s", '{"bench":"north"}'),
           cut("a", 1, "[1.000001,2.5]", "s", '{"bench":"south"}')]
    new = [cut("a", 1, "[1.000002,2.5]"), cut("b", 2, '["2026-03-06"]'), cut("c", 3, None),
           cut("d", 4, None), cut("a", 1, "[1.5]", "s", '{"bench":"north"}'),
           cut("a", 1, "[1.5]", "s", '{"bench":"south"}')]
    by_change = DriftThresholds(ig_rule="change")  # no interval in these rows: no note of it
    changes, notes = compare(old, new, by_change)
    assert changes == []
    assert notes == ["ranking 'r': the cut points of a, b moved between the runs; their gains "
                     "compare different bins",
                     "ranking 's': the cut points of a moved between the runs; their gains "
                     "compare different bins"]
    assert compare(old, old, by_change) == ([], [])
    assert compare([row("a", 1, 0.5)], [cut("a", 1, "[1.5]")], by_change) == ([], [])


PLANTED = "UPDATE {table} SET b = 'x' WHERE y = 'yes' AND b = 'y'"


def plant_change(path: Path) -> None:
    """Recode b so that b = 'y' means y = 'no': b's information gain jumps, y and the other
    attributes stay as they were."""
    with duckdb.connect(str(path)) as con:
        con.execute(PLANTED.format(table="t"))


@pytest.mark.slow
def test_planted_change_is_drift_and_exits_3(tmp_path: Path) -> None:
    source = duckdb_source(tmp_path / "src.duckdb")
    job_file = write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb"))
    job = load_job(job_file)
    runner = CliRunner()
    # No run yet: the table does not exist, which is no "no drift" (issue 21 item 5).
    none = runner.invoke(cli, ["drift", str(job_file)])
    assert none.exit_code == 1 and "does not exist" in str(none.exception)
    run_job(job, "day1")
    run_job(job, "day2")
    quiet = runner.invoke(cli, ["drift", str(job_file)])
    assert quiet.exit_code == 0, quiet.output
    assert "run day2" in quiet.output and "against run day1" in quiet.output
    assert "no drift beyond the thresholds" in quiet.output
    plant_change(source)
    run_job(job, "day3")
    alert = runner.invoke(cli, ["drift", str(job_file)])
    assert alert.exit_code == 3, alert.output
    lines = [line.split() for line in alert.output.splitlines()]
    assert ["all", "b", "information", "gain"] in [line[:4] for line in lines]
    assert "DRIFT:" in alert.output and "(exit code 3)" in alert.output
    as_json = runner.invoke(cli, ["drift", str(job_file), "--format", "json"])
    assert as_json.exit_code == 3
    report = json.loads(as_json.output)
    assert (report["old_run"]["run_id"], report["new_run"]["run_id"]) == ("day2", "day3")
    moved = {(c["ranking"], c["attribute"]) for c in report["changes"]
             if c["kind"] == "information_gain"}
    assert moved == {("all", "b"), ("positive", "b")}
    # Explicit runs; --new alone compares with the run before it.
    assert runner.invoke(cli, ["drift", str(job_file), "--old", "day1", "--new", "day2"]
                         ).exit_code == 0
    assert runner.invoke(cli, ["drift", str(job_file), "--new", "day2"]).exit_code == 0
    assert runner.invoke(cli, ["drift", str(job_file), "--new", "day3"]).exit_code == 3
    # Without the job file: destination, table and job name.
    direct = runner.invoke(cli, ["drift", "--results", str(tmp_path / "hist.duckdb"),
                                 "--results-table", "history", "--job", "nightly"])
    assert direct.exit_code == 3
    # A loose threshold hides the move; by default (intervals apart) it shows.
    loose = drift(job.destination, "nightly", thresholds=DriftThresholds(
        ig_change=1.0, rank_change=10, ig_rule="change"))
    assert not loose.drifted
    assert drift(job.destination, "nightly", thresholds=DriftThresholds(
        ig_change=1.0, rank_change=10)).drifted
    by_change = runner.invoke(cli, ["drift", str(job_file), "--ig-rule", "change",
                                    "--ig-change", "1", "--rank-change", "10"])
    assert by_change.exit_code == 0, by_change.output
    assert "moves > 1 bits" in by_change.output


@pytest.mark.slow
def test_drift_errors(tmp_path: Path) -> None:
    duckdb_source(tmp_path / "src.duckdb")
    job_file = write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb"))
    run_job(load_job(job_file), "only")
    runner = CliRunner()
    unknown = runner.invoke(cli, ["drift", str(job_file), "--new", "nope"])
    assert unknown.exit_code == 1
    assert "job 'nightly' has no run 'nope' (newest runs: only)" in str(unknown.exception)
    usage = runner.invoke(cli, ["drift"])
    assert usage.exit_code == 2 and "give a JOB_FILE, or --results and --job" in usage.output
    single = runner.invoke(cli, ["drift", str(job_file)])
    assert single.exit_code == 0 and "has 1 run in history: nothing to compare" in single.output


def test_nothing_to_compare_is_an_error_naming_what_exists(
        tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Issue 21 item 5: a misspelled --job or a missing history table printed "0 runs ... no
    # drift" and exited 0, so a cron line watching for exit 3 stayed silent forever.
    duckdb_source(tmp_path / "src.duckdb")
    job_file = write_job(tmp_path, two_rankings("src.duckdb", "hist.duckdb"))
    job = load_job(job_file)
    history = tmp_path / "hist.duckdb"
    missing_file = run_main(capsys, "drift", str(job_file))
    assert (missing_file.code, missing_file.out) == (1, "")
    assert missing_file.err == (
        f"Error: results table history in {history} does not exist: no run has written to it; "
        "it has no tables\n")
    run_job(job, "day1")
    run_job(job, "day2")
    results = ("drift", "--results", str(history), "--results-table", "history")
    misspelled = run_main(capsys, *results, "--job", "nightlly")
    assert (misspelled.code, misspelled.out) == (1, "")
    assert misspelled.err == (
        f"Error: job 'nightlly' has no runs in results table history in {history} "
        "(did you mean 'nightly'?); jobs there: 'nightly'\n")
    other_table = run_main(capsys, *results, "--results-table", "histroy", "--job", "nightly")
    assert other_table.code == 1
    assert other_table.err == (
        f"Error: results table histroy in {history} does not exist: no run has written to it; "
        "tables there: 'history'\n")
    with pytest.raises(BitsiftError, match="job 'x' has no runs in results table"):
        drift(job.destination, "x")
    # Found by hand: --results-table next to a JOB_FILE (or without --results) was ignored,
    # and drift compared the job file's history: "no drift", exit 0, on a table never read.
    beside = run_main(capsys, "drift", str(job_file), "--results-table", "histroy")
    assert (beside.code, beside.out) == (2, "")
    assert ("Error: --results-table names a history instead of JOB_FILE; "
            f"{job_file} names its own in [results]") in beside.err
    alone = run_main(capsys, "drift", "--results-table", "history", "--job", "nightly")
    assert alone.code == 2 and "Error: --results-table needs --results" in alone.err
    # --new naming the oldest run: nothing before it, said so (not "nothing to compare yet").
    oldest = run_main(capsys, "drift", str(job_file), "--new", "day1")
    assert (oldest.code, oldest.out) == (1, "")
    assert oldest.err == ("Error: run 'day1' is the oldest run of job 'nightly' in history: "
                          "there is no earlier run to compare it with\n")
    assert run_main(capsys, "drift", str(job_file), "--new", "day2").code == 0


@pytest.mark.postgres
def test_missing_table_and_job_on_postgres(tmp_path: Path, postgres_engine: sa.Engine,
                                           pg_schema: str) -> None:
    postgres_source(postgres_engine, pg_schema, random_rows())
    job = load_job(write_job(tmp_path, two_rankings(
        POSTGRES_URL, POSTGRES_URL, f"{pg_schema}.history", source_table=f"{pg_schema}.t")))
    with pytest.raises(BitsiftError, match=r"does not exist: no run has written to it; "
                                           r"tables there: 't'$"):
        drift(job.destination, "nightly")
    run_job(job, "day1")
    with pytest.raises(BitsiftError, match=r"job 'Nightly' has no runs in results table .* "
                                           r"\(did you mean 'nightly'\?\); jobs there: 'nightly'$"):
        drift(job.destination, "Nightly")
    assert drift(job.destination, "nightly").notes == [
        f"job 'nightly' has 1 run in {pg_schema}.history: nothing to compare yet"]


@pytest.mark.postgres
def test_planted_change_on_postgres(tmp_path: Path, postgres_engine: sa.Engine,
                                    pg_schema: str) -> None:
    postgres_source(postgres_engine, pg_schema, random_rows())
    job = load_job(write_job(tmp_path, two_rankings(
        POSTGRES_URL, POSTGRES_URL, f"{pg_schema}.history", source_table=f"{pg_schema}.t")))
    run_job(job, "day1")
    run_job(job, "day2")
    assert not drift(job.destination, "nightly").drifted
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(PLANTED.format(table=f'"{pg_schema}".t'))
    run_job(job, "day3")
    report = drift(job.destination, "nightly")
    moved = {(c.ranking, c.attribute): c for c in report.changes if c.kind == "information_gain"}
    assert set(moved) == {("all", "b"), ("positive", "b")}
    assert moved["all", "b"].after > moved["all", "b"].before + 0.05
