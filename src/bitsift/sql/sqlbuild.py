"""From a :class:`~bitsift.spec.rankspec.RankSpec` to SQL text for one dialect.

Templates are written in DuckDB's dialect. Every identifier enters them quoted by
sqlglot and every literal as a sqlglot literal; the rendered text is parsed back
(it must be exactly one SELECT, or it is a bug) and generated for the target dialect.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Collection, Mapping, Sequence
from dataclasses import dataclass

import sqlglot
from sqlglot import exp

from bitsift.errors import SpecError
from bitsift.jsonout import NON_FINITE
from bitsift.spec.rankspec import AttributeSpec, RankSpec
from bitsift.sql.dialects import Capabilities
from bitsift.sql.templates import render

CANONICAL = "duckdb"

#: Placeholder function the templates wrap around a grouped value that must compare
#: byte-exactly; :func:`_apply_hooks` turns it into the dialect's cast (see
#: :attr:`~bitsift.sql.dialects.Capabilities.exact_key_type`).
EXACT_KEY = "bitsift_exact_key"
#: Placeholder functions for a date's epoch seconds and one of its parts (``--numeric``,
#: ``--date-part``); :func:`_apply_hooks` writes them with the dialect's
#: :class:`~bitsift.sql.dialects.DateFunctions`.
EPOCH = "bitsift_epoch"
DATE_PART = "bitsift_date_part"

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


def value_literal(value: str | float | int | bool | None) -> exp.Expression:
    """A data value (segment value, category, cut point) as a typed sqlglot literal.

    NaN and the infinities have no numeric literal: ``repr`` gives ``nan``/``inf``, which SQL
    reads as column names. They become ``CAST('NaN' AS DOUBLE)`` and the like.

    >>> [value_literal(v).sql("postgres") for v in (float("inf"), -1.5, True, "it's", None)]
    ["CAST('Infinity' AS DOUBLE PRECISION)", '-1.5', 'TRUE', "'it''s'", 'NULL']
    """
    if value is None:
        return exp.Null()
    if isinstance(value, bool):
        return exp.Boolean(this=value)
    if isinstance(value, int):
        return exp.Literal.number(str(value))
    if isinstance(value, float):
        if not math.isfinite(value):
            text = NON_FINITE[repr(value)]  # the spellings every IEEE engine reads
            return exp.cast(exp.Literal.string(text), exp.DataType.build("DOUBLE"))
        return exp.Literal.number(repr(value))
    return exp.Literal.string(str(value))


def literal(value: str | float | int) -> str:
    """A string or number literal rendered by sqlglot in the canonical dialect.

    >>> literal("it's"), literal(float("-inf"))
    ("'it''s'", "CAST('-Infinity' AS DOUBLE)")
    """
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)  # digits, with a sign: what sqlglot writes, without its cost
    return value_literal(value).sql(CANONICAL)


def source_sql(source: exp.Expression) -> str:
    return source.sql(CANONICAL)


def quantile_levels(bins: int) -> list[float]:
    """The interior quantile levels for ``bins`` equal-frequency bins."""
    return [round(j / bins, 12) for j in range(1, bins)]


def probabilities(bins: int) -> list[str]:
    """:func:`quantile_levels` as SQL literals."""
    return [literal(level) for level in quantile_levels(bins)]


@dataclass(frozen=True)
class Statement:
    """SQL for one dialect, and the parsed tree it came from (as the dialect's generator left
    it: generating may rewrite parts of it in place)."""

    sql: str
    tree: exp.Expression
    dialect: str


def exact_grouping(family: str, caps: Capabilities) -> bool:
    return caps.exact_key_type is not None and family in COLLATED_FAMILIES


def _qualified(predicate: exp.Expression, alias: str) -> exp.Expression:
    """The predicate with every column qualified by the table alias ``alias``."""
    tree = predicate.copy()
    for column in tree.find_all(exp.Column):
        column.set("table", exp.to_identifier(alias))
    return tree


def cut_count(attribute: AttributeSpec) -> int:
    """How many cut points the database computes for a numeric attribute (before duplicates
    are merged): bins - 1 for quantile and equal-width, one for best-split."""
    if attribute.binning == "best-split":
        return 1
    return (attribute.bins or 2) - 1


def attribute_value(attribute: AttributeSpec, alias: str | None = None) -> str:
    """The SQL (canonical dialect) of the value an attribute is ranked by: its column, a date's
    epoch seconds (``--numeric``) or one of its parts (``--date-part``), the latter two as
    placeholder functions that :func:`_apply_hooks` turns into the dialect's own SQL.

    >>> from bitsift.spec.rankspec import AttributeSpec
    >>> print(attribute_value(AttributeSpec("sown on", "categorical", "date", date_part="month"),
    ...                       "src"))
    BITSIFT_DATE_PART(src."sown on", 'month')
    """
    table = exp.to_identifier(alias) if alias else None
    node: exp.Expression = exp.column(exp.to_identifier(attribute.name, quoted=True), table=table)
    if attribute.epoch:
        node = exp.Anonymous(this=EPOCH, expressions=[node])
    elif attribute.date_part:
        node = exp.Anonymous(this=DATE_PART, expressions=[node,
                                                          exp.Literal.string(attribute.date_part)])
    return node.sql(CANONICAL)


def parsed_value(attribute: AttributeSpec) -> exp.Expression:
    """:func:`attribute_value` as a tree of its own, placeholders kept (canonical dialect)."""
    return _parsed(attribute_value(attribute), CANONICAL).copy()


def value_expression(attribute: AttributeSpec, caps: Capabilities) -> exp.Expression:
    """:func:`attribute_value` as a tree ready for ``caps``' dialect (placeholders replaced),
    for statements built as trees (``bitsift check`` pulls the values it compares)."""
    return _apply_hooks(_parsed(attribute_value(attribute), CANONICAL), caps)  # a copy


def temporal_value(value: exp.Expression, part: str, caps: Capabilities) -> exp.Expression:
    """``value`` (a date or timestamp) as epoch seconds (``part="epoch"``) or one of its parts,
    from the dialect's :class:`~bitsift.sql.dialects.DateFunctions` (SQL with ``x`` for the
    value)."""
    pattern = _parsed(getattr(caps.dates, part), caps.sqlglot_dialect)

    def put_value(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Column) and node.name == "x" and not node.table:
            return value.copy()
        return node

    return pattern.transform(put_value)


@functools.cache
def _parsed(sql: str, dialect: str) -> exp.Expression:
    # A statement may hold the same date function dozens of times: parse each pattern once
    # (transform() copies the cached tree, which stays untouched).
    tree = sqlglot.parse_one(sql, read=dialect or None)
    assert isinstance(tree, exp.Expression), sql
    return tree


def _computed_cuts(index: int, attribute: AttributeSpec) -> dict[str, object]:
    """Template fields of a numeric attribute whose cut points the statement computes."""
    if attribute.binning == "mdl":
        raise SpecError(
            f"--binning mdl ({attribute.name!r}) needs the data: its cut points come from a "
            "Python step (Fayyad & Irani's MDL on a histogram the database computes), so they "
            "cannot be computed inside one pasted statement. Give `bitsift sql` a SOURCE to "
            "compute them and inline them, or choose best-split, quantile or equal-width"
        )
    count = cut_count(attribute)
    return {
        "method": attribute.binning or "quantile",
        "bins": attribute.bins,
        "cut_count": count,
        "probabilities": probabilities(attribute.bins or 2),
        "cuts": [f"bounds.c{index}_{j}" for j in range(1, count + 1)],
    }


def _bounds(computed: Sequence[dict[str, object]], spec: RankSpec, caps: Capabilities,
            ) -> dict[str, object] | None:
    """The bounds CTEs' context: which attributes an aggregate, a window or a split serves."""
    if not computed:
        return None
    aggregate = caps.quantile != "window"
    return {
        "quantile": caps.quantile,
        "aggregated": [a for a in computed if a["method"] == "equal-width"
                       or (a["method"] == "quantile" and aggregate)],
        "windowed": [a for a in computed if a["method"] == "quantile" and not aggregate],
        "splits": [a for a in computed if a["method"] == "best-split"],
        "target_key": grouping_key(spec.target, spec.target_family, caps),
    }


def grouping_key(name: str, family: str, caps: Capabilities) -> str:
    """A column as the templates group it (canonical SQL): wrapped in the byte-exact
    placeholder where :func:`exact_grouping` says so."""
    column: exp.Expression = exp.column(exp.to_identifier(name, quoted=True))
    if exact_grouping(family, caps):
        column = exp.Anonymous(this=EXACT_KEY, expressions=[column])
    return column.sql(CANONICAL)


def measured_entry(index: int, attribute: AttributeSpec, caps: Capabilities,
              cuts: Mapping[str, Sequence[float]] | None = None) -> dict[str, object]:
    """The template entry every counting statement shares for one attribute: its number, the
    value measured (a column, a date's epoch seconds or part; ``value`` qualified by ``src``,
    ``raw`` not), whether it is grouped byte-exactly (:func:`exact_grouping`) and, for a numeric
    attribute named in ``cuts``, its literal cut points."""
    return {
        "index": index,
        "value": attribute_value(attribute, "src"),
        "raw": attribute_value(attribute),
        "cuts": literal_cuts(attribute, cuts) if cuts is not None else None,
        "exact": exact_grouping(attribute.family, caps) and not attribute.date_part,
    }


def literal_cuts(attribute: AttributeSpec, cuts: Mapping[str, Sequence[float]],
                  ) -> list[str] | None:
    """A numeric attribute's cut points (from the ranking) as literals; None if categorical."""
    if attribute.kind != "numeric":
        return None
    if attribute.name not in cuts:
        raise SpecError(f"no cut points for the numeric attribute {attribute.name!r}")
    return [literal(float(c)) for c in cuts[attribute.name]]


def where_sql(spec: RankSpec) -> str | None:
    """The user's ``--where`` (canonical dialect), columns unqualified."""
    return spec.where.expression.sql(CANONICAL) if spec.where else None


def qualified_where_sql(spec: RankSpec) -> str | None:
    """The user's ``--where`` with its columns qualified by ``src``."""
    return _qualified(spec.where.expression, "src").sql(CANONICAL) if spec.where else None


def _context(spec: RankSpec, caps: Capabilities, cuts: Mapping[str, Sequence[float]] | None,
             ) -> dict[str, object]:
    """The ranking template's context. Numeric attributes named in ``cuts`` are binned at
    those literal cut points; the others' cut points are computed by the statement itself."""
    attributes = []
    computed = []
    for index, attribute in enumerate(spec.attributes, start=1):
        entry = measured_entry(index, attribute, caps)
        entry.update({"column": quote(attribute.name), "label": literal(attribute.name),
                      "kind": attribute.kind})
        if attribute.kind == "numeric":
            if cuts is not None and attribute.name in cuts:
                entry["cuts"] = [literal(float(c)) for c in cuts[attribute.name]]
            else:
                entry.update(_computed_cuts(index, attribute))
                computed.append(entry)
        attributes.append(entry)
    bounds = _bounds(computed, spec, caps)
    return {
        "source": source_sql(spec.source),
        "target": quote(spec.target),
        "target_label": literal(spec.target),
        "target_exact": exact_grouping(spec.target_family, caps),
        "attributes": attributes,
        "where": where_sql(spec),
        "qualified_where": qualified_where_sql(spec),
        "strategy": caps.count_strategy,
        "shared": caps.shared_ctes,
        "drop_missing": spec.options.missing == "drop",
        "bounds": bounds,
        "z": literal(spec.options.z),
    }


def finish(text: str, caps: Capabilities, pretty: bool) -> Statement:
    try:
        trees = sqlglot.parse(text, read=CANONICAL)
    except sqlglot.errors.SqlglotError as error:  # pragma: no cover - a template bug
        raise BuildError(f"generated SQL does not parse: {error}\n{text}") from error
    if len(trees) != 1 or not isinstance(trees[0], exp.Select):
        raise BuildError(f"generated SQL is not exactly one SELECT:\n{text}")
    parsed = trees[0]
    if any(isinstance(node, _WRITES) for node in parsed.walk()):
        raise BuildError(f"generated SQL contains a write or command:\n{text}")
    name_derived_tables(parsed)
    # The tree is this call's own: neither the hooks nor the generator need to copy it first
    # (two deep copies were a third of the Python time of a counted ranking).
    tree = _apply_hooks(parsed, caps, copy=False)
    sql = tree.sql(dialect=caps.sqlglot_dialect, pretty=pretty, copy=False,
                   unsupported_level=sqlglot.ErrorLevel.RAISE)
    return Statement(sql=sql, tree=tree, dialect=caps.name)


#: The name given to a derived table read without one (a ``--target-bins`` source).
DERIVED_SOURCE = "bitsift_source"


def name_derived_tables(tree: exp.Expression) -> None:
    """Name every unnamed derived table in a FROM or JOIN: PostgreSQL and MySQL refuse a
    subquery without a name, and a ``--target-bins`` source is one (templates write
    ``FROM {{ source }}`` without naming it)."""
    for node in list(tree.find_all(exp.Subquery)):
        if not node.alias and isinstance(node.parent, exp.From | exp.Join):
            node.set("alias", exp.TableAlias(this=exp.to_identifier(DERIVED_SOURCE)))


def _apply_hooks(tree: exp.Expression, caps: Capabilities, copy: bool = True) -> exp.Expression:
    """Replace the templates' placeholder functions with the dialect's own constructs.

    Done on the parsed tree because sqlglot cannot transpile them from DuckDB text: DuckDB's
    BLOB becomes ``CAST(x AS VARBINARY)`` in MySQL, which MySQL and MariaDB reject.
    """

    def hook(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Anonymous) and node.name.lower() == EPOCH:
            return temporal_value(node.expressions[0], "epoch", caps)
        if isinstance(node, exp.Anonymous) and node.name.lower() == DATE_PART:
            value, part = node.expressions
            return temporal_value(value, part.name, caps)
        if isinstance(node, exp.Anonymous) and node.name.lower() == EXACT_KEY:
            argument: exp.Expression  # the list is typed Any
            (argument,) = node.expressions
            if caps.exact_key_type is None:
                return argument
            to = exp.DataType.build(caps.exact_key_type, dialect=caps.sqlglot_dialect)
            return exp.Cast(this=argument, to=to)
        return node

    return tree.transform(hook, copy=copy)


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
    context.update(_segments_and_weight(spec, caps))
    context["order_by_gain"] = order_by
    return finish(render("rank.sql.j2", **context), caps, pretty)


def value_counts_statement(spec: RankSpec, caps: Capabilities, index: int,
                           cuts: Mapping[str, Sequence[float]], limit: int) -> Statement:
    """One attribute's (value, class) counts, at most ``limit`` cells (templates/
    value_counts.sql.j2): attribute ``index`` (1-based, in ``spec.attributes``) keyed and
    binned at its literal ``cuts`` as :func:`rank_statement` does, rows without a value or a
    target included. Unsegmented and unweighted specs only (:mod:`bitsift.run.value_counts`).
    """
    if spec.by or spec.weight:
        raise BuildError("per-attribute counts are for unsegmented, unweighted rankings")
    attribute = spec.attributes[index - 1]
    return finish(render(
        "value_counts.sql.j2",
        a=measured_entry(index, attribute, caps, cuts),
        source=source_sql(spec.source),
        target=quote(spec.target),
        target_exact=exact_grouping(spec.target_family, caps),
        qualified_where=qualified_where_sql(spec),
        limit=literal(limit),
    ), caps, pretty=False)


def _segments_and_weight(spec: RankSpec, caps: Capabilities) -> dict[str, object]:
    """The ranking template's segment columns (``--by``) and weight column (``--weight``).

    Segment values are grouped byte-exactly like attribute values (see :func:`exact_grouping`).
    """
    return {
        "segments": [
            {"index": index, "column": quote(s.name), "exact": exact_grouping(s.family, caps)}
            for index, s in enumerate(spec.by, start=1)
        ],
        "weight": quote(spec.weight) if spec.weight else None,
    }


def bounds_statement(spec: RankSpec, caps: Capabilities, skip: Collection[str] = (),
                     ) -> Statement | None:
    """The pre-pass computing the cut points of the numeric attributes binned in SQL
    (quantile, equal-width, best-split; not mdl, see :func:`histogram_statement`), if any.
    ``skip``: attributes whose cut points are found otherwise (:mod:`bitsift.run.quantiles`)."""
    known = {a.name: () for a in spec.numeric if a.binning == "mdl" or a.name in skip}
    context = _context(spec, caps, known)
    if context["bounds"] is None:
        return None
    return finish(render("bounds_query.sql.j2", **context), caps, pretty=False)


def histogram_statement(spec: RankSpec, caps: Capabilities, resolution: int) -> Statement | None:
    """The (fine bin x class) histogram of the attributes binned by MDL, if any (see
    templates/histogram.sql.j2): at most ``resolution`` fine bins per attribute."""
    attributes = [
        {"index": index, "raw": attribute_value(attribute)}
        for index, attribute in enumerate(spec.attributes, start=1)
        if attribute.kind == "numeric" and attribute.binning == "mdl"
    ]
    if not attributes:
        return None
    context = {
        "attributes": attributes,
        "source": source_sql(spec.source),
        "target": quote(spec.target),
        "target_key": grouping_key(spec.target, spec.target_family, caps),
        "where": where_sql(spec),
        "resolution": literal(int(resolution)),
    }
    return finish(render("histogram.sql.j2", **context), caps, pretty=False)
