"""From a :class:`~bitsift.spec.RankSpec` to SQL text for one dialect.

Templates are written in DuckDB's dialect. Every identifier enters them quoted by
sqlglot and every literal as a sqlglot literal; the rendered text is parsed back
(it must be exactly one SELECT, or it is a bug) and generated for the target dialect.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import sqlglot
from sqlglot import exp

from bitsift.dialects import Capabilities
from bitsift.spec import RankSpec
from bitsift.templates import render
from bitsift.version import __version__

CANONICAL = "duckdb"

#: Placeholder function the templates wrap around a grouped value that must compare
#: byte-exactly; :func:`_apply_hooks` turns it into the dialect's cast (see
#: :attr:`~bitsift.dialects.Capabilities.exact_key_type`).
EXACT_KEY = "bitsift_exact_key"

#: Type families whose values are compared under a collation (so 'a' may equal 'A').
#: "other" is here because paste mode without a connection does not know the types.
COLLATED_FAMILIES: frozenset[str] = frozenset({"text", "other"})

#: Statement node types that must never appear in SQL bitsift sends.
_WRITES: tuple[type, ...] = (exp.DDL, exp.DML, exp.Command, exp.Into)


class BuildError(AssertionError):
    """The builder produced SQL that is not one read-only SELECT: a bug in bitsift."""


def quote(name: str) -> str:
    """An identifier quoted by sqlglot in the canonical dialect.

    >>> print(quote("select"), quote("x y"))
    "select" "x y"
    """
    return exp.to_identifier(name, quoted=True).sql(CANONICAL)


def literal(value: str | float | int) -> str:
    """A string or number literal rendered by sqlglot in the canonical dialect.

    >>> literal("it's")
    "'it''s'"
    """
    if isinstance(value, str):
        return exp.Literal.string(value).sql(CANONICAL)
    return exp.Literal.number(repr(float(value)) if isinstance(value, float) else value).sql(
        CANONICAL
    )


def source_sql(source: exp.Expression) -> str:
    return source.sql(CANONICAL)


def probabilities(bins: int) -> list[str]:
    """The interior quantile levels for ``bins`` equal-frequency bins, as SQL literals."""
    return [literal(round(j / bins, 12)) for j in range(1, bins)]


@dataclass(frozen=True)
class Statement:
    """SQL for one dialect, and the parsed tree it came from."""

    sql: str
    tree: exp.Expression
    dialect: str


def _exact(family: str, caps: Capabilities) -> bool:
    return caps.exact_key_type is not None and family in COLLATED_FAMILIES


def _qualified(predicate: exp.Expression, alias: str) -> exp.Expression:
    """The predicate with every column qualified by the table alias ``alias``."""
    tree = predicate.copy()
    for column in tree.find_all(exp.Column):
        column.set("table", exp.to_identifier(alias))
    return tree


def _context(spec: RankSpec, caps: Capabilities, cuts: Mapping[str, Sequence[float]] | None,
             ) -> dict[str, object]:
    attributes = []
    for index, attribute in enumerate(spec.attributes, start=1):
        column = quote(attribute.name)
        attribute_cuts: list[str] | None = None
        if attribute.kind == "numeric":
            if cuts is None:
                attribute_cuts = [
                    f"bounds.c{index}_{j}" for j in range(1, spec.options.bins)
                ]
            else:
                attribute_cuts = [literal(float(c)) for c in cuts.get(attribute.name, ())]
        attributes.append(
            {
                "index": index,
                "column": column,
                "label": literal(attribute.name),
                "kind": attribute.kind,
                "cuts": attribute_cuts,
                "exact": _exact(attribute.family, caps),
            }
        )
    numeric = [a for a in attributes if a["cuts"] is not None]
    bounds = None
    if numeric and cuts is None:
        bounds = {
            "method": caps.quantile,
            "attributes": numeric,
            "probabilities": probabilities(spec.options.bins),
        }
    return {
        "source": source_sql(spec.source),
        "target": quote(spec.target),
        "target_label": literal(spec.target),
        "target_exact": _exact(spec.target_family, caps),
        "attributes": attributes,
        "where": spec.where.expression.sql(CANONICAL) if spec.where else None,
        "qualified_where": _qualified(spec.where.expression, "src").sql(CANONICAL)
        if spec.where
        else None,
        "strategy": caps.count_strategy,
        "drop_missing": spec.options.missing == "drop",
        "bounds": bounds,
    }


def _finish(text: str, caps: Capabilities, pretty: bool) -> Statement:
    try:
        trees = sqlglot.parse(text, read=CANONICAL)
    except sqlglot.errors.SqlglotError as error:  # pragma: no cover - a template bug
        raise BuildError(f"generated SQL does not parse: {error}\n{text}") from error
    if len(trees) != 1 or not isinstance(trees[0], exp.Select):
        raise BuildError(f"generated SQL is not exactly one SELECT:\n{text}")
    parsed = trees[0]
    if any(isinstance(node, _WRITES) for node in parsed.walk()):
        raise BuildError(f"generated SQL contains a write or command:\n{text}")
    tree = _apply_hooks(parsed, caps)
    sql = tree.sql(dialect=caps.sqlglot_dialect, pretty=pretty, unsupported_level=
                   sqlglot.ErrorLevel.RAISE)
    return Statement(sql=sql, tree=tree, dialect=caps.name)


def _apply_hooks(tree: exp.Expression, caps: Capabilities) -> exp.Expression:
    """Replace the templates' placeholder functions with the dialect's own constructs.

    Done on the parsed tree because sqlglot cannot transpile them from DuckDB text: DuckDB's
    BLOB becomes ``CAST(x AS VARBINARY)`` in MySQL, which MySQL and MariaDB reject.
    """

    def hook(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Anonymous) and node.name.lower() == EXACT_KEY:
            (argument,) = node.expressions
            if caps.exact_key_type is None:
                return argument
            to = exp.DataType.build(caps.exact_key_type, dialect=caps.sqlglot_dialect)
            return exp.Cast(this=argument, to=to)
        return node

    return tree.transform(hook)


def rank_statement(
    spec: RankSpec,
    caps: Capabilities,
    cuts: Mapping[str, Sequence[float]] | None = None,
    *,
    pretty: bool = False,
    order_by: str | None = None,
) -> Statement:
    """The one statement that computes every metric of every attribute.

    With ``cuts`` (run mode, after :func:`bounds_statement`), numeric attributes are binned
    with literal boundaries; without, the statement computes the boundaries itself in a CTE
    (paste mode: self-contained).
    """
    context = _context(spec, caps, cuts)
    context["order_by_gain"] = order_by
    return _finish(render("rank.sql.j2", **context), caps, pretty)


def bounds_statement(spec: RankSpec, caps: Capabilities) -> Statement | None:
    """The pre-pass computing the quantile boundaries of the numeric attributes, if any."""
    context = _context(spec, caps, None)
    if context["bounds"] is None:
        return None
    return _finish(render("bounds_query.sql.j2", **context), caps, pretty=False)


def _comment_safe(text: str) -> str:
    return " ".join(str(text).split()).replace("*/", "* /")


def paste_statement(spec: RankSpec, caps: Capabilities, *, now: _dt.datetime | None = None) -> str:
    """A formatted, self-contained statement with a header comment of its parameters."""
    statement = rank_statement(spec, caps, None, pretty=True, order_by=spec.options.sort)
    attrs = ", ".join(f"{a.name} ({a.kind})" for a in spec.attributes)
    stamp = (now or _dt.datetime.now(_dt.UTC)).strftime("%Y-%m-%d %H:%M UTC")
    header = [
        f"bitsift {__version__} - information-gain ranking, dialect {caps.name}, {stamp}",
        f"table: {spec.source_name}",
        f"target: {spec.target}",
        f"attributes: {attrs}",
        f"missing values: {spec.options.missing}; numeric bins: {spec.options.bins} (quantile)",
    ]
    if spec.where:
        header.append(f"where: {spec.where.text}")
    header += [
        "one row per attribute (attribute_index 0 describes the target); entropies in bits.",
        "p-value: chi-square survival function of g_statistic with dof degrees of freedom,",
        "e.g. Python: scipy.stats.chi2.sf(g_statistic, dof).",
    ]
    lines = "\n".join(f"-- {_comment_safe(h)}" for h in header)
    return f"{lines}\n{statement.sql};\n"
