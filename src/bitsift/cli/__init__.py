"""The ``bitsift`` command: parses options, calls the library, formats. Nothing else."""

from __future__ import annotations

import os
import signal
import sys
from collections.abc import Sequence
from typing import Any, NoReturn

import click

from bitsift.cli import signals
from bitsift.cli.cli_counts import (
    counts_paste_text,
    counts_ranking,
    counts_sql_options,
    from_counts_options,
)
from bitsift.cli.cli_options import (
    CliState,
    engine_option,
    engine_source,
    library_options,
    print_notes,
    print_statements,
    rank_options,
    segment_options,
)
from bitsift.cli.lazy_group import LazyGroup
from bitsift.engines.masking import environment_secrets, mask_text
from bitsift.errors import BitsiftError, Terminated, flag_name
from bitsift.names import one_line
from bitsift.output.formatting import FORMATS, render
from bitsift.output.texttable import aligned
from bitsift.run import api
from bitsift.sql.dialects import CAPABILITIES
from bitsift.version import __version__

#: The commands defined in other modules, imported when one is run or listed (a ranking
#: never loads the history stores, the report or SQLAlchemy).
LAZY_COMMANDS: dict[str, str] = {
    "counts": "bitsift.cli.cli_counts:counts_command",
    "drift": "bitsift.cli.cli_jobs:drift_command",
    "models": "bitsift.cli.cli_jobs:models_command",
    "profile": "bitsift.cli.cli_report:profile_command",
    "redundancy": "bitsift.cli.cli_select:redundancy_command",
    "report": "bitsift.cli.cli_report:report_command",
    "run": "bitsift.cli.cli_jobs:run_command",
    "select": "bitsift.cli.cli_select:select_command",
}


@click.group(cls=LazyGroup, lazy_commands=LAZY_COMMANDS,
             context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="bitsift")
@click.option("--debug", is_flag=True, help="Show tracebacks and the SQL sent.")
@click.pass_context
def cli(ctx: click.Context, debug: bool) -> None:
    """Rank a table's columns by information gain about a categorical target, in the database.

    SOURCE is a DuckDB database file (with --table), a Parquet or CSV file read in place, or a
    SQLAlchemy URL such as postgresql+psycopg://user@host/db (with --table); rank and check
    can also read it with Spark or embedded ClickHouse (--engine).
    """
    ctx.ensure_object(CliState).debug = debug


@cli.command("rank")
@click.argument("source")
@from_counts_options
@rank_options
@segment_options
@engine_option
@click.option("--format", "-f", "fmt", type=click.Choice(FORMATS), default="table",
              show_default=True)
@click.pass_context
def rank_command(ctx: click.Context, /, source: str, fmt: str, engine: str | None,
                 **kwargs: Any) -> None:
    """Rank the attributes of SOURCE by what they tell about --target.

    With --from-counts, SOURCE holds stored counts (`bitsift counts`): a window is ranked.
    """
    ranking = counts_ranking(ctx, source, kwargs) or api.rank(engine_source(source, engine),
                                                              **library_options(kwargs))
    print_statements(ranking.dialect, ranking.statements)
    print_notes(ranking.notes)
    # color=True: written as is. Click would otherwise strip what looks like a colour code from
    # output that is not a terminal, changing names in CSV; text formats escape them anyway.
    click.echo(render(ranking, fmt), nl=False, color=True)
    ctx.ensure_object(CliState).output_done = True  # api.rank closed its session


@cli.command("sql")
@click.argument("source", required=False)
@counts_sql_options
@rank_options
@segment_options
@click.option("--dialect", "-d", type=click.Choice(sorted(CAPABILITIES), case_sensitive=False),
              help="SQL dialect to write (default: the SOURCE's, or duckdb).")
@click.pass_context
def sql_command(ctx: click.Context, /, source: str | None, dialect: str | None,
                **kwargs: Any) -> None:
    """Print the self-contained ranking statement, formatted for pasting into a console.

    Without SOURCE, describe the columns with --table, --attributes and --numeric. A data
    file as SOURCE with --table: the file gives the columns, the statement reads the table.
    --timeout limits what runs on SOURCE; --limit is refused (every attribute is returned).
    With --counts: the statements that keep stored counts inside the warehouse.
    """
    pasted = counts_paste_text(ctx, source, dialect, kwargs)
    if pasted is not None:
        click.echo(pasted, nl=False)
        return
    options = library_options(kwargs)
    click.echo(api.statement(source, dialect=dialect, **options), nl=False)


@cli.command("check")
@click.argument("source")
@rank_options
@click.option("--sample-rows", type=int, default=100_000, show_default=True,
              help="Rows pulled into NumPy for the reference computation.")
@engine_option
def check_command(source: str, sample_rows: int, engine: str | None, **kwargs: Any) -> None:
    """Compare the in-database metrics with the NumPy reference on pulled rows.

    Exits 1 when the whole table fit in the sample and a metric differs by more than 1e-9.
    """
    report = api.check(engine_source(source, engine), sample_rows=sample_rows,
                       **library_options(kwargs))
    print_notes(report.ranking.notes)
    scope = "whole table" if report.whole_table else f"sample of {report.sample_rows:,} rows"
    click.echo(f"{one_line(report.ranking.table)}: {len(report.ranking.attributes)} attributes,"
               f" database vs NumPy reference on the {scope}")
    rows = [[metric, f"max |difference| = {difference:.3e}"]
            for metric, difference in report.differences.items()]
    for line in aligned(rows, left={0, 1}):
        click.echo(f"  {line}")
    if report.whole_table:
        verdict = "agree" if report.ok else "DISAGREE"
        click.echo(f"result: database and reference {verdict} (tolerance {report.tolerance:g})")
    else:
        total = report.ranking.rows + report.ranking.rows_excluded
        click.echo("result: sample only: the differences are the sample's, informative (no exact"
                   f" comparison); --sample-rows {total} compares the whole table")
    if not report.ok:
        sys.exit(1)


def error_text(error: BitsiftError) -> str:
    """The message of ``error`` as one line, its problems joined with ``"; "`` and options
    spelled as flags (``--bins``), control characters escaped so that a column name cannot
    forge lines or act on the terminal; a job file's problems keep one line each."""
    if error.line_per_problem:
        return "\n".join(one_line(line) for line in str(error).split("\n"))
    return one_line(error.render(flag_name))


def _interrupted(error: BaseException) -> NoReturn:
    """Ctrl-C or SIGTERM, once every statement was cancelled: one line, 130 or 143."""
    if isinstance(error, Terminated) or isinstance(error.__cause__, Terminated):
        click.echo("Terminated.", err=True)
        sys.exit(128 + signal.SIGTERM)
    click.echo("Interrupted." if isinstance(error, KeyboardInterrupt) else "Aborted.", err=True)
    sys.exit(128 + signal.SIGINT)


def main(argv: Sequence[str] | None = None, state: CliState | None = None) -> None:
    """Console entry point: one clear error line and exit 1 for bitsift errors.

    Ctrl-C and SIGTERM cancel the running statements (:mod:`bitsift.cli.signals`) instead of
    leaving them to run on after exit. ``state``: the invocation's (:class:`CliState`), to
    read after the command (:func:`console`).
    """
    args = list(sys.argv[1:] if argv is None else argv)
    with signals.cancel_on_signals():
        _main(args, state if state is not None else CliState())


def console() -> None:
    """The ``bitsift`` command (and ``python -m bitsift.cli``): :func:`main`, then, where the
    command says it has written all its output and closed what it opened
    (:attr:`CliState.output_done`: ``rank``), the process ends at once with its exit code
    once stdout and stderr are flushed: Python's teardown of the modules a ranking loads
    (DuckDB, sqlglot, click) took 45-50 ms of a 10,000-row ranking's 0.36 s (2-core machine,
    2026-12-05; benchmarks/RESULTS.md, "Fixed costs, fourth step"). Any other ending (an
    error, another command, output that cannot be flushed) exits as Python always does."""
    state = CliState()
    code: str | int | None = 0
    try:
        main(state=state)
    except SystemExit as ended:
        code = ended.code
    if state.output_done and isinstance(code, int | None) and _flushed():
        os._exit(code or 0)
    sys.exit(code)


def _flushed() -> bool:
    """Whether stdout and stderr were flushed (False: a closed pipe, left to Python)."""
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):
        return False
    return True


def _main(args: list[str], state: CliState) -> None:
    try:
        cli.main(args=args, prog_name="bitsift", standalone_mode=False, obj=state)
    except (click.exceptions.Abort, KeyboardInterrupt) as error:
        _interrupted(error)
    except click.ClickException as error:
        error.show()
        sys.exit(error.exit_code)
    except BitsiftError as error:
        interrupt = signals.received()
        if interrupt is not None:  # the failure is the cancel the signal caused
            _interrupted(interrupt)
        if state.debug or "--debug" in args:
            _mask_chain(error)
            raise
        click.echo(f"Error: {mask_text(error_text(error), environment_secrets())}", err=True)
        sys.exit(1)
    except Exception as error:  # noqa: BLE001 - no tracebacks for users unless --debug
        if state.debug or "--debug" in args:
            _mask_chain(error)
            raise
        text = mask_text(str(error), environment_secrets())
        first = one_line((text.strip().splitlines() or [""])[0])
        click.echo(f"Error: unexpected {type(error).__name__}: {first} "
                   "(run with --debug for details)", err=True)
        sys.exit(1)


def _mask_chain(error: BaseException) -> None:
    """Mask the messages of ``error`` and of the errors it was raised from, in place, before
    --debug lets Python print their traceback (a driver's error may quote the URL or DSN)."""
    seen: set[int] = set()
    link: BaseException | None = error
    while link is not None and id(link) not in seen:
        seen.add(id(link))
        text = str(link)
        masked = mask_text(text, environment_secrets())
        if masked != text:
            link.args = (masked,)
        link = link.__cause__ or link.__context__
