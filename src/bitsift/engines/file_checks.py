"""A note when a CSV column read as text holds numbers (issue 21, item 3).

DuckDB's CSV reader keeps a column as text when one value does not parse: a decimal comma
(``1,5``), or ``inf`` in a float column. Ranked as text, such a column becomes a category per
distinct number, with an inflated score. One aggregate statement over the first
:data:`SAMPLE_ROWS` rows counts, per text column, the values present, those that read as a
number, and those that read as one with the comma taken as the decimal point; only those
counts leave the database, never a row.
"""

from __future__ import annotations

from collections.abc import Sequence

import duckdb
from sqlglot import exp

from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.read_options import ReadValue
from bitsift.errors import Option, Problem, flag_name
from bitsift.spec.schema import NumberHint

#: Rows read from the start of the file for the check (a LIMIT: the reader stops there).
SAMPLE_ROWS = 10_000


def _as_double(value: exp.Expression) -> exp.Expression:
    return exp.TryCast(this=value, to=exp.DataType.build("DOUBLE"))


def _named(value: exp.Expression, name: str) -> exp.Expression:
    return exp.Alias(this=value, alias=exp.to_identifier(name))


def hint_note(name: str, hint: NumberHint) -> str:
    """The note on a text column holding numbers (the CLI's spelling of the option)."""
    return Problem(None, (f"column {name!r} is read as text, but ", *hint)).render(flag_name)


def numeric_text_hints(engine: DuckDBEngine, table: exp.Expression,
                       options: Sequence[tuple[str, ReadValue]] = ()) -> dict[str, NumberHint]:
    """For each text column of ``table`` whose sampled values all read as numbers, why and the
    reader option that reads it so (the end of a sentence about the column; also in the
    refusal of such a column as ``numeric``, :attr:`bitsift.spec.schema.Column.number_hint`)."""
    try:
        relation = engine.con.sql(exp.select(exp.Star()).from_(table.copy()).limit(0)
                                  .sql("duckdb"))
        text = [n for n, t in zip(relation.columns, relation.types, strict=True)
                if str(t) == "VARCHAR"]
    except duckdb.Error:
        return {}  # the reader's own error, reported when the columns are described
    if not text:
        return {}
    measures: list[exp.Expression] = []
    for index, name in enumerate(text):
        column: exp.Expression = exp.column(exp.to_identifier(name, quoted=True))
        comma: exp.Expression = exp.Anonymous(this="replace", expressions=[
            column.copy(), exp.Literal.string(","), exp.Literal.string(".")])
        measures += [
            _named(exp.Count(this=column.copy()), f"n{index}"),
            _named(exp.Count(this=_as_double(column.copy())), f"d{index}"),
            _named(exp.Count(this=_as_double(comma)), f"c{index}"),
        ]
    sample = exp.select(exp.Star()).from_(table.copy()).limit(SAMPLE_ROWS).subquery("sample")
    try:
        row = engine.con.execute(exp.select(*measures).from_(sample).sql("duckdb")).fetchone()
    except duckdb.Error:
        return {}
    if row is None:
        return {}
    decimal_comma = ("decimal", ",") in options
    hints: dict[str, NumberHint] = {}
    read_option = Option("read_option")
    for index, name in enumerate(text):
        present, numbers, with_comma = row[3 * index:3 * index + 3]
        if not present:
            continue
        if numbers == present or (decimal_comma and with_comma == present):
            hints[name] = (f"its values (first {SAMPLE_ROWS:,} rows) all read as numbers (inf "
                           "or nan among them?): ", read_option,
                           f" double={name} reads it as a number")
        elif with_comma == present and not decimal_comma:
            hints[name] = ("its values read as numbers with a decimal comma: ", read_option,
                           " decimal=, (and delimiter=; for a semicolon file) reads it as a "
                           "number")
    return hints
