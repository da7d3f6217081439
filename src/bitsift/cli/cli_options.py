"""What the ``bitsift`` commands share: their common options, turning them into library
arguments, and printing notes and (with ``--debug``) the statements sent.

Every command module (:mod:`bitsift.cli`, :mod:`bitsift.cli.cli_report`,
:mod:`bitsift.cli.cli_select`, :mod:`bitsift.cli.cli_jobs`) imports from here; nothing here imports
a command module. The ``--debug`` flag lives in click's context object (:class:`CliState`), not in
a module global, so two invocations in one process (tests) cannot see each other's flag.
"""

from __future__ import annotations

import functools
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import click

from bitsift.engines.read_options import FileSource
from bitsift.engines.sources import ENGINE_NAMES, EngineSource
from bitsift.errors import SpecError
from bitsift.names import one_line
from bitsift.spec.rankspec import (
    BINNING_METHODS,
    CONFIDENCE_Z,
    MISSING_MODES,
    SORT_METRICS,
    Thresholds,
    split_outside_quotes,
)


@dataclass
class CliState:
    """State of one ``bitsift`` invocation, kept as click's ``ctx.obj``."""

    #: ``--debug``: tracebacks and the statements sent.
    debug: bool = False
    #: Set by a command that has written all it writes to stdout/stderr and closed every
    #: session it opened: the console entry may then end the process without Python's
    #: teardown (:func:`bitsift.cli.console`).
    output_done: bool = False


def cli_state() -> CliState:
    """The running invocation's state (a default one outside a click command)."""
    context = click.get_current_context(silent=True)
    if context is None:
        return CliState()
    return context.find_root().ensure_object(CliState)


def print_statements(dialect: str, statements: Sequence[str]) -> None:
    """With ``--debug``: every statement sent, on stderr."""
    if cli_state().debug:
        for statement in statements:
            click.echo(f"-- sent to {dialect}:\n{statement};", err=True)


def comma_list(
    _ctx: click.Context, _param: click.Parameter, value: Sequence[str]
) -> tuple[str, ...]:
    names: list[str] = []
    for item in value:
        names += [v.strip() for v in item.split(",") if v.strip()]
    return tuple(names)


def pair_list(
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
        click.option("--attributes", "-a", multiple=True, callback=comma_list,
                     help="Columns to rank (comma-separated; default: all but the target)."),
        click.option("--exclude", "-x", multiple=True, callback=comma_list,
                     help="Columns to leave out."),
        click.option("--categorical", multiple=True, callback=comma_list,
                     help="Treat these columns as categories even if numeric."),
        click.option("--numeric", multiple=True, callback=comma_list,
                     help="Bin these number columns (floats, decimals, dates and timestamps "
                          "always are)."),
        click.option("--missing", type=click.Choice(MISSING_MODES), default="category",
                     show_default=True,
                     help="NULL attribute values: their own category, or dropped per attribute."),
        click.option("--bins", type=int, default=10, show_default=True,
                     help="Bins for numeric attributes (quantile and equal-width)."),
        click.option("--binning", type=click.Choice(BINNING_METHODS), default="quantile",
                     show_default=True,
                     help="How numeric attributes are cut: equal-frequency or equal-width bins, "
                          "the best binary split, or Fayyad & Irani's MDL."),
        click.option("--binning-for", "binning_for", multiple=True, callback=pair_list,
                     metavar="COL=METHOD[:BINS]",
                     help="Another binning for some columns, e.g. price=mdl,age=quantile:5; "
                          'a name holding = or , in double quotes: "p=q"=mdl.'),
        click.option("--date-part", "date_part", multiple=True, callback=pair_list,
                     metavar="[COL=]PART",
                     help="Rank dates as categories of a part (year, month, dow, hour) instead "
                          "of binned time: sown_on=month, or a bare PART for every date column. "
                          'A name holding = or , in double quotes: "d=1"=month.'),
        click.option("--target-bins", "target_bins", type=int, metavar="N",
                     help="Rank against N quantile bins of a numeric target (cut in the "
                          "database; a float or decimal target needs this)."),
        click.option("--max-classes", "max_classes", type=int, default=100, show_default=True,
                     help="Refuse a target with more classes than this (it looks continuous "
                          "or like an identifier)."),
        click.option("--where", help="Only rows matching this condition (checked by sqlglot)."),
        click.option("--sort", type=click.Choice(SORT_METRICS), default="information_gain",
                     show_default=True, help="Metric to sort by (descending)."),
        click.option("--limit", type=int, help="Show the top N attributes only."),
        click.option("--confidence", type=click.Choice([f"{c:.2f}" for c in CONFIDENCE_Z]),
                     default="0.95", show_default=True, callback=lambda _c, _p, v: float(v),
                     help="Level of each gain's interval (bias-corrected gain ± z·se) and "
                          "of the rank ranges drawn from them."),
        click.option("--timeout", type=float, help="Statement timeout in seconds."),
        click.option("--high-cardinality", "high_cardinality", type=int, default=1000,
                     show_default=True, help="Flag attributes with more distinct values."),
        click.option("--read-option", "read_options", multiple=True, metavar="KEY=VALUE",
                     help="How to read a CSV SOURCE (repeatable): delimiter, decimal, header, "
                          "null, date_format, timestamp_format, quote, escape, comment, skip, "
                          "encoding, double (a column to read as a number)."),
    ]
    for option in reversed(options):
        command = option(command)
    return _with_read_options(command)


def _with_read_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """The command with SOURCE wrapped in a :class:`FileSource` when ``--read-option`` is
    given (the library takes the reader options with the file, wherever it takes a source)."""

    @functools.wraps(command)
    def with_reader(*args: Any, **kwargs: Any) -> Any:
        options = kwargs.pop("read_options", ())
        if options:
            if kwargs.get("source") is None:
                raise SpecError.option("read_option", " needs a SOURCE file to read")
            if kwargs.get("engine") not in (None, "duckdb"):
                raise SpecError.option("read_option", " applies to CSV files read by DuckDB, "
                                       f"not with --engine {kwargs['engine']}")
            kwargs["source"] = FileSource.of(kwargs["source"], options)
        return command(*args, **kwargs)

    return with_reader


#: --by: segments, for the commands that support them (rank, sql, report).
by_option: Callable[[Callable[..., Any]], Callable[..., Any]] = click.option(
    "--by", multiple=True, callback=comma_list,
    help="Rank within each segment: each combination of values of these columns "
         "(comma-separated; NULL is a segment of its own).")
#: --weight, for the commands that support it (rank, sql).
weight_option: Callable[[Callable[..., Any]], Callable[..., Any]] = click.option(
    "--weight", help="Sum this column of non-negative weights instead of counting rows "
                     "(NULL or 0: the row is left out).")


#: --include-flagged, for the commands that choose among attributes (redundancy, select,
#: report --select).
include_flagged_option: Callable[[Callable[..., Any]], Callable[..., Any]] = click.option(
    "--include-flagged", "include_flagged", is_flag=True,
    help="Keep id_like and constant attributes and those at noise level (G-test p > 0.05 or "
         "no information), which are left out by default.",
)

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


def engine_source(source: str, engine: str | None) -> Any:
    """SOURCE as given, or wrapped for the --engine that reads it."""
    return EngineSource(engine, source) if engine else source


def library_options(kwargs: dict[str, Any]) -> dict[str, Any]:
    cap = kwargs.pop("high_cardinality")
    kwargs["thresholds"] = Thresholds(high_cardinality=cap)
    kwargs["attributes"] = kwargs.get("attributes") or None
    return kwargs


def print_notes(notes: Sequence[str]) -> None:
    for note in notes:
        click.echo(f"note: {one_line(note)}", err=True)
