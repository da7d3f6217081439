"""The ``bitsift`` command: parses options, calls the library, formats. Nothing else."""

from __future__ import annotations

import signal
import sys
from collections.abc import Callable, Sequence
from typing import Any, NoReturn

import click

from bitsift import api, signals
from bitsift.dialects import CAPABILITIES
from bitsift.errors import BitsiftError, Terminated, flag_name
from bitsift.formatting import FORMATS, render
from bitsift.jobs import JobError
from bitsift.masking import environment_secrets, mask_text
from bitsift.names import one_line
from bitsift.sources import ENGINE_NAMES, EngineSource
from bitsift.spec import (
    BINNING_METHODS,
    MISSING_MODES,
    SORT_METRICS,
    Thresholds,
    split_outside_quotes,
    timeout_seconds,
)
from bitsift.texttable import aligned
from bitsift.version import __version__

_DEBUG = {"on": False}


def _comma_list(
    _ctx: click.Context, _param: click.Parameter, value: Sequence[str]
) -> tuple[str, ...]:
    names: list[str] = []
    for item in value:
        names += [v.strip() for v in item.split(",") if v.strip()]
    return tuple(names)


def _pair_list(
    _ctx: click.Context, _param: click.Parameter, value: Sequence[str]
) -> tuple[str, ...]:
    """COL=VALUE items split at commas outside double quotes ("a,b"=mdl names one column)."""
    items: list[str] = []
    for item in value:
        items += [v.strip() for v in split_outside_quotes(item) if v.strip()]
    return tuple(items)


def rank_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """The options shared by every command that ranks (rank, sql, check)."""
    options = [
        click.option("--target", "-y", required=True, help="The categorical outcome column."),
        click.option("--table", "-t", help="[schema.]table in a database SOURCE."),
        click.option("--attributes", "-a", multiple=True, callback=_comma_list,
                     help="Columns to rank (comma-separated; default: all but the target)."),
        click.option("--exclude", "-x", multiple=True, callback=_comma_list,
                     help="Columns to leave out."),
        click.option("--categorical", multiple=True, callback=_comma_list,
                     help="Treat these columns as categories even if numeric."),
        click.option("--numeric", multiple=True, callback=_comma_list,
                     help="Bin these number columns (floats and decimals always are)."),
        click.option("--missing", type=click.Choice(MISSING_MODES), default="category",
                     show_default=True,
                     help="NULL attribute values: their own category, or dropped per attribute."),
        click.option("--bins", type=int, default=10, show_default=True,
                     help="Bins for numeric attributes (quantile and equal-width)."),
        click.option("--binning", type=click.Choice(BINNING_METHODS), default="quantile",
                     show_default=True,
                     help="How numeric attributes are cut: equal-frequency or equal-width bins, "
                          "the best binary split, or Fayyad & Irani's MDL."),
        click.option("--binning-for", "binning_for", multiple=True, callback=_pair_list,
                     metavar="COL=METHOD[:BINS]",
                     help="Another binning for some columns, e.g. price=mdl,age=quantile:5; "
                          'a name holding = or , in double quotes: "p=q"=mdl.'),
        click.option("--date-part", "date_part", multiple=True, callback=_pair_list,
                     metavar="[COL=]PART",
                     help="Rank dates as categories of a part (year, month, dow, hour): "
                          "sown_on=month, or a bare PART for every date column. Dates named "
                          'in --numeric are binned as epoch seconds instead. A name holding '
                          '= or , in double quotes: "d=1"=month.'),
        click.option("--where", help="Only rows matching this condition (checked by sqlglot)."),
        click.option("--sort", type=click.Choice(SORT_METRICS), default="information_gain",
                     show_default=True, help="Metric to sort by (descending)."),
        click.option("--limit", type=int, help="Show the top N attributes only."),
        click.option("--timeout", type=float, help="Statement timeout in seconds."),
        click.option("--high-cardinality", "high_cardinality", type=int, default=1000,
                     show_default=True, help="Flag attributes with more distinct values."),
    ]
    for option in reversed(options):
        command = option(command)
    return command


#: --by: segments, for the commands that support them (rank, sql, report).
by_option: Callable[[Callable[..., Any]], Callable[..., Any]] = click.option(
    "--by", multiple=True, callback=_comma_list,
    help="Rank within each segment: each combination of values of these columns "
         "(comma-separated; NULL is a segment of its own).")
#: --weight, for the commands that support it (rank, sql).
weight_option: Callable[[Callable[..., Any]], Callable[..., Any]] = click.option(
    "--weight", help="Sum this column of non-negative weights instead of counting rows "
                     "(NULL or 0: the row is left out).")


def segment_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """--by and --weight, for the commands that support both (rank, sql)."""
    return by_option(weight_option(command))


#: --engine, for the commands that read SOURCE with a chosen engine (rank, check).
engine_option = click.option(
    "--engine", type=click.Choice(ENGINE_NAMES),
    help="Read SOURCE with this engine. spark: a Parquet file or directory on a local Spark "
         "session, or with --table the master (local[2], spark://host:7077) and a catalog "
         "table; clickhouse: a Parquet file read by embedded ClickHouse (chdb), or with "
         "--table a chdb database directory.")


def _engine_source(source: str, engine: str | None) -> Any:
    """SOURCE as given, or wrapped for the --engine that reads it."""
    return EngineSource(engine, source) if engine else source


def _library_options(kwargs: dict[str, Any]) -> dict[str, Any]:
    cap = kwargs.pop("high_cardinality")
    kwargs["thresholds"] = Thresholds(high_cardinality=cap)
    kwargs["attributes"] = kwargs.get("attributes") or None
    return kwargs


def _notes(notes: Sequence[str]) -> None:
    for note in notes:
        click.echo(f"note: {one_line(note)}", err=True)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="bitsift")
@click.option("--debug", is_flag=True, help="Show tracebacks and the SQL sent.")
def cli(debug: bool) -> None:
    """Rank a table's columns by information gain about a categorical target, in the database.

    SOURCE is a DuckDB database file (with --table), a Parquet or CSV file read in place, or a
    SQLAlchemy URL such as postgresql+psycopg://user@host/db (with --table); rank and check
    can also read it with Spark or embedded ClickHouse (--engine).
    """
    _DEBUG["on"] = debug


@cli.command("rank")
@click.argument("source")
@rank_options
@segment_options
@engine_option
@click.option("--format", "-f", "fmt", type=click.Choice(FORMATS), default="table",
              show_default=True)
def rank_command(source: str, fmt: str, engine: str | None, **kwargs: Any) -> None:
    """Rank the attributes of SOURCE by what they tell about --target."""
    ranking = api.rank(_engine_source(source, engine), **_library_options(kwargs))
    if _DEBUG["on"]:
        for statement in ranking.statements:
            click.echo(f"-- sent to {ranking.dialect}:\n{statement};", err=True)
    _notes(ranking.notes)
    # color=True: written as is. Click would otherwise strip what looks like a colour code from
    # output that is not a terminal, changing names in CSV; text formats escape them anyway.
    click.echo(render(ranking, fmt), nl=False, color=True)


@cli.command("sql")
@click.argument("source", required=False)
@rank_options
@segment_options
@click.option("--dialect", "-d", type=click.Choice(sorted(CAPABILITIES), case_sensitive=False),
              help="SQL dialect to write (default: the SOURCE's, or duckdb).")
def sql_command(source: str | None, dialect: str | None, **kwargs: Any) -> None:
    """Print the self-contained ranking statement, formatted for pasting into a console.

    Without SOURCE, describe the columns with --table, --attributes and --numeric.
    """
    options = _library_options(kwargs)
    # The statement is printed, not run: --timeout is only checked.
    timeout_seconds(options.pop("timeout", None))
    options.pop("limit", None)
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
    report = api.check(_engine_source(source, engine), sample_rows=sample_rows,
                       **_library_options(kwargs))
    _notes(report.ranking.notes)
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
        click.echo("result: sample only, differences are informative (no exact comparison)")
    if not report.ok:
        sys.exit(1)


def error_text(error: BitsiftError) -> str:
    """The message of ``error`` as one line, its problems joined with ``"; "`` and options
    spelled as flags (``--bins``), control characters escaped so that a column name cannot
    forge lines or act on the terminal; a job file's problems keep one line each."""
    if isinstance(error, JobError):
        return "\n".join(one_line(line) for line in str(error).split("\n"))
    return one_line(error.render(flag_name))


def _interrupted(error: BaseException) -> NoReturn:
    """Ctrl-C or SIGTERM, once every statement was cancelled: one line, 130 or 143."""
    if isinstance(error, Terminated) or isinstance(error.__cause__, Terminated):
        click.echo("Terminated.", err=True)
        sys.exit(128 + signal.SIGTERM)
    click.echo("Interrupted." if isinstance(error, KeyboardInterrupt) else "Aborted.", err=True)
    sys.exit(128 + signal.SIGINT)


def main(argv: Sequence[str] | None = None) -> None:
    """Console entry point: one clear error line and exit 1 for bitsift errors.

    Ctrl-C and SIGTERM cancel the running statements (:mod:`bitsift.signals`) instead of
    leaving them to run on after exit.
    """
    args = list(sys.argv[1:] if argv is None else argv)
    with signals.cancel_on_signals():
        _main(args)


def _main(args: list[str]) -> None:
    try:
        cli.main(args=args, prog_name="bitsift", standalone_mode=False)
    except (click.exceptions.Abort, KeyboardInterrupt) as error:
        _interrupted(error)
    except click.ClickException as error:
        error.show()
        sys.exit(error.exit_code)
    except BitsiftError as error:
        interrupt = signals.received()
        if interrupt is not None:  # the failure is the cancel the signal caused
            _interrupted(interrupt)
        if _DEBUG["on"] or "--debug" in args:
            _mask_chain(error)
            raise
        click.echo(f"Error: {mask_text(error_text(error), environment_secrets())}", err=True)
        sys.exit(1)
    except Exception as error:  # noqa: BLE001 - no tracebacks for users unless --debug
        if _DEBUG["on"] or "--debug" in args:
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


# The scheduled-run commands (run, drift, models) live in their own module.
from bitsift.cli_jobs import JOB_COMMANDS  # noqa: E402

for _command in JOB_COMMANDS:
    cli.add_command(_command)

# The reports people read (report, profile) live in their own module.
from bitsift.cli_report import profile_command, report_command  # noqa: E402

cli.add_command(report_command)
cli.add_command(profile_command)

# Redundancy between attributes and mRMR selection (redundancy, select) live in their own module.
from bitsift.cli_select import SELECT_COMMANDS  # noqa: E402

for _command in SELECT_COMMANDS:
    cli.add_command(_command)
