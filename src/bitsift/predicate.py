"""User predicates (``--where``): parsed by sqlglot and checked node by node.

A predicate is accepted only when it is one boolean expression over columns of
the table, with no subquery, no statement separator, no DDL/DML, no bind
parameters and no function sqlglot does not know (unknown functions are how
side effects such as sleeping or signalling backends would get in).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import sqlglot
from sqlglot import exp
from sqlglot.dialects.dialect import Dialect
from sqlglot.tokens import TokenType

from bitsift.errors import PredicateError, unknown_names_message
from bitsift.names import resolve_name
from bitsift.schema import Column

_FORBIDDEN: tuple[type[exp.Expression], ...] = (
    exp.Query,
    exp.Subquery,
    exp.DDL,
    exp.DML,
    exp.Command,
    exp.Placeholder,
    exp.Parameter,
    exp.Star,
    exp.Anonymous,
    exp.Into,
)
_BOOLEAN_ROOTS: tuple[type[exp.Expression], ...] = (
    exp.Predicate,
    exp.Connector,
    exp.Not,
    exp.Boolean,
)


@dataclass(frozen=True)
class Predicate:
    """A validated predicate: the user's text and its expression with quoted catalog names."""

    text: str
    expression: exp.Expression


def _root(node: exp.Expression) -> exp.Expression:
    while isinstance(node, exp.Paren):
        node = node.this
    return node


def parse_predicate(text: str, columns: Mapping[str, Column], dialect: str) -> Predicate:
    """Parse ``text`` in ``dialect`` and validate it against the table's ``columns``.

    >>> cols = {"amount": Column("amount", "float")}
    >>> parse_predicate("amount > 10", cols, "duckdb").expression.sql("duckdb")
    '"amount" > 10'
    """
    try:
        tokens = Dialect.get_or_raise(dialect).tokenize(text)
        statements = sqlglot.parse(text, read=dialect)
    except sqlglot.errors.SqlglotError as error:
        raise PredicateError(f"--where does not parse: {_first_line(error)}") from None
    statements = [s for s in statements if s is not None]
    # Even a trailing ';' is refused: a separator has no place in one condition.
    if len(statements) != 1 or any(t.token_type == TokenType.SEMICOLON for t in tokens):
        raise PredicateError("--where must be one expression (no ';' and no second statement)")
    tree = statements[0]
    for node in tree.walk():
        if isinstance(node, _FORBIDDEN):
            what = node.key if not isinstance(node, exp.Anonymous) else f"function {node.name}()"
            raise PredicateError(f"--where may not contain {what}: only conditions on columns")
    if not isinstance(_root(tree), _BOOLEAN_ROOTS):
        raise PredicateError("--where must be a condition (true or false per row), e.g. x > 3")
    catalog = list(columns)
    unknown: list[str] = []
    for column in list(tree.find_all(exp.Column)):
        if column.table:
            raise PredicateError(f"--where must use bare column names, not {column.sql(dialect)}")
        name = resolve_name(column.name, catalog)
        if name is None:
            unknown.append(column.name)
            continue
        column.replace(exp.column(exp.to_identifier(name, quoted=True)))
    if unknown:
        raise PredicateError("--where uses " + unknown_names_message("column", unknown, columns))
    return Predicate(text=text, expression=tree)


def _first_line(error: Exception) -> str:
    return str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
