"""Stored counts on the command line (docs/stored-counts.md): ``bitsift counts`` and the
``--from-counts`` options of ``bitsift rank``. Like the rest of the CLI they only parse
options, call the library and print."""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import click
from click.core import ParameterSource

from bitsift.cli.cli_options import (
    library_options,
    print_notes,
    print_statements,
    rank_options,
)
from bitsift.names import one_line
from bitsift.run.counts_meta import DEFAULT_COUNTS_TABLE
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.spec.rankspec import timeout_seconds
from bitsift.sql.counts_sql import GRAINS

if TYPE_CHECKING:  # the counts' modules are imported by the commands that use them
    from bitsift.analysis.profile_model import ProfiledRun
    from bitsift.jobs.drift import DriftReport, DriftThresholds

#: rank's options that decide what is counted: they belong to ``bitsift counts``.
_COUNTED = ("table", "attributes", "exclude", "categorical", "numeric", "bins", "binning",
            "binning_for", "date_part", "where", "by", "weight", "engine", "target")
#: Options of ``bitsift counts`` that only ``rank --from-counts`` uses.
_RANKING_ONLY = ("missing", "sort", "limit")


@click.command("counts")
@click.argument("source")
@rank_options
@click.option("--partition", "-p", required=True,
              help="Date, timestamp, integer or text column whose partitions are counted.")
@click.option("--into", "into", required=True, metavar="DEST",
              help="Where the counts go: a DuckDB file or a SQLAlchemy URL.")
@click.option("--grain", type=click.Choice(GRAINS), default="day", show_default=True,
              help="A date's partition: its day, (Monday) week or month; value: raw values.")
@click.option("--counts-table", default=DEFAULT_COUNTS_TABLE, show_default=True,
              help="[schema.]table of the counts in DEST (metadata in TABLE_meta).")
@click.option("--recount-from", metavar="P",
              help="Count the partitions from P on again (late rows), replacing them.")
@click.option("--refit", is_flag=True,
              help="Rebuild everything: new cut points, every partition counted again.")
@click.pass_context
def counts_command(ctx: click.Context, /, source: str, **kwargs: Any) -> None:
    """Count the partitions of SOURCE not yet stored and append their counts to DEST.

    One statement counts (partition, attribute, value, class) in SOURCE's database; the rows
    are written to DEST in one transaction. Rank any window later with
    `bitsift rank DEST --from-counts --since P --until P`.
    """
    for name in _RANKING_ONLY:
        if ctx.get_parameter_source(name) is not ParameterSource.DEFAULT:
            raise click.UsageError(f"--{name} applies when ranking: use it with "
                                   "`bitsift rank DEST --from-counts`")
        kwargs.pop(name)
    from bitsift.jobs.counts_build import build_counts  # the counts stores: only here

    options = library_options(kwargs)
    report = build_counts(source, **options)
    print_statements(report.dialect, report.statements)
    print_notes(report.notes)
    click.echo(report.summary())


def from_counts_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """``rank``'s options for ranking stored counts; --target becomes optional (the counts
    name it). Apply above every other option decorator."""
    options = [
        click.option("--from-counts", "from_counts", is_flag=True,
                     help="SOURCE is a counts DEST (see `bitsift counts`): rank a window of "
                          "its stored counts, in the database holding them."),
        click.option("--counts-table", default=DEFAULT_COUNTS_TABLE, show_default=True,
                     help="With --from-counts: the counts table in DEST."),
        click.option("--since", metavar="P", help="With --from-counts: first partition of "
                     "the window (inclusive)."),
        click.option("--until", metavar="P", help="With --from-counts: end of the window "
                     "(exclusive)."),
        click.option("--by-partition", is_flag=True,
                     help="With --from-counts: one ranking per partition of the window."),
    ]
    for option in reversed(options):
        command = option(command)
    for param in getattr(command, "__click_params__", []):
        if param.name == "target":
            param.required = False
    return command


def _counts_window(ctx: click.Context, kwargs: dict[str, Any]) -> dict[str, Any] | None:
    """The window options when --from-counts is given (popped from ``kwargs``), else None
    after checking that no window option was given and that --target was."""
    window = {k: kwargs.pop(k) for k in ("from_counts", "counts_table", "since", "until",
                                          "by_partition")}
    given = {name for name in ctx.params
             if ctx.get_parameter_source(name) is not ParameterSource.DEFAULT}
    if not window.pop("from_counts"):
        stray = sorted(given & {"counts_table", "since", "until", "by_partition"})
        if stray:
            raise click.UsageError(f"--{stray[0].replace('_', '-')} needs --from-counts")
        if kwargs.get("target") is None:
            target = next(p for p in ctx.command.params if p.name == "target")
            raise click.MissingParameter(ctx=ctx, param=target)
        return None
    counted = sorted(given & set(_COUNTED))
    if counted:
        raise click.UsageError(
            f"--{counted[0].replace('_', '-')} decides what is counted: give it to "
            "`bitsift counts`; the counts name their own target and attributes")
    options = library_options(kwargs)
    return {**window, "sort": options["sort"], "limit": options["limit"],
            "missing": options["missing"], "thresholds": options["thresholds"],
            "timeout": options["timeout"], "confidence": options.get("confidence", 0.95)}


def counts_ranking(ctx: click.Context, source: str, kwargs: dict[str, Any],
                   ) -> Ranking | SegmentedRanking | None:
    """The ranking of stored counts when --from-counts is given, else None (after checking
    that no --from-counts option and a --target were given)."""
    window = _counts_window(ctx, kwargs)
    if window is None:
        return None
    from bitsift.run.counts_rank import rank_counts

    return rank_counts(source, **window)


def counts_report(ctx: click.Context, source: str, kwargs: dict[str, Any],
                  **report: Any) -> list[ProfiledRun] | None:
    """The report's runs from stored counts when --from-counts is given, else None (after
    the same checks as :func:`counts_ranking`). ``report``: top, max_values, sensitive."""
    window = _counts_window(ctx, kwargs)
    if window is None:
        return None
    if ctx.params.get("select_k"):
        raise click.UsageError("--select measures pairs of attributes on the rows: not "
                               "available with --from-counts")
    from bitsift.analysis.counts_report import report_counts

    return report_counts(source, **window, **report)


_PASTE_ONLY = ("partition", "grain", "counts_table", "since", "until")


def counts_sql_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """``sql``'s options for the statements that keep counts inside the warehouse."""
    options = [
        click.option("--counts", "counts", is_flag=True,
                     help="Print the statements that keep stored counts inside the warehouse: "
                          "create the counts table, add new partitions, rank a window."),
        click.option("--partition", "-p", help="With --counts: the partition column."),
        click.option("--grain", type=click.Choice(GRAINS), default="day", show_default=True,
                     help="With --counts: a date's day, week or month, or raw values."),
        click.option("--counts-table", default=DEFAULT_COUNTS_TABLE, show_default=True,
                     help="With --counts: [schema.]table of the counts."),
        click.option("--since", metavar="P", help="With --counts: the window's first partition."),
        click.option("--until", metavar="P", help="With --counts: the window's end (exclusive)."),
    ]
    for option in reversed(options):
        command = option(command)
    return command


def counts_paste_text(ctx: click.Context, source: str | None, dialect: str | None,
                      kwargs: dict[str, Any]) -> str | None:
    """The ``sql --counts`` statements, or None without --counts (after checking that no
    --counts option was given)."""
    given = {name for name in ctx.params
             if ctx.get_parameter_source(name) is not ParameterSource.DEFAULT}
    settings = {k: kwargs.pop(k) for k in ("counts", *_PASTE_ONLY)}
    if not settings["counts"]:
        stray = sorted(given & set(_PASTE_ONLY))
        if stray:
            raise click.UsageError(f"--{stray[0].replace('_', '-')} needs --counts")
        return None
    if source is None:
        raise click.UsageError("--counts needs a SOURCE: the column types and the numeric cut "
                               "points come from the table")
    if settings["partition"] is None:
        raise click.UsageError("--counts needs --partition")
    from bitsift.jobs.counts_build import paste_counts

    options = library_options(kwargs)
    timeout_seconds(options.pop("timeout", None))
    return paste_counts(source, dialect=dialect, partition=settings["partition"],
                        grain=settings["grain"], counts_table=settings["counts_table"],
                        since=settings["since"], until=settings["until"], **options)


#: drift's options that choose runs in the history, not windows of stored counts.
_HISTORY_ONLY = ("results", "results_table", "job_name", "old", "new")
_DRIFT_WINDOW = ("counts_table", "since", "until", "against_since", "against_until")


def _decorator(options: list[Callable[..., Any]]) -> Callable[..., Any]:
    """A decorator adding ``options`` to a command, in the order listed."""
    def apply(command: Callable[..., Any]) -> Callable[..., Any]:
        for option in reversed(options):
            command = option(command)
        return command
    return apply


#: ``drift``'s options for comparing two windows of stored counts.
drift_counts_options = _decorator([
    click.option("--from-counts", "from_counts", is_flag=True,
                 help="Compare two windows of stored counts: JOB_FILE is then a counts DEST "
                      "(see `bitsift counts`) or a job file with [counts]."),
    click.option("--counts-table", help="With --from-counts: the counts table in DEST "
                 f"(default: the job's, else {DEFAULT_COUNTS_TABLE})."),
    click.option("--since", metavar="P", help="With --from-counts: first partition of the "
                 "newer window (inclusive)."),
    click.option("--until", metavar="P", help="With --from-counts: end of the newer window "
                 "(exclusive)."),
    click.option("--against-since", metavar="P", help="With --from-counts: first partition "
                 "of the window compared with (default: the window of the same length just "
                 "before)."),
    click.option("--against-until", metavar="P", help="With --from-counts: end of the "
                 "window compared with (exclusive)."),
])


def counts_drift(ctx: click.Context, place: str | None, thresholds: DriftThresholds,
                 window: dict[str, Any]) -> DriftReport | None:
    """The drift between two windows of stored counts with --from-counts, else None (after
    checking that no window option was given)."""
    given = {name for name in ctx.params
             if ctx.get_parameter_source(name) is not ParameterSource.DEFAULT}
    if not window.pop("from_counts"):
        stray = sorted(given & set(_DRIFT_WINDOW))
        if stray:
            raise click.UsageError(f"--{stray[0].replace('_', '-')} needs --from-counts")
        return None
    history = sorted(given & set(_HISTORY_ONLY))
    if history:
        flag = "--job" if history[0] == "job_name" else f"--{history[0].replace('_', '-')}"
        raise click.UsageError(f"{flag} chooses runs in the history: leave it out with "
                               "--from-counts")
    if place is None:
        raise click.UsageError("--from-counts needs the counts' DEST (a DuckDB file or URL) "
                               "or a job file with [counts]")
    from bitsift.jobs.counts_drift import drift_counts
    from bitsift.jobs.jobfile import load_job

    asked = window.pop("counts_table")
    dest, table = place, asked or DEFAULT_COUNTS_TABLE
    if place.endswith(".toml"):
        job = load_job(place)
        if job.counts is None:
            raise click.UsageError(f"{one_line(place)} has no [counts] section")
        dest, table = job.counts.into.location, asked or job.counts.into.table
    return drift_counts(dest, counts_table=table, thresholds=thresholds, **window)
