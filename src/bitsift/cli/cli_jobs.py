"""The scheduled-run commands: ``bitsift run``, ``bitsift drift`` and ``bitsift models``.

Registered on the ``bitsift`` group by cli.py. Like the rest of the CLI they only parse options,
call the library and print.
"""

from __future__ import annotations

import sys
from typing import Any

import click
from click.core import ParameterSource

from bitsift.cli.cli_counts import counts_drift, drift_counts_options
from bitsift.cli.cli_options import print_notes
from bitsift.jobs import drift as drift_lib
from bitsift.jobs.history import DEFAULT_TABLE, Destination
from bitsift.jobs.job_run import check_run_id, dry_run_check, run_job
from bitsift.jobs.jobfile import load_job
from bitsift.jobs.models import write_models
from bitsift.names import one_line
from bitsift.numformat import format_bits
from bitsift.run.result import SEGMENT_STATUS, Ranking, SegmentedRanking, segment_label
from bitsift.sql.dialects import CAPABILITIES


@click.command("run")
@click.argument("job_file", type=click.Path(dir_okay=False))
@click.option("--run-id", help="Id of this run (default: the start time, UTC). Running again "
              "with the same id replaces that run's rows.")
@click.option("--dry-run", is_flag=True,
              help="Check the job against its source and results table; rank and write nothing.")
def run_command(job_file: str, run_id: str | None, dry_run: bool) -> None:
    """Run every ranking of JOB_FILE and append the results to its history table; with a
    [counts] section, also count the partitions not yet stored.

    All rows of a run are written in one transaction: a run that fails writes nothing.
    """
    job = load_job(job_file)
    where = (f"{job.destination.table} in {job.destination.display}"
             if job.destination is not None else "")
    if dry_run:
        counts = dry_run_check(job, run_id=check_run_id(run_id) if run_id is not None
                               else None)
        if job.rankings:
            click.echo(f"job {job.name}: {len(job.rankings)} ranking(s) checked, results "
                       f"table {where} is usable; nothing was ranked or written")
        if counts is not None:
            click.echo(one_line(f"job {job.name}, counts: {counts}; nothing was counted or "
                                "written"))
        return
    result = run_job(job, run_id)
    # Each ranking's notes (columns left out...), once each, as rank prints them.
    print_notes(list(dict.fromkeys([*(n for _, ranked in result.rankings for n in ranked.notes),
                                    *(result.counts.notes if result.counts else [])])))
    stamp = result.run_at.strftime("%Y-%m-%d %H:%M:%S UTC")
    click.echo(f"job {job.name}, run {result.run_id} ({stamp})")
    for ranking, ranked in result.rankings:
        if isinstance(ranked, SegmentedRanking):
            # Table and column names may hold control characters: one line each, escaped.
            click.echo(one_line(f"  {ranking.name}: {ranked.table}, target {ranked.target}, by "
                                f"{', '.join(ranked.by)}: {len(ranked.segments)} segments"))
            for part in ranked.segments:
                click.echo(one_line(f"    {segment_label(part.segment)}: {_ranked_line(part)}"))
            continue
        click.echo(one_line(f"  {ranking.name}: {ranked.table}, target {ranked.target}, "
                            f"{_ranked_line(ranked)}"))
    if result.counts is not None:
        click.echo(f"  counts: {result.counts.summary()}")
    if job.rankings:
        click.echo(f"wrote {result.rows_written} rows to {where}")


def _ranked_line(ranked: Ranking) -> str:
    if ranked.status != "ok":
        return f"{ranked.rows:,} rows, {SEGMENT_STATUS[ranked.status]}"
    top = ", ".join(f"{s.attribute} {format_bits(s.information_gain)}"
                    for s in ranked.attributes[:3])
    return f"{ranked.rows:,} rows, {len(ranked.attributes)} attributes; top IG: {top}"


@click.command("drift")
@click.argument("job_file", required=False, type=click.Path(dir_okay=False))
@click.option("--results", help="Results destination (DuckDB file or URL), instead of JOB_FILE.")
@click.option("--results-table", default=DEFAULT_TABLE, show_default=True,
              help="History table, with --results.")
@click.option("--job", "job_name", help="Job name (default: the job file's).")
@click.option("--old", help="Run id of the older run (needs --new).")
@click.option("--new", help="Run id of the newer run (default: the newest).")
@click.option("--ig-rule", type=click.Choice(drift_lib.IG_RULES), default="interval",
              show_default=True,
              help="When a gain has moved: its intervals in the two runs do not overlap, or "
                   "it changed by more than --ig-change.")
@click.option("--ig-change", type=float, default=0.01, show_default=True,
              help="Information gain move, in bits, that counts as drift (--ig-rule change, "
                   "and rows without an interval).")
@click.option("--rank-change", type=int, default=3, show_default=True,
              help="Move in the ranking, in places, that counts as drift.")
@click.option("--format", "-f", "fmt", type=click.Choice(["text", "json"]), default="text",
              show_default=True)
@drift_counts_options
@click.pass_context
def drift_command(ctx: click.Context, /, job_file: str | None, results: str | None,
                  results_table: str, job_name: str | None, old: str | None, new: str | None,
                  ig_rule: str, ig_change: float, rank_change: int, fmt: str,
                  **window: Any) -> None:
    """Compare the two newest runs of a job (or --old and --new) in its history table; with
    --from-counts, two windows of stored counts (--since/--until against
    --against-since/--against-until).

    Exits 3 when an attribute's information gain or rank moved beyond the thresholds, or an
    attribute appeared, disappeared, gained or lost a flag; 0 otherwise.
    """
    thresholds = drift_lib.DriftThresholds(ig_change=ig_change, rank_change=rank_change,
                                           ig_rule=ig_rule)
    report = counts_drift(ctx, job_file, thresholds, window)
    if report is None:
        _refuse_ignored_results(ctx, job_file)
        report = _history_drift(job_file, results, results_table, job_name, old, new,
                                thresholds)
    render = drift_lib.render_json if fmt == "json" else drift_lib.render_text
    click.echo(render(report), nl=False)
    if report.drifted:
        sys.exit(drift_lib.DRIFT_EXIT_CODE)


def _refuse_ignored_results(ctx: click.Context, job_file: str | None) -> None:
    """--results and --results-table name a history instead of JOB_FILE: given next to one
    (or --results-table alone), they were ignored and drift compared another table's runs, a
    cron line watching the wrong history (found by hand, issue 21 item 5)."""
    given = [name for name in ("results", "results_table")
             if ctx.get_parameter_source(name) is not ParameterSource.DEFAULT]
    if job_file and given:
        raise click.UsageError(f"--{given[0].replace('_', '-')} names a history instead of "
                               f"JOB_FILE; {one_line(job_file)} names its own in [results]")
    if given == ["results_table"]:
        raise click.UsageError("--results-table needs --results (the destination holding it)")


def _history_drift(job_file: str | None, results: str | None, results_table: str,
                   job_name: str | None, old: str | None, new: str | None,
                   thresholds: drift_lib.DriftThresholds) -> drift_lib.DriftReport:
    if job_file:
        job = load_job(job_file)
        if job.destination is None:
            raise click.UsageError(f"{one_line(job_file)} has no [results]: drift compares "
                                   "the history of its rankings (for its counts: "
                                   "--from-counts)")
        destination = job.destination
        name = job_name or job.name
    elif results and job_name:
        destination = Destination(results, results_table)
        name = job_name
    else:
        raise click.UsageError("give a JOB_FILE, or --results and --job")
    return drift_lib.drift(destination, name, old=old, new=new, thresholds=thresholds)


@click.command("models")
@click.argument("job_file", type=click.Path(dir_okay=False))
@click.option("--dialect", "-d", type=click.Choice(sorted(CAPABILITIES), case_sensitive=False),
              help="SQL dialect to write (default: the source's).")
@click.option("--out", "-o", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Folder for the .sql files (created if missing).")
@click.option("--insert", is_flag=True,
              help="Also write the job's script (JOB.insert.sql): create the history table if "
              "missing and append one run of every ranking to it.")
def models_command(job_file: str, dialect: str | None, out_dir: str, insert: bool) -> None:
    """Write one .sql file per ranking of JOB_FILE whose SELECT returns history rows, for SQL
    schedulers."""
    job = load_job(job_file)
    models = write_models(job, out_dir, dialect.lower() if dialect else None, insert=insert)
    for model in models:
        click.echo(f"{model.path}  (ranking {model.ranking})" if model.kind == "ranking" else
                   f"{model.path}  (stored counts: create the table, add new partitions, rank)")
    if models and models[0].script is not None:
        click.echo(f"{models[0].script}  (every ranking, one run per execution)")


#: Added to the ``bitsift`` group by cli.py.
JOB_COMMANDS: tuple[click.Command, ...] = (run_command, drift_command, models_command)
