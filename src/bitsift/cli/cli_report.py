"""The ``report`` and ``profile`` commands: options in, library call, output out.

Registered on the ``bitsift`` group by :mod:`bitsift.cli`.
"""

from __future__ import annotations

import sys
import time
from typing import IO, Any

import click

from bitsift import jsonout
from bitsift.analysis.profile import profile, rank_and_profile, rank_and_profile_segments
from bitsift.analysis.profile_model import ProfiledRun, Progress
from bitsift.analysis.selection import CRITERIA, REPORT_CANDIDATES, select_for_runs
from bitsift.cli.cli_counts import counts_report, from_counts_options
from bitsift.cli.cli_options import (
    by_option,
    comma_list,
    include_flagged_option,
    library_options,
    print_statements,
    rank_options,
)
from bitsift.names import one_line
from bitsift.output.report import profile_dict, profile_text, render_report
from bitsift.run.api import make_options
from bitsift.run.session import Session
from bitsift.sql.sqlstatements import DEFAULT_MAX_VALUES


def progress_printer(quiet: bool, stream: IO[str] | None = None) -> Progress | None:
    """Status lines on stderr, only when it is a terminal and --quiet is not given."""
    out = stream if stream is not None else sys.stderr
    isatty = getattr(out, "isatty", None)
    if quiet or not (callable(isatty) and isatty()):
        return None
    started = time.monotonic()

    def say(message: str) -> None:
        click.echo(f"bitsift [{time.monotonic() - started:5.1f} s] {one_line(message)}", file=out)

    return say


def _after_run(run: ProfiledRun, quiet: bool) -> None:
    print_statements(run.ranking.dialect, run.ranking.statements)
    if not quiet:
        for note in run.notes:
            click.echo(f"note: {one_line(note)}", err=True)


_sensitive_option = click.option(
    "--sensitive", multiple=True, callback=comma_list,
    help="Columns that describe people (comma-separated): marked in every output.",
)
_max_values_option = click.option(
    "--max-values", type=int, default=DEFAULT_MAX_VALUES, show_default=True,
    help="Values of a categorical attribute listed one by one; the rest are merged.",
)
_quiet_option = click.option("--quiet", "-q", is_flag=True, help="No progress or notes on stderr.")


@click.command("report")
@click.argument("source")
@from_counts_options
@rank_options
@by_option
@click.option("--out", "-o", required=True, type=click.Path(dir_okay=False, allow_dash=True),
              help="The HTML file to write ('-' for standard output).")
@click.option("--top", type=int, default=20, show_default=True,
              help="Drill down into the top N attributes (0: every attribute).")
@_max_values_option
@_sensitive_option
@click.option("--title", help="Heading of the report (default: names the target and table).")
@_quiet_option
@click.option("--select", "select_k", type=click.IntRange(min=0), default=0, show_default=True,
              help="Add the K attributes chosen by greedy mRMR and a redundancy heatmap of the "
                   f"top {REPORT_CANDIDATES} (0: neither; one more scan per 64 pairs).")
@click.option("--criterion", type=click.Choice(CRITERIA), default="mid", show_default=True,
              help="The mRMR criterion of --select: relevance − or / mean redundancy.")
@include_flagged_option
@click.pass_context
def report_command(ctx: click.Context, /, source: str, out: str, top: int, max_values: int,
                   sensitive: tuple[str, ...], title: str | None, quiet: bool,
                   select_k: int, criterion: str, include_flagged: bool, **kwargs: Any) -> None:
    """Write a self-contained HTML report: ranking chart, every metric, per-value drill-down.

    With --by, one section per segment. With --from-counts, SOURCE holds stored counts
    (`bitsift counts`): a window is reported from them (--by-partition: one section per
    partition).
    """
    if top < 0:
        raise click.BadParameter("must be 0 (all) or more", param_hint="--top")
    say = progress_printer(quiet)
    stored = counts_report(ctx, source, kwargs, top=top or None, max_values=max_values,
                           sensitive=sensitive)
    if stored is not None:
        _write_report(stored, out, title, quiet, say, by=len(stored) > 1 or bool(
            stored and stored[0].segment))
        return
    options = library_options(kwargs)
    by = options.pop("by", ())
    table = options.pop("table", None)
    make_options(by=by, **options)  # bad options are reported before the source is opened
    # One session: the ranking, the drill-down and --select share the opened source and spec.
    with Session.open(source, table) as session:
        if by:
            runs = rank_and_profile_segments(session, by=by, top=top or None,
                                             max_values=max_values, sensitive=sensitive,
                                             progress=say, **options)
        else:
            runs = [rank_and_profile(session, top=top or None, max_values=max_values,
                                     sensitive=sensitive, progress=say, **options)]
        if select_k:
            select_for_runs(session, runs, k=select_k, criterion=criterion, by=by,
                            progress=say, include_flagged=include_flagged, **options)
    _write_report(runs, out, title, quiet, say, by=bool(by))


def _write_report(runs: list[ProfiledRun], out: str, title: str | None, quiet: bool,
                  say: Progress | None, *, by: bool) -> None:
    run = runs[0]  # the segments share one connection: same statements and notes
    _after_run(run, quiet)
    if say:
        say(f"writing {out}")
    html = render_report(runs, title=title)
    if out == "-":
        click.echo(html, nl=False)
        return
    with open(out, "w", encoding="utf-8") as handle:
        handle.write(html)
    if not quiet:
        drilled = sum(len(r.profiled()) for r in runs)
        segments = f" in {len(runs)} segments" if by else ""
        click.echo(f"wrote {out} ({len(run.ranking.attributes)} attributes ranked{segments}, "
                   f"{drilled} drilled into)", err=True)


@click.command("profile")
@click.argument("source")
@rank_options
@click.option("--attribute", "profile_attributes", multiple=True, required=True,
              callback=comma_list, help="The attribute(s) to drill into (comma-separated).")
@click.option("--format", "-f", "fmt", type=click.Choice(("table", "json")), default="table",
              show_default=True)
@_max_values_option
@_sensitive_option
@_quiet_option
def profile_command(source: str, profile_attributes: tuple[str, ...], fmt: str, max_values: int,
                    sensitive: tuple[str, ...], quiet: bool, **kwargs: Any) -> None:
    """Show, value by value, why an attribute tells about --target (counted in the database)."""
    options = library_options(kwargs)
    if options.pop("attributes", None):
        raise click.UsageError("profile drills into --attribute; --attributes is for rank/report")
    run = profile(source, attributes=profile_attributes, max_values=max_values,
                  sensitive=sensitive, progress=progress_printer(quiet), **options)
    _after_run(run, quiet)
    if fmt == "json":
        click.echo(jsonout.dumps(profile_dict(run), indent=2))
    else:
        click.echo(profile_text(run), nl=False)
