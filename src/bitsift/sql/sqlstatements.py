"""The SQL layer's statements beside the ranking: quantile search (run mode), the drill-down,
redundancy pairs, a segment's predicate and the rows ``bitsift check`` compares.

Built like the ranking statement (:mod:`bitsift.sql.sqlbuild`): templates in DuckDB's dialect fed
only sqlglot-quoted identifiers and sqlglot literals, parsed back, guarded (one read-only
SELECT) and generated for the target dialect. Callers only run them and read rows.
"""

from __future__ import annotations

from collections.abc import Collection, Mapping, Sequence
from typing import Any, cast

from sqlglot import exp

from bitsift.errors import Option, Problem, SpecError
from bitsift.spec.predicate import Predicate
from bitsift.spec.rankspec import AttributeSpec, RankSpec
from bitsift.sql.dialects import Capabilities
from bitsift.sql.sqlbuild import (
    CANONICAL,
    COLLATED_FAMILIES,
    EXACT_KEY,
    Statement,
    attribute_value,
    exact_grouping,
    finish,
    grouping_key,
    literal,
    literal_cuts,
    measured_entry,
    name_derived_tables,
    parsed_value,
    qualified_where_sql,
    quote,
    source_sql,
    value_expression,
    value_literal,
    where_sql,
)
from bitsift.sql.templates import render


def literal_cut_strategy(caps: Capabilities) -> str:
    """The count strategy of a statement whose cut points are all literals (pairs, drill-down):
    ``union_scans`` differs from ``union_all`` only where a branch joins computed cut points."""
    return "union_all" if caps.count_strategy == "union_scans" else caps.count_strategy


def _quantile_context(spec: RankSpec, attributes: Sequence[dict[str, object]],
                      caps: Capabilities) -> dict[str, object]:
    return {
        "attributes": attributes,
        "source": source_sql(spec.source),
        "target": quote(spec.target),
        "target_key": grouping_key(spec.target, spec.target_family, caps),
        "where": where_sql(spec),
    }


def quantile_ranges_statement(spec: RankSpec, caps: Capabilities,
                              indexes: Sequence[int]) -> Statement:
    """Lowest and highest value of the attributes numbered ``indexes`` (1-based, in
    ``spec.attributes``) over the whole source, and its row count: step 1 of
    :mod:`bitsift.run.quantiles` and :mod:`bitsift.run.quantile_counts`."""
    attributes = [{"index": i, "raw": attribute_value(spec.attributes[i - 1])} for i in indexes]
    return finish(render("quantile_ranges.sql.j2", **_quantile_context(spec, attributes, caps)),
                  caps, pretty=False)


def bucket_expression(attribute: AttributeSpec, low: float, scale: float) -> str:
    """``FLOOR((value - low) * scale)``: the equal-width bucket of a value (canonical SQL).

    >>> from bitsift.spec.rankspec import AttributeSpec
    >>> print(bucket_expression(AttributeSpec("x", "numeric", "float"), -1.5, 0.25))
    FLOOR((CAST("x" AS DOUBLE) - (-1.5)) * 0.25)
    """
    value = exp.cast(parsed_value(attribute), exp.DataType.build("DOUBLE"))
    offset = exp.Sub(this=value, expression=exp.Paren(this=value_literal(float(low))))
    scaled = exp.Mul(this=exp.Paren(this=offset), expression=value_literal(float(scale)))
    return exp.Floor(this=scaled).sql(CANONICAL)


def _bucketed(spec: RankSpec, buckets: Mapping[int, tuple[float, float]],
              ) -> list[dict[str, object]]:
    """Template entries (index, raw value, bucket expression) of the attributes in
    ``buckets`` (index -> (low, scale))."""
    return [
        {"index": i, "raw": attribute_value(spec.attributes[i - 1]),
         "bucket": bucket_expression(spec.attributes[i - 1], low, scale)}
        for i, (low, scale) in buckets.items()
    ]


def quantile_buckets_statement(spec: RankSpec, caps: Capabilities,
                               buckets: Mapping[int, tuple[float, float]]) -> Statement:
    """Value counts per equal-width bucket: ``buckets`` maps an attribute's index to the
    (low, scale) of its buckets. Step 2 of :mod:`bitsift.run.quantiles`."""
    context = _quantile_context(spec, _bucketed(spec, buckets), caps)
    return finish(render("quantile_buckets.sql.j2", **context), caps, pretty=False)


def quantile_picks_statement(spec: RankSpec, caps: Capabilities,
                             buckets: Mapping[int, tuple[float, float]],
                             picks: Mapping[int, Collection[tuple[int, int]]]) -> Statement:
    """The values at (bucket, position) ``picks`` of each attribute, positions counted from 1
    in value order within the bucket. Step 3 of :mod:`bitsift.run.quantiles`."""
    attributes = _bucketed(spec, {i: buckets[i] for i in picks})
    for entry in attributes:
        ordered = sorted(set(picks[entry["index"]]))  # type: ignore[index]
        entry["buckets"] = [literal(b) for b in sorted({b for b, _ in ordered})]
        entry["picks"] = [(literal(b), literal(p)) for b, p in ordered]
    context = _quantile_context(spec, attributes, caps)
    return finish(render("quantile_picks.sql.j2", **context), caps, pretty=False)


def quantile_cells_statement(spec: RankSpec, caps: Capabilities,
                             buckets: Mapping[int, tuple[float, float]]) -> Statement:
    """Rows counted per (equal-width bucket, class) of each attribute in ``buckets`` (index ->
    (low, scale)), NULL values and NULL targets included: step 2 of
    :mod:`bitsift.run.quantile_counts`."""
    context = _quantile_context(spec, _bucketed(spec, buckets), caps)
    return finish(render("quantile_cells.sql.j2", **context), caps, pretty=False)


def quantile_splits_statement(spec: RankSpec, caps: Capabilities,
                              buckets: Mapping[int, tuple[float, float]],
                              picks: Mapping[int, Collection[tuple[int, int]]]) -> Statement:
    """For each (bucket, position) of ``picks``, the value there and the rows of its bucket
    below and equal to it, per class: step 3 of :mod:`bitsift.run.quantile_counts`."""
    attributes = []
    wanted = []
    for entry in _bucketed(spec, {i: buckets[i] for i in picks}):
        index = int(entry["index"])  # type: ignore[call-overload]
        by_bucket: dict[int, list[int]] = {}
        for bucket, position in sorted(set(picks[index])):
            by_bucket.setdefault(bucket, []).append(position)
        entry["buckets"] = [literal(b) for b in by_bucket]
        wanted += [(literal(index), literal(b), [literal(p) for p in ps])
                   for b, ps in by_bucket.items()]
        attributes.append(entry)
    context = _quantile_context(spec, attributes, caps)
    context["picks"] = wanted
    context["positions"] = [literal(p) for p in sorted({p for ps in picks.values() for _, p in ps})]
    return finish(render("quantile_splits.sql.j2", **context), caps, pretty=False)


#: Values of a categorical attribute the drill-down lists one by one; the rest are merged.
DEFAULT_MAX_VALUES = 20


def profile_statement(
    spec: RankSpec,
    caps: Capabilities,
    cuts: Mapping[str, Sequence[float]],
    *,
    max_values: int = DEFAULT_MAX_VALUES,
    pretty: bool = False,
) -> Statement:
    """The drill-down's statement (templates/profile.sql.j2): value x class rows of every
    attribute of ``spec``.

    ``cuts`` holds the bin boundaries of each numeric attribute (from the ranking, see
    :attr:`~bitsift.run.result.AttributeScore.cuts`); every bin of a numeric attribute is listed,
    categorical ones list their ``max_values`` most frequent values and merge the rest.
    """
    if max_values < 1:
        raise SpecError.option("max_values", f" must be at least 1, not {max_values}")
    attributes = []
    for index, attribute in enumerate(spec.attributes, start=1):
        entry = measured_entry(index, attribute, caps, cuts)
        bins = literal_cuts(attribute, cuts)
        # A numeric attribute lists every bin, and its missing values.
        entry["max_values"] = literal(max_values if bins is None else len(bins) + 2)
        attributes.append(entry)
    context = {
        "source": source_sql(spec.source),
        "target": quote(spec.target),
        "target_exact": exact_grouping(spec.target_family, caps),
        "attributes": attributes,
        "where": where_sql(spec),
        "strategy": literal_cut_strategy(caps),
        "drop_missing": spec.options.missing == "drop",
    }
    return finish(render("profile.sql.j2", **context), caps, pretty)


def refuse_segments_and_weights(spec: RankSpec) -> None:
    """Redundancy and selection measure one table by row counts: no --by, no --weight."""
    refused = [Option(name) for name, used in (("by", spec.by), ("weight", spec.weight))
               if used]
    if refused:
        listed: list[str | Option] = [refused[0]]
        for option in refused[1:]:
            listed += [" or ", option]
        raise SpecError(problems=[Problem(refused[0].name, (
            "redundancy and selection do not take ", *listed, ": they count rows of the whole "
            "table (for one segment, give its condition with ", Option("where"), ")"))])


def _checked_pairs(spec: RankSpec, pairs: Sequence[tuple[str, str]]) -> None:
    if not pairs:
        raise SpecError("no pairs of attributes to measure")
    names = {a.name for a in spec.attributes}
    unknown = sorted({n for pair in pairs for n in pair if n not in names})
    if unknown:
        raise SpecError("not attributes of this ranking: " + ", ".join(unknown))
    if any(a == b for a, b in pairs):
        raise SpecError("a pair needs two different attributes")


def pairs_statement(
    spec: RankSpec,
    caps: Capabilities,
    cuts: Mapping[str, Sequence[float]],
    pairs: Sequence[tuple[str, str]],
    *,
    pretty: bool = False,
) -> Statement:
    """The redundancy statement (templates/pairs.sql.j2) measuring ``pairs`` of ``spec``'s
    attributes, one row per pair.

    ``cuts`` holds the ranking's cut points of every numeric attribute named in a pair
    (:attr:`~bitsift.run.result.AttributeScore.cuts`). Only the attributes named in a pair are read.

    >>> from bitsift.sql.dialects import capabilities
    >>> from bitsift.spec.schema import Column
    >>> from bitsift.engines.sources import parse_table_name
    >>> from bitsift.run.api import make_options
    >>> from bitsift.spec.rankspec import resolve
    >>> cols = [Column("y", "text"), Column("a", "text"), Column("b", "float")]
    >>> spec = resolve(make_options("y"), cols, parse_table_name("t", "duckdb"), "t", "duckdb")
    >>> sql = pairs_statement(spec, capabilities("postgres"), {"b": [0.5]}, [("a", "b")]).sql
    >>> "GROUPING SETS" in sql and "< 0.5" in sql
    True
    """
    refuse_segments_and_weights(spec)
    _checked_pairs(spec, pairs)
    by_name = {a.name: a for a in spec.attributes}
    involved = list(dict.fromkeys(n for pair in pairs for n in pair))
    local = {name: i for i, name in enumerate(involved, start=1)}
    pair_rows = [
        {"index": p, "left": local[a], "right": local[b]}
        for p, (a, b) in enumerate(pairs, start=1)
    ]
    attributes = []
    for name in involved:
        # The value the ranking measured, grouped byte-exactly where the ranking groups it so.
        entry = measured_entry(local[name], by_name[name], caps, cuts)
        index = local[name]
        entry["left_pairs"] = [p["index"] for p in pair_rows if p["left"] == index]
        entry["right_pairs"] = [p["index"] for p in pair_rows if p["right"] == index]
        entry["pairs"] = [p["index"] for p in pair_rows if index in (p["left"], p["right"])]
        attributes.append(entry)
    context = {
        "source": source_sql(spec.source),
        "target": quote(spec.target),
        "attributes": attributes,
        "pairs": pair_rows,
        "qualified_where": qualified_where_sql(spec),
        "strategy": literal_cut_strategy(caps),
        "drop_missing": spec.options.missing == "drop",
    }
    return finish(render("pairs.sql.j2", **context), caps, pretty)


def segment_predicate(spec: RankSpec, segment: Mapping[str, Any]) -> Predicate:
    """The user's ``--where`` (if any) and the conditions selecting one segment's rows.

    Values are compared as the ranking grouped them: byte-exactly where the dialect's
    collation could merge 'a' and 'A' (:func:`_apply_hooks` turns the placeholder into a cast).
    """
    conditions: list[exp.Expression] = []
    for column in spec.by:
        value = segment[column.name]
        node: exp.Expression = exp.column(exp.to_identifier(column.name, quoted=True))
        if value is None:
            conditions.append(exp.Is(this=node, expression=exp.Null()))
            continue
        if column.family in COLLATED_FAMILIES:
            node = exp.Anonymous(this=EXACT_KEY, expressions=[node])
        conditions.append(exp.EQ(this=node, expression=value_literal(value)))
    if spec.where is not None:
        conditions.insert(0, exp.Paren(this=spec.where.expression.copy()))
    text = " AND ".join(c.sql(CANONICAL) for c in conditions)
    return Predicate(text=text, expression=cast(exp.Expression, exp.and_(*conditions)))


def rows_statement(spec: RankSpec, caps: Capabilities, limit: int | None = None) -> Statement:
    """The target and every attribute as ranked (a date's epoch seconds or part rather than
    the date), row by row, at most ``limit`` rows: what ``bitsift check`` compares."""
    values = [exp.column(exp.to_identifier(spec.target, quoted=True)),
              *(value_expression(a, caps) for a in spec.attributes)]
    query = exp.select(*values).from_(spec.source.copy())
    if spec.where is not None:
        query = query.where(spec.where.expression.copy())
    if limit is not None:
        query = query.limit(limit)
    name_derived_tables(query)
    return Statement(sql=query.sql(caps.sqlglot_dialect), tree=query, dialect=caps.name)


def binned_target_source(spec: RankSpec, columns: Sequence[str], cuts: Sequence[float],
                         labels: Sequence[str]) -> exp.Expression:
    """``(SELECT <every column but the target>, CASE ... END AS <target> FROM <table>)``: a
    numeric target as its bin label (``--target-bins``, :mod:`bitsift.run.target_bins`); NULL
    stays NULL, NaN lands in the last bin like an attribute's. Cut points and labels enter as
    typed sqlglot literals, names quoted by sqlglot; the derived table is named by
    :func:`~bitsift.sql.sqlbuild.finish`."""
    target = exp.column(exp.to_identifier(spec.target, quoted=True))
    case = exp.Case().when(exp.Is(this=target.copy(), expression=exp.Null()), exp.Null())
    for cut, label in zip(cuts, labels, strict=False):
        below = exp.LT(this=exp.cast(target.copy(), exp.DataType.build("DOUBLE")),
                       expression=value_literal(float(cut)))
        case = case.when(below, value_literal(label))
    case = case.else_(value_literal(labels[-1]))
    selected = [exp.column(exp.to_identifier(name, quoted=True)) for name in columns
                if name != spec.target]
    query = exp.select(*selected, exp.alias_(case, exp.to_identifier(spec.target, quoted=True)))
    return exp.Subquery(this=query.from_(spec.source.copy()))
