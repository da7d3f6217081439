"""Statements of stored counts (docs/stored-counts.md): counting partitions in the source, and
ranking a window from the counts table in the database that holds it.

Both reuse templates/rank.sql.j2: the counting statement is its ``base`` and ``counts`` steps
with the partition as the one segment (``counts_only``); the ranking statement is its steps
from ``cells`` on, fed by templates/stored_counts.sql.j2 instead of the rows.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Literal

import sqlglot
from sqlglot import exp

from bitsift.errors import SpecError
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.dialects import Capabilities
from bitsift.sql.sqlbuild import (
    CANONICAL,
    Statement,
    _context,
    exact_grouping,
    finish,
    literal,
    quote,
    source_sql,
    value_literal,
)
from bitsift.sql.templates import render

#: How a partition column's values are grouped: a date/timestamp truncated to a day, a
#: (Monday-based) week or a month, or the raw values.
Grain = Literal["day", "week", "month", "value"]
GRAINS: tuple[str, ...] = ("day", "week", "month", "value")
#: How stored partition values are kept and compared: ISO dates as text (they sort as dates on
#: every engine), integers as BIGINT, text as text.
PartitionKind = Literal["date", "integer", "text"]

#: The name the counting statement gives the partition expression inside its source.
PARTITION_ALIAS = "bitsift_partition"

#: The counts table's columns, in order.
COUNTS_COLUMNS: tuple[str, ...] = ("partition", "attribute_index", "attribute", "value",
                                   "class", "n")
#: The metadata table's name: the counts table's with this suffix.
META_SUFFIX = "_meta"
#: The metadata table's columns (one row per key).
META_COLUMNS: tuple[str, ...] = ("key", "value")

#: Week and month truncation, per dialect (the date as ``x``); day is ``CAST(x AS DATE)``
#: everywhere. Dialects missing here cannot truncate to weeks or months in the counting
#: statement (SQLite has no DATE_TRUNC).
_TRUNCATIONS: dict[str, dict[str, str]] = {
    "duckdb": {"week": "CAST(DATE_TRUNC('week', x) AS DATE)",
               "month": "CAST(DATE_TRUNC('month', x) AS DATE)"},
    "postgres": {"week": "CAST(DATE_TRUNC('week', x) AS DATE)",
                 "month": "CAST(DATE_TRUNC('month', x) AS DATE)"},
    "mysql": {"week": "DATE_SUB(CAST(x AS DATE), INTERVAL WEEKDAY(x) DAY)",
              "month": "DATE_SUB(CAST(x AS DATE), INTERVAL DAYOFMONTH(x) - 1 DAY)"},
}
_TRUNCATIONS["mariadb"] = _TRUNCATIONS["mysql"]


@dataclass(frozen=True)
class Partitioning:
    """The partition column of a counting statement and how its values are grouped."""

    column: str
    family: str
    grain: Grain

    @property
    def kind(self) -> PartitionKind:
        if self.grain != "value" or self.family in ("date", "timestamp"):
            return "date"
        if self.family == "integer":
            return "integer"
        return "text"


def partition_kind_problem(partitioning: Partitioning) -> str | None:
    """Why a column cannot partition the counts at the grain asked, or None."""
    temporal = partitioning.family in ("date", "timestamp")
    if partitioning.grain != "value" and not temporal:
        return (f"--grain {partitioning.grain} needs a date or timestamp column, but "
                f"{partitioning.column!r} holds {partitioning.family}; use --grain value")
    if partitioning.grain == "value" and partitioning.family not in (
            "date", "timestamp", "integer", "text"):
        return (f"partition column {partitioning.column!r} holds {partitioning.family}: "
                "partitions are dates, timestamps (by day, week or month), integers or text")
    return None


def partition_literal(value: str | int, kind: PartitionKind) -> exp.Expression:
    """A stored partition value as a typed literal of the source's partition expression."""
    if kind == "date":
        return exp.cast(exp.Literal.string(str(value)), exp.DataType.build("DATE"))
    return value_literal(value)


def _partition_expression(partitioning: Partitioning, caps: Capabilities) -> exp.Expression:
    """The partition of a row (the column qualified by ``t``), in ``caps``' dialect."""
    column = exp.column(exp.to_identifier(partitioning.column, quoted=True), table="t")
    if partitioning.grain == "value" or (partitioning.grain == "day"
                                         and partitioning.family == "date"
                                         and caps.sqlglot_dialect != "sqlite"):
        # A date is its own day: compared as it is, an index or partitioning on it serves.
        # (SQLite's "dates" are text that may carry a time: DATE() cuts it off.)
        return column
    if partitioning.grain == "day":
        return exp.cast(column, exp.DataType.build("DATE"))
    patterns = _TRUNCATIONS.get(caps.sqlglot_dialect) or _TRUNCATIONS.get(caps.name)
    if patterns is None:
        raise SpecError(f"--grain {partitioning.grain} is not available on {caps.name}: use "
                        "--grain day (any window of days can be ranked from daily counts)")
    pattern = sqlglot.parse_one(patterns[partitioning.grain], read=caps.sqlglot_dialect)

    def put_column(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Column) and node.name == "x" and not node.table:
            return column.copy()
        return node

    return pattern.transform(put_column)


def counting_statement(spec: RankSpec, caps: Capabilities, cuts: Mapping[str, Sequence[float]],
                       partitioning: Partitioning, *, after: str | int | None = None,
                       from_: str | int | None = None) -> Statement:
    """One statement counting (partition, attribute, value, class) in the source: columns
    ``attr`` (0: the target's own counts), ``s1`` (the partition), ``a<i>``, ``y`` and ``n``.

    Only rows with a partition, newer than ``after`` or from ``from_`` on when given; numeric
    attributes are binned at ``cuts`` (the stored ones).
    """
    conditions: list[exp.Expression] = []
    if after is not None:
        conditions.append(exp.GT(this=_partition_key(),
                                 expression=partition_literal(after, partitioning.kind)))
    if from_ is not None:
        conditions.append(exp.GTE(this=_partition_key(),
                                  expression=partition_literal(from_, partitioning.kind)))
    return finish(_counting_text(spec, caps, cuts, partitioning, conditions), caps,
                  pretty=False)


def _partition_key() -> exp.Column:
    return exp.column(exp.to_identifier(PARTITION_ALIAS, quoted=True), table="src")


def _counting_text(spec: RankSpec, caps: Capabilities, cuts: Mapping[str, Sequence[float]],
                   partitioning: Partitioning, extra: Sequence[exp.Expression]) -> str:
    """The counting statement in the canonical dialect, rows limited by ``extra`` conditions
    on the partition (``src.bitsift_partition``) too."""
    context = _context(spec, caps, cuts)
    partition = _partition_expression(partitioning, caps)
    # The partition is computed in a derived table in the source's own dialect (its
    # truncation functions differ), then read like a column of the table.
    inner = exp.select(exp.Column(this=exp.Star(), table=exp.to_identifier("t")),
                       partition.as_(PARTITION_ALIAS, quoted=True)).from_(
        exp.alias_(spec.source.copy(), "t", table=True))
    derived = exp.Subquery(this=inner).sql(caps.sqlglot_dialect)
    context["source"] = _reparsed(derived, caps)
    conditions: list[exp.Expression] = []
    if spec.where:
        user = sqlglot.parse_one(str(context["qualified_where"]), read=CANONICAL)
        assert isinstance(user, exp.Expression)
        conditions.append(user)
    conditions.append(exp.Not(this=exp.Is(this=_partition_key(), expression=exp.Null())))
    conditions += [c.copy() for c in extra]
    context["qualified_where"] = exp.and_(*conditions).sql(CANONICAL)
    context.update({
        "segments": [{"index": 1, "column": quote(PARTITION_ALIAS),
                      "exact": partitioning.kind == "text" and exact_grouping("text", caps)}],
        "weight": None,
        "counts_only": True,
        "order_by_gain": None,
        "bounds": None,
    })
    return render("rank.sql.j2", **context)


def _reparsed(sql: str, caps: Capabilities) -> str:
    """SQL of the source's dialect as canonical text: the template is written in DuckDB's
    dialect, and its generator must give back the same functions for ``caps``."""
    tree = sqlglot.parse_one(sql, read=caps.sqlglot_dialect)
    assert isinstance(tree, exp.Expression)
    return source_sql(tree)


@dataclass(frozen=True)
class StoredAttribute:
    """An attribute of the counts table: its index there, name and kind."""

    index: int
    name: str
    kind: str


def window_condition(since: str | int | None, until: str | int | None,
                     kind: str) -> exp.Expression | None:
    """``partition >= since AND partition < until`` on the counts table (either may be
    missing), with typed literals: ISO dates are stored and compared as text."""
    column = exp.column(exp.to_identifier("partition", quoted=True))
    parts: list[exp.Expression] = []
    typed = value_literal if kind == "integer" else (lambda v: value_literal(str(v)))
    if since is not None:
        parts.append(exp.GTE(this=column.copy(), expression=typed(since)))
    if until is not None:
        parts.append(exp.LT(this=column.copy(), expression=typed(until)))
    if not parts:
        return None
    condition = exp.and_(*parts)
    assert isinstance(condition, exp.Expression)
    return condition


def stored_rank_statement(caps: Capabilities, table: exp.Expression, target: str,
                          attributes: Sequence[StoredAttribute], *,
                          window: exp.Expression | None, by_partition: bool,
                          drop_missing: bool, order_by: str | None,
                          z: float) -> Statement:
    """The ranking statement over the counts in ``table`` (rank.sql.j2 from ``cells`` on)."""
    exact = exact_grouping("text", caps)
    stored = render(
        "stored_counts.sql.j2",
        table=table.sql(CANONICAL), attributes=[{"index": a.index} for a in attributes],
        by_partition=by_partition, exact=exact,
        window=window.sql(CANONICAL) if window is not None else None,
        partition=quote("partition"), attribute_index=quote("attribute_index"),
        value=quote("value"), class_=quote("class"), n=quote("n"),
    )
    context: dict[str, object] = {
        "stored_counts": stored,
        "attributes": [{"index": a.index, "label": literal(a.name), "kind": a.kind}
                       for a in attributes],
        "target_label": literal(target),
        "segments": [{"index": 1}] if by_partition else [],
        "weight": None,
        "drop_missing": drop_missing,
        "order_by_gain": order_by,
        "z": literal(z),
        "shared": caps.shared_ctes,
    }
    return finish(render("rank.sql.j2", **context), caps, pretty=False)


def meta_table(table: exp.Expression) -> exp.Expression:
    """The metadata table beside the counts table ``table`` (same schema)."""
    assert isinstance(table, exp.Table), table
    meta = table.copy()
    meta.set("this", exp.to_identifier(table.name + META_SUFFIX, quoted=True))
    return meta


def select_statement(table: exp.Expression, columns: Sequence[str], caps: Capabilities,
                     where: exp.Expression | None = None) -> str:
    """``SELECT columns FROM table [WHERE ...]`` for the counts or metadata table."""
    query = exp.select(*(exp.column(exp.to_identifier(c, quoted=True)) for c in columns)
                       ).from_(table.copy())
    if where is not None:
        query = query.where(where)
    return query.sql(caps.sqlglot_dialect)


def extent_statement(table: exp.Expression, caps: Capabilities,
                     window: exp.Expression | None) -> str:
    """The stored partitions in a window: their number, first and last."""
    column = exp.column(exp.to_identifier("partition", quoted=True))
    query = exp.select(
        exp.func("COUNT", exp.Distinct(expressions=[column.copy()])).as_("partitions"),
        exp.func("MIN", column.copy()).as_("first"),
        exp.func("MAX", column.copy()).as_("last"),
    ).from_(table.copy())
    if window is not None:
        query = query.where(window)
    return query.sql(caps.sqlglot_dialect)


def window_cells_statement(table: exp.Expression, caps: Capabilities,
                           window: exp.Expression | None, indexes: Sequence[int],
                           by_partition: bool) -> str:
    """The counts of a window summed per (attribute, value, class), and per partition with
    ``by_partition``: the target's own (attribute 0) and those of the attributes ``indexes``,
    rows with a class only, for the drill-down of a report. Values and classes stay tagged
    text; the counts tables bitsift creates compare text byte for byte (``utf8mb4_bin`` on
    MySQL/MariaDB), so a plain GROUP BY keeps 'a' and 'A' apart."""
    def column(name: str) -> exp.Column:
        return exp.column(exp.to_identifier(name, quoted=True))

    keys = [column(c) for c in (("partition",) if by_partition else ())
            + ("attribute_index", "value", "class")]
    wanted = column("attribute_index").isin(*(value_literal(i) for i in (0, *indexes)))
    # Rows without a target are counted as excluded by the ranking, never profiled.
    with_class = exp.Not(this=exp.Is(this=column("class"), expression=exp.Null()))
    condition = exp.and_(*([window.copy()] if window is not None else []), wanted, with_class)
    assert isinstance(condition, exp.Expression)
    total = exp.cast(exp.func("SUM", column("n")), exp.DataType.build("BIGINT")).as_("n")
    query = exp.select(*keys, total).from_(table.copy()).where(condition).group_by(
        *(k.copy() for k in keys))
    return query.sql(caps.sqlglot_dialect)
