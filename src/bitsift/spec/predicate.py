"""User predicates (``--where``): parsed by sqlglot and checked node by node.

A predicate is accepted only when it is one boolean expression over columns of
the table, with no subquery, no statement separator, no DDL/DML, no bind
parameters and no function sqlglot does not know (unknown functions are how
side effects such as sleeping or signalling backends would get in).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import cast

import sqlglot
from sqlglot import Token, TokenType, exp
from sqlglot.dialects.dialect import Dialect

from bitsift.errors import PredicateError, first_line, unknown_names_message
from bitsift.names import resolve_name
from bitsift.spec.schema import Column

#: exp.Expr: sqlglot's typed base, which its trait classes (Query, DDL, DML) derive from.
_FORBIDDEN: tuple[type[exp.Expr], ...] = (
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
    exp.SessionParameter,
    exp.Introducer,
)
#: What the messages call the forbidden things whose sqlglot key says little to a user.
_DESCRIPTIONS: dict[str, str] = {
    "sessionparameter": "a session variable (@@name)",
    "parameter": "a variable or parameter (@name)",
    "introducer": "a character set introducer (_utf8'...'; write the string alone)",
}
#: Tokens that are never part of a condition on columns, whatever a dialect's parser makes of
#: them: DuckDB reads ``@@version`` as abs(abs("version")), a column that may well exist.
_FORBIDDEN_TOKENS: dict[TokenType, str] = {
    TokenType.PARAMETER: "a variable or parameter (@name; for an absolute value write abs(x))",
    TokenType.SESSION_PARAMETER: _DESCRIPTIONS["sessionparameter"],
    TokenType.INTRODUCER: _DESCRIPTIONS["introducer"],
}
#: Deepest nesting of a predicate (parentheses, NOT, function calls): the ranking statement
#: embeds it a few levels further down, and sqlglot's recursive parser and generator hit
#: Python's recursion limit near 40 levels in all. A chain of AND/OR counts once.
MAX_NESTING = 32
_BOOLEAN_ROOTS: tuple[type[exp.Expr], ...] = (
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
    except sqlglot.errors.SqlglotError as error:
        raise PredicateError.option("where", f" does not parse: {first_line(error)}") from None
    _check_tokens(tokens)
    try:
        statements = sqlglot.parse(text, read=dialect)
    except sqlglot.errors.SqlglotError as error:
        raise PredicateError.option("where", f" does not parse: {first_line(error)}") from None
    except RecursionError:
        raise _too_deep() from None
    statements = [s for s in statements if s is not None]
    # Even a trailing ';' is refused: a separator has no place in one condition.
    if len(statements) != 1 or any(t.token_type == TokenType.SEMICOLON for t in tokens):
        raise PredicateError.option(
            "where", " must be one expression (no ';' and no second statement)")
    # parse() is typed with sqlglot's Expr base; every node it builds is an exp.Expression.
    tree = cast(exp.Expression, statements[0])
    for node in tree.walk():
        if isinstance(node, _FORBIDDEN):
            what = (f"function {node.name}()" if isinstance(node, exp.Anonymous)
                    else _DESCRIPTIONS.get(node.key, node.key))
            raise PredicateError.option(
                "where", f" may not contain {what}: only conditions on columns")
    if _nesting(tree) > MAX_NESTING:
        raise _too_deep()
    if not isinstance(_root(tree), _BOOLEAN_ROOTS):
        raise PredicateError.option(
            "where", " must be a condition (true or false per row), e.g. x > 3")
    catalog = list(columns)
    unknown: list[str] = []
    for column in list(tree.find_all(exp.Column)):
        if column.table:
            raise PredicateError.option(
                "where", f" must use bare column names, not {column.sql(dialect)}")
        name = resolve_name(column.name, catalog)
        if name is None:
            unknown.append(column.name)
            continue
        column.replace(exp.column(exp.to_identifier(name, quoted=True)))
    if unknown:
        raise PredicateError.option("where",
                                    " uses " + unknown_names_message("column", unknown, columns))
    try:
        # The statement is generated this strictly later: refuse here, with the reason.
        tree.sql(dialect, unsupported_level=sqlglot.ErrorLevel.RAISE)
    except sqlglot.errors.UnsupportedError as error:
        raise PredicateError.option(
            "where", f" uses what {dialect} cannot run: {first_line(error)}") from None
    return Predicate(text=text, expression=tree)


def _check_tokens(tokens: list[Token]) -> None:
    """Refuse what no condition on columns holds, and nesting too deep to parse, by tokens:
    before the recursive parser sees thousands of parentheses."""
    depth = 0
    for token in tokens:
        if token.token_type in _FORBIDDEN_TOKENS:
            raise PredicateError.option(
                "where", f" may not contain {_FORBIDDEN_TOKENS[token.token_type]}:"
                " only conditions on columns")
        if token.token_type == TokenType.L_PAREN:
            depth += 1
            if depth > MAX_NESTING:
                raise _too_deep()
        elif token.token_type == TokenType.R_PAREN:
            depth -= 1


def _nesting(tree: exp.Expression) -> int:
    """How deep ``tree`` nests, counted without recursion; AND/OR chains count once."""
    deepest = 0
    pending = [(tree, 1)]
    while pending:
        node, depth = pending.pop()
        deepest = max(deepest, depth)
        for child in node.iter_expressions():
            chained = isinstance(child, exp.Connector) and type(child) is type(node)
            pending.append((child, depth if chained else depth + 1))
    return deepest


def _too_deep() -> PredicateError:
    return PredicateError.option(
        "where", f" nests more than {MAX_NESTING} levels (parentheses, NOT, function calls):"
        " write it flatter, e.g. with IN (...) or AND/OR chains")
