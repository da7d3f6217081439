"""Paste-ready statements that keep a counts table inside the warehouse itself
(``bitsift sql --counts``, docs/stored-counts.md): create the table if missing, insert the
counts of the partitions newer than the newest stored one, rank a window.

The insert is the counting statement of :mod:`bitsift.sql.counts_sql` with its rows written
as the counts table's: the partition as text (ISO dates) or BIGINT, values and classes as the
database's own text (``CAST(... AS TEXT)``: the pasted ranking only groups them, so they need
to be told apart, not read back). Numeric attributes are cut at literal cut points computed
beforehand, so that every night's partitions share their bins.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import sqlglot
from sqlglot import exp

from bitsift.spec.rankspec import RankSpec
from bitsift.sql.counts_sql import (
    COUNTS_COLUMNS,
    Partitioning,
    StoredAttribute,
    _counting_text,
    _partition_key,
    stored_rank_statement,
    window_condition,
)
from bitsift.sql.dialects import Capabilities
from bitsift.sql.sqlbuild import CANONICAL, finish, value_literal


def _ident(name: str) -> exp.Identifier:
    return exp.to_identifier(name, quoted=True)


#: Text type of the counts table and its casts where TEXT would become a LOB that cannot be
#: grouped or compared as such (SQL Server's VARCHAR(MAX), Oracle's CLOB): values are grouped
#: as at most VARBINARY(8000) there anyway (see dialects.py).
_BOUNDED_TEXT = {"tsql": "VARCHAR(4000)", "oracle": "VARCHAR(4000)"}

def _text_type(caps: Capabilities) -> str:
    return _BOUNDED_TEXT.get(caps.name, _BOUNDED_TEXT.get(caps.sqlglot_dialect, "TEXT"))


#: Placeholder the insert wraps around values stored as text, replaced by the dialect's cast
#: after the statement is generated (the canonical dialect would drop VARCHAR's length).
_AS_TEXT = "bitsift_as_text"


def _text(node: exp.Expression) -> exp.Expression:
    return exp.Anonymous(this=_AS_TEXT, expressions=[node])


def _texts_cast(tree: exp.Expression, caps: Capabilities) -> exp.Expression:
    to = exp.DataType.build(_text_type(caps), dialect=caps.sqlglot_dialect)

    def cast(node: exp.Expression) -> exp.Expression:
        if isinstance(node, exp.Anonymous) and node.name.lower() == _AS_TEXT:
            return exp.Cast(this=node.expressions[0], to=to.copy())
        return node

    return tree.transform(cast)


def create_statement(table: exp.Expression, caps: Capabilities, kind: str) -> str:
    """CREATE TABLE IF NOT EXISTS for the counts table."""
    text = _text_type(caps)
    types = {"partition": "BIGINT" if kind == "integer" else text,
             "attribute_index": "INT", "attribute": text, "value": text, "class": text,
             "n": "BIGINT"}
    definitions = [exp.ColumnDef(this=_ident(c), kind=exp.DataType.build(types[c]))
                   for c in COUNTS_COLUMNS]
    create = exp.Create(this=exp.Schema(this=table.copy(), expressions=definitions),
                        kind="TABLE", exists=True)
    return create.sql(caps.sqlglot_dialect, pretty=True)


def insert_statement(spec: RankSpec, caps: Capabilities, cuts: Mapping[str, Sequence[float]],
                     partitioning: Partitioning, table: exp.Expression) -> str:
    """INSERT of the counts of every partition newer than the newest one in ``table``."""
    stored = exp.column(_ident("partition"))
    maximum = exp.func("MAX", stored)
    newest = (exp.cast(maximum, exp.DataType.build("DATE")) if partitioning.kind == "date"
              else maximum)
    newest_query = exp.Subquery(this=exp.select(newest).from_(table.copy()))
    nothing_stored = exp.Is(this=exp.Subquery(this=exp.select(exp.func("MAX", stored.copy()))
                                              .from_(table.copy())), expression=exp.Null())
    newer = exp.or_(nothing_stored, exp.GT(this=_partition_key(), expression=newest_query))
    text = _counting_text(spec, caps, cuts, partitioning, [exp.Paren(this=newer)])
    tree = sqlglot.parse_one(text, read=CANONICAL)
    assert isinstance(tree, exp.Select)
    column = exp.column
    partition: exp.Expression = column("s1")
    if partitioning.kind != "integer":
        partition = _text(partition)
    names = exp.Case(this=column("attr"), ifs=[
        exp.If(this=value_literal(index), true=value_literal(name))
        for index, name in [(0, spec.target), *((i, a.name) for i, a in
                                                 enumerate(spec.attributes, start=1))]])
    values = exp.Case(this=column("attr"), ifs=[
        exp.If(this=value_literal(i), true=_text(column(f"a{i}")))
        for i in range(1, len(spec.attributes) + 1)])
    rows = exp.select(partition.as_("partition"), column("attr").as_("attribute_index"),
                      names.as_("attribute"), values.as_("value"),
                      _text(column("y")).as_("class"), column("n").as_("n")
                      ).from_("counted")
    rows.set("with_", tree.args["with_"])
    select = finish(rows.sql(CANONICAL), caps, pretty=True)
    assert isinstance(table, exp.Table)
    insert = exp.insert(_texts_cast(select.tree, caps), table.copy(),
                        columns=[_ident(c) for c in COUNTS_COLUMNS])
    return insert.sql(caps.sqlglot_dialect, pretty=True)


def window_rank_statement(spec: RankSpec, caps: Capabilities, table: exp.Expression,
                          partitioning: Partitioning, since: str | int | None,
                          until: str | int | None) -> str:
    """The ranking of the window ``[since, until)`` of the counts in ``table``."""
    attributes = [StoredAttribute(i, a.name, a.kind)
                  for i, a in enumerate(spec.attributes, start=1)]
    statement = stored_rank_statement(
        caps, table, spec.target, attributes,
        window=window_condition(since, until, partitioning.kind), by_partition=False,
        drop_missing=spec.options.missing == "drop", order_by=spec.options.sort,
        z=spec.options.z)
    tree = sqlglot.parse_one(statement.sql, read=caps.sqlglot_dialect)
    assert isinstance(tree, exp.Expression)
    return tree.sql(caps.sqlglot_dialect, pretty=True)
