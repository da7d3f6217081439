"""The ranking statement as history rows: one SELECT whose columns are a history table's.

A scheduler that appends this SELECT's rows to a job's history table writes what ``bitsift
run`` writes: one row per segment x attribute, in the columns the caller's schema lists
(``columns``, in its order). Each column comes from one of three places, by name:

- ``constants``: values from the job file (job, ranking, options, version...), as typed
  sqlglot literals;
- the few columns computed here: ``run_at`` (the dialect's UTC clock, read once by the
  statement), ``run_id`` (its text form), ``segment`` (the segment values as compact JSON),
  ``position`` (a window over the sort metric, ties by name), ``classes`` (the target's),
  ``flags`` (the trust flags' rules, comma-separated), ``p_value`` (NULL unless the dialect
  has a chi-square survival function, :attr:`~bitsift.sql.dialects.Capabilities.chi2_survival`)
  and ``cut_points`` (the JSON a run stores, for the attributes binned at literal cut points;
  NULL where the statement computes them itself);
- every other column: the ranking statement's output column of that name, cast to the column's
  type family. A metric added to the ranking statement and to the schema flows through.

A column found in none of them is NULL when the schema lets it be, else a :class:`BuildError`.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Protocol

import sqlglot
from sqlglot import exp

from bitsift import jsonout
from bitsift.numformat import cuts_json
from bitsift.spec.rankspec import RankSpec, Thresholds
from bitsift.sql.dialects import Capabilities
from bitsift.sql.sqlbuild import BuildError, Statement, rank_statement, value_literal

#: The canonical (DuckDB) type of each history type family; sqlglot spells it per dialect.
FAMILY_TYPES: dict[str, str] = {"text": "VARCHAR", "integer": "BIGINT", "float": "DOUBLE",
                                "timestamp": "TIMESTAMP"}
#: The trust flags in the order bitsift lists them (:func:`bitsift.run.metrics.flags_for`).
FLAG_ORDER: tuple[str, ...] = ("id_like", "constant", "near_perfect", "high_cardinality")

#: Decimal places the sort metric is rounded to before ordering: the run's rounding,
#: :data:`bitsift.run.metrics.RESOLUTION_DIGITS` (a later stage: tests check they agree).
SNAP_PLACES = 12

_ROWS, _TARGET, _CLOCK = "history_rows", "history_target", "history_clock"
_OUT = "history_out"
_TARGET_CLASSES = "history_target_classes"


class HistoryField(Protocol):
    """What this module needs of a history column (jobs.history.HistoryColumn has it)."""

    @property
    def name(self) -> str: ...
    @property
    def family(self) -> str: ...
    @property
    def nullable(self) -> bool: ...


def _col(name: str, table: str = "h") -> exp.Column:
    return exp.column(exp.to_identifier(name, quoted=True), table=exp.to_identifier(table))


def _cast(node: exp.Expr, family: str) -> exp.Expr:
    return exp.Cast(this=node, to=exp.DataType.build(FAMILY_TYPES[family]))


def _concat(*parts: exp.Expr) -> exp.Expr:
    joined = parts[0]
    for part in parts[1:]:
        joined = exp.DPipe(this=joined, expression=part, safe=True)
    return joined


def _text(value: str) -> exp.Expr:
    return exp.Literal.string(value)


def flags_expression(thresholds: Thresholds) -> exp.Expr:
    """The trust flags of one history row, comma-separated (empty when none), by the rules of
    :func:`bitsift.run.metrics.flags_for` with the same ``thresholds``."""
    distinct, rows = _col("distinct_values"), _col("rows_used")
    gain, entropy = _col("information_gain"), _col("target_entropy")
    rules: dict[str, exp.Expr] = {
        "id_like": exp.and_(
            exp.GT(this=distinct.copy(), expression=value_literal(thresholds.id_min_values)),
            exp.GTE(this=_cast(distinct.copy(), "float"),
                    expression=exp.Mul(this=value_literal(float(thresholds.id_like_ratio)),
                                       expression=rows))),
        "constant": exp.LTE(this=distinct.copy(), expression=value_literal(1)),
        "near_perfect": exp.and_(
            exp.GT(this=entropy.copy(), expression=value_literal(0)),
            exp.GTE(this=gain, expression=exp.Mul(
                this=value_literal(float(thresholds.near_perfect_ratio)),
                expression=entropy.copy()))),
        "high_cardinality": exp.GT(this=distinct.copy(),
                                   expression=value_literal(thresholds.high_cardinality)),
    }
    pieces = [exp.Case(ifs=[exp.If(this=rules[name], true=_text("," + name))],
                       default=_text("")) for name in FLAG_ORDER]
    # Every piece starts with a comma: the first one is cut off (nothing to cut when empty).
    return exp.Substring(this=exp.Paren(this=_concat(*pieces)), start=value_literal(2))


def _segment_value(index: int, family: str) -> exp.Expr:
    """One segment value as JSON text (see :func:`segment_expression`)."""
    value = _col(f"segment_{index}")
    if family in ("integer", "decimal", "float"):
        shown = _cast(value, "text")
    elif family == "boolean":
        shown = exp.Case(ifs=[exp.If(this=value, true=_text("true"))], default=_text("false"))
    else:
        escaped: exp.Expr = _cast(value, "text")
        for old, new in (("\\", "\\\\"), ('"', '\\"')):
            escaped = exp.func("REPLACE", escaped, _text(old), _text(new))
        shown = _concat(_text('"'), escaped, _text('"'))
    return exp.Case(ifs=[exp.If(this=exp.Is(this=value.copy(), expression=exp.Null()),
                                true=_text("null"))], default=shown)


def segment_expression(spec: RankSpec) -> exp.Expr:
    """The history's ``segment``: ``{"name":value,...}`` in ``--by`` order (``''`` without
    segments), as :func:`bitsift.jobs.history.segment_json` writes it for text, integer,
    boolean and date values without control characters; other values are the engine's text."""
    if not spec.by:
        return _text("")
    parts: list[exp.Expr] = []
    for index, column in enumerate(spec.by, start=1):
        key = jsonout.dumps(column.name, ensure_ascii=False)
        parts += [_text(("{" if index == 1 else ",") + key + ":"),
                  _segment_value(index, column.family)]
    return _concat(*parts, _text("}"))


def _name_order(spec: RankSpec) -> exp.Expr:
    """Each attribute's place in name order (Python's, code point by code point): the
    tie-breaker of :func:`bitsift.run.metrics.sort_scores`, whatever the engine's collation."""
    ordered = sorted(range(1, len(spec.attributes) + 1), key=lambda i: spec.attributes[i - 1].name)
    place = {index: rank for rank, index in enumerate(ordered, start=1)}
    return exp.Case(this=_col("attribute_index"),
                    ifs=[exp.If(this=value_literal(i), true=value_literal(place[i]))
                         for i in sorted(place)])


def cut_points_expression(spec: RankSpec, cuts: Mapping[str, Sequence[float]] | None
                          ) -> exp.Expr:
    """The history's ``cut_points``: per attribute binned at literal cut points (``cuts``), the
    JSON array a run stores (:func:`bitsift.numformat.cuts_json`, ISO 8601 for dated ones); NULL
    for the others: categorical ones, and numeric ones whose cut points the statement computes
    (their JSON would need the engine to write doubles as Python does)."""
    known = [(index, cuts_json(cuts[a.name], a.family if a.epoch else None))
             for index, a in enumerate(spec.attributes, start=1)
             if a.kind == "numeric" and cuts is not None and a.name in cuts]
    if not known:
        return _cast(exp.Null(), "text")
    return exp.Case(this=_col("attribute_index"),
                    ifs=[exp.If(this=value_literal(i), true=_text(text)) for i, text in known])


def _segments(spec: RankSpec, table: str = "h") -> list[exp.Expr]:
    return [_col(f"segment_{i}", table) for i in range(1, len(spec.by) + 1)]


def history_select(spec: RankSpec, caps: Capabilities, columns: Sequence[HistoryField],
                   constants: Mapping[str, str | int], *,
                   cuts: Mapping[str, Sequence[float]] | None = None,
                   pretty: bool = True) -> Statement:
    """The ranking of ``spec`` as history rows (see the module's docstring), for ``caps``."""
    ranking = rank_statement(spec, caps, cuts, pretty=False)
    tree = ranking.tree
    assert isinstance(tree, exp.Select)
    steps = tree.args.get("with_")
    tree.set("with_", None)
    tree.set("order", None)
    clock = sqlglot.parse_one(caps.utc_now, read=caps.sqlglot_dialect)
    target_classes = exp.Window(
        this=exp.func("MAX", exp.Case(
            ifs=[exp.If(this=exp.EQ(this=_col("attribute_index", "r"), expression=value_literal(0)),
                        true=_col("classes", "r"))])),
        partition_by=_segments(spec, "r") or None,
    )
    with_target = (exp.select(exp.Star(), target_classes.as_(_TARGET_CLASSES))
                   .from_(exp.to_table(_ROWS).as_("r")))
    # exp.Star() alone would lose the table: every column of r, then the target's classes.
    with_target.expressions[0] = exp.Column(this=exp.Star(), table=exp.to_identifier("r"))
    outputs = set(tree.named_selects)
    computed = {**_computed(spec, caps), "cut_points": cut_points_expression(spec, cuts)}
    selected = []
    for column in columns:
        node: exp.Expr
        if column.name in constants:
            node = value_literal(constants[column.name])
        elif column.name in computed:
            node = computed[column.name]
        elif column.name in outputs:
            node = _cast(_col(column.name), column.family)
        elif column.nullable:
            node = _cast(exp.Null(), column.family)
        else:
            raise BuildError(f"history column {column.name} has no source in the ranking")
        selected.append(exp.alias_(node, exp.to_identifier(column.name, quoted=True)))
    ctes = [*(steps.expressions if steps else []),
            exp.CTE(this=tree, alias=exp.TableAlias(this=exp.to_identifier(_ROWS))),
            exp.CTE(this=with_target, alias=exp.TableAlias(this=exp.to_identifier(_TARGET))),
            exp.CTE(this=exp.select(exp.alias_(clock, "run_at")),
                    alias=exp.TableAlias(this=exp.to_identifier(_CLOCK)))]
    outer = (exp.select(*selected)
             .from_(exp.to_table(_TARGET).as_("h"))
             .join(exp.to_table(_CLOCK).as_("c"), join_type="cross")
             .where(exp.GT(this=_col("attribute_index"), expression=value_literal(0))))
    if spec.options.limit:
        # The top ``limit`` of each ranking, as a run keeps them.
        ctes.append(exp.CTE(this=outer, alias=exp.TableAlias(this=exp.to_identifier(_OUT))))
        outer = (exp.select(*(_col(c.name, "o") for c in columns))
                 .from_(exp.to_table(_OUT).as_("o"))
                 .where(exp.LTE(this=_col("position", "o"),
                                expression=value_literal(spec.options.limit))))
    outer.set("with_", exp.With(expressions=ctes))
    sql = outer.sql(dialect=caps.sqlglot_dialect, pretty=pretty,
                    unsupported_level=sqlglot.ErrorLevel.RAISE)
    return Statement(sql=sql, tree=outer, dialect=caps.name)


def _snapped(metric: exp.Expr) -> exp.Expr:
    """``metric`` rounded as :func:`bitsift.run.metrics.snap` rounds it before sorting (12
    decimal places), so that residue (an IG of 3e-17) does not break a tie that a run orders by
    name. Rounded as DECIMAL: PostgreSQL has no ROUND of a DOUBLE to places."""
    decimal = exp.Cast(this=metric, to=exp.DataType.build("DECIMAL(38, 18)"))
    return exp.Round(this=decimal, decimals=value_literal(SNAP_PLACES))


def _computed(spec: RankSpec, caps: Capabilities) -> dict[str, exp.Expr]:
    run_at = _col("run_at", "c")
    position = exp.Window(
        this=exp.func("ROW_NUMBER"),
        partition_by=_segments(spec) or None,
        order=exp.Order(expressions=[
            exp.Ordered(this=_snapped(_col(spec.options.sort)), desc=True),
            exp.Ordered(this=_name_order(spec)),
        ]),
    )
    p_value: exp.Expr = _cast(exp.Null(), "float")
    if caps.chi2_survival:
        p_value = sqlglot.parse_one(caps.chi2_survival, read=caps.sqlglot_dialect).transform(
            lambda node: _col("g_statistic") if isinstance(node, exp.Column) and node.name == "g"
            else _col("dof") if isinstance(node, exp.Column) and node.name == "dof" else node)
    return {
        "run_at": run_at,
        "run_id": _cast(run_at.copy(), "text"),
        "segment": segment_expression(spec),
        "position": _cast(position, "integer"),
        "classes": _cast(_col(_TARGET_CLASSES), "integer"),
        "flags": flags_expression(spec.options.thresholds),
        "p_value": p_value,
    }


def _renamed_steps(tree: exp.Select, number: int) -> tuple[exp.Select, list[exp.CTE]]:
    """``tree`` without its WITH, and its steps (the clock left out) renamed ``r<number>_*``,
    every reference to them with them."""
    tree = tree.copy()
    steps = tree.args["with_"].expressions
    tree.set("with_", None)
    names = {cte.alias for cte in steps} - {_CLOCK}
    renamed = {name: f"r{number}_{name}" for name in names}

    def is_step(node: exp.Expr) -> bool:
        """A step's name: as a table read (not a schema's table) or as a CTE's alias."""
        if isinstance(node, exp.Table):
            return not node.args.get("db") and node.name in renamed
        return (isinstance(node, exp.TableAlias) and isinstance(node.parent, exp.CTE)
                and node.name in renamed)

    def rename(node: exp.Expr) -> exp.Expr:
        if is_step(node):
            node.set("this", exp.to_identifier(renamed[node.name]))
        elif isinstance(node, exp.Column) and node.table in renamed:
            node.set("table", exp.to_identifier(renamed[node.table]))
        return node

    ctes = [cte.transform(rename) for cte in steps if cte.alias != _CLOCK]
    renamed_tree = tree.transform(rename)
    assert isinstance(renamed_tree, exp.Select)
    return renamed_tree, [c for c in ctes if isinstance(c, exp.CTE)]


def job_history_select(statements: Sequence[Statement], caps: Capabilities, *,
                       pretty: bool = True) -> Statement:
    """Several rankings' history SELECTs (:func:`history_select`) as one statement whose rows
    share one reading of the clock: one run, as ``bitsift run`` writes a job's rankings. Each
    ranking's steps are renamed ``r<n>_<step>``; the clock is read once."""
    selects: list[exp.Select] = []
    ctes: list[exp.CTE] = []
    clock: exp.CTE | None = None
    for number, statement in enumerate(statements, start=1):
        assert isinstance(statement.tree, exp.Select)
        for cte in statement.tree.args["with_"].expressions:
            if cte.alias == _CLOCK and clock is None:
                clock = cte.copy()
        select, steps = _renamed_steps(statement.tree, number)
        selects.append(select)
        ctes += steps
    assert clock is not None
    combined: exp.Expression = selects[0]
    for select in selects[1:]:
        combined = exp.union(combined, select, distinct=False)
    combined.set("with_", exp.With(expressions=[clock, *ctes]))
    sql = combined.sql(dialect=caps.sqlglot_dialect, pretty=pretty,
                       unsupported_level=sqlglot.ErrorLevel.RAISE)
    return Statement(sql=sql, tree=combined, dialect=caps.name)
