"""The ``redundancy`` and ``select`` commands: options in, library call, output out.

Registered on the ``bitsift`` group by :mod:`bitsift.cli`.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import click

from bitsift import jsonout
from bitsift.analysis.redundancy import (
    DEFAULT_BATCH_PAIRS,
    PAIR_KEYS,
    PAIR_METRICS,
    Redundancy,
    redundancy,
)
from bitsift.analysis.selection import CRITERIA, STEP_KEYS, Selection, select_attributes
from bitsift.cli.cli_options import (
    include_flagged_option,
    library_options,
    print_notes,
    print_statements,
    rank_options,
)
from bitsift.names import escape_text
from bitsift.numformat import format_bits, format_selection_score
from bitsift.output.texttable import aligned, csv_text

OUTPUTS: tuple[str, ...] = ("table", "csv", "json")

_MISSING_TEXT = {"category": "NULL is a value", "drop": "rows with a NULL in the pair dropped"}

_batch_option = click.option(
    "--batch-pairs", type=click.IntRange(min=1), default=DEFAULT_BATCH_PAIRS, show_default=True,
    help="Pairs of attributes measured per statement (one grouping set each).",
)
_format_option = click.option(
    "--format", "-f", "fmt", type=click.Choice(OUTPUTS), default="table", show_default=True,
    help="table: aligned text; csv and json: every row.",
)


def _csv(keys: Sequence[str], records: Sequence[dict[str, Any]]) -> str:
    return csv_text(keys, ([record[k] for k in keys] for record in records))


def redundancy_table(result: Redundancy, top: int, by: str) -> str:
    """The ``top`` most redundant pairs as aligned text, with a one-line summary."""
    ranking, matrix = result.ranking, result.matrix
    pairs = matrix.ordered(by)
    shown = pairs[:top] if top else pairs
    label = by.replace("_", " ")
    out = [
        f"{ranking.table}: target {ranking.target!r}, {ranking.rows:,} rows;"
        f" {len(pairs)} pair(s) of {len(matrix.attributes)} attribute(s)"
        f" ({_MISSING_TEXT.get(result.missing, result.missing)});"
        f" {'top ' + str(len(shown)) if len(shown) < len(pairs) else 'all'} by {label}",
        "",
    ]
    if shown:
        rows = [["first", "second", "I (bits)", "sym unc", "H(first)", "H(second)", "rows"]]
        for p in shown:
            rows.append([p.first, p.second, format_bits(p.mutual_information),
                         format_bits(p.symmetric_uncertainty), format_bits(p.first_entropy),
                         format_bits(p.second_entropy), f"{p.rows:,}"])
        out += aligned(rows, left={0, 1}, rule=True)
    else:
        out.append("(fewer than two attributes: no pairs)")
    out += ["", "I: mutual information between the two attributes; sym unc: 2·I / (H(first) +"
            " H(second)), 0 (independent) to 1 (each determines the other)."]
    return "\n".join(map(escape_text, out)) + "\n"


def selection_table(selection: Selection) -> str:
    """The chosen attributes in order, with each step's relevance and redundancy."""
    ranking = selection.ranking
    name = selection.criterion.upper()
    out = [
        f"{ranking.table}: target {ranking.target!r}, {ranking.rows:,} rows; greedy mRMR ({name})"
        f" chose {len(selection.steps)} of {len(selection.candidates)} candidate attribute(s)"
        f" ({_MISSING_TEXT.get(selection.missing, selection.missing)})",
        "",
    ]
    rows = [["#", "attribute", "relevance", "redundancy", name.lower(), "most redundant with",
             "I (bits)"]]
    for s in selection.steps:
        rows.append([str(s.position), s.attribute, format_bits(s.relevance),
                     format_bits(s.redundancy),
                     format_selection_score(s.score, selection.criterion),
                     s.most_redundant_with or "-",
                     format_bits(s.max_redundancy) if s.most_redundant_with else "-"])
    out += aligned(rows, left={1, 5}, rule=True)
    formula = ("relevance − redundancy" if selection.criterion == "mid"
               else "relevance / redundancy")
    out += ["", "relevance: I(attribute; target) = information gain, bits; redundancy: mean I with"
            f" the attributes chosen before it; {name.lower()} = {formula}."]
    return "\n".join(map(escape_text, out)) + "\n"


@click.command("redundancy")
@click.argument("source")
@rank_options
@_format_option
@click.option("--top", type=click.IntRange(min=0), default=20, show_default=True,
              help="Pairs shown in the table (0: all); csv and json list every pair.")
@click.option("--sort-pairs", "by", type=click.Choice(PAIR_METRICS),
              default="mutual_information", show_default=True,
              help="Order the pairs by this metric (descending).")
# Was the pair order's flag until issue 21; elsewhere --by means segments. Refused, with a hint.
@click.option("--by", "old_by", hidden=True)
@_batch_option
@include_flagged_option
def redundancy_command(source: str, fmt: str, top: int, by: str, old_by: str | None,
                       batch_pairs: int, include_flagged: bool, **kwargs: Any) -> None:
    """Show which attributes of SOURCE tell the same thing: mutual information between pairs.

    Computed in the database on the ranking's rows and bins; with --limit N only the top N
    ranked attributes are paired.
    """
    if old_by is not None:
        hint = (f"to order the pairs, use --sort-pairs {old_by}" if old_by in PAIR_METRICS
                else "for one segment, give its condition with --where")
        raise click.UsageError(f"redundancy takes no --by (segments); {hint}")
    result = redundancy(source, batch_pairs=batch_pairs, include_flagged=include_flagged,
                        **library_options(kwargs))
    print_statements(result.ranking.dialect, result.statements)
    print_notes(result.notes)
    if fmt == "json":
        click.echo(jsonout.dumps(result.to_dict(by), indent=2))
    elif fmt == "csv":
        # color=True: exact names (see cli.rank_command).
        click.echo(_csv(PAIR_KEYS, [p.to_dict() for p in result.matrix.ordered(by)]), nl=False,
                   color=True)
    else:
        click.echo(redundancy_table(result, top, by), nl=False)


@click.command("select")
@click.argument("source")
@rank_options
@click.option("--k", "k", type=click.IntRange(min=1), required=True,
              help="How many attributes to choose.")
@click.option("--criterion", type=click.Choice(CRITERIA), default="mid", show_default=True,
              help="mid: relevance − mean redundancy; miq: relevance / mean redundancy.")
@_format_option
@_batch_option
@include_flagged_option
def select_command(source: str, k: int, criterion: str, fmt: str, batch_pairs: int,
                   include_flagged: bool, **kwargs: Any) -> None:
    """Choose K relevant, non-redundant attributes of SOURCE by greedy mRMR (Peng et al. 2005).

    Candidates are the ranked attributes (with --limit N: the top N); each step picks the one
    with the best relevance to --target against its mean redundancy with those already chosen.
    """
    selection = select_attributes(source, k=k, criterion=criterion, batch_pairs=batch_pairs,
                                  include_flagged=include_flagged, **library_options(kwargs))
    print_statements(selection.ranking.dialect, selection.statements)
    print_notes(selection.notes)
    if fmt == "json":
        click.echo(jsonout.dumps(selection.to_dict(), indent=2))
    elif fmt == "csv":
        click.echo(_csv(STEP_KEYS, [s.to_dict() for s in selection.steps]), nl=False,
                   color=True)  # exact names (see cli.rank_command)
    else:
        click.echo(selection_table(selection), nl=False)


SELECT_COMMANDS: tuple[click.Command, ...] = (redundancy_command, select_command)
