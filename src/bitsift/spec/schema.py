"""Column discovery results and the mapping from column types to attribute kinds."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import sqlglot
from sqlglot import exp

from bitsift.errors import ColumnError, Option, Problem

#: Coarse type families; the only thing bitsift needs to know about a column's type.
Family = Literal["integer", "float", "decimal", "text", "boolean", "date", "timestamp", "other"]
Kind = Literal["categorical", "numeric"]

NUMERIC_FAMILIES: frozenset[str] = frozenset({"integer", "float", "decimal"})
#: Column type families holding dates and times (numeric as epoch seconds with --numeric).
TEMPORAL_FAMILIES: frozenset[str] = frozenset({"date", "timestamp"})

_FAMILY_OF_TYPE: dict[str, Family] = {}
for _family, _types in {
    "integer": exp.DataType.INTEGER_TYPES,
    "float": exp.DataType.REAL_TYPES - exp.DataType.INTEGER_TYPES,
    "text": exp.DataType.TEXT_TYPES,
    "date": {exp.DataType.Type.DATE, exp.DataType.Type.DATE32},
    "timestamp": exp.DataType.TEMPORAL_TYPES
    - {exp.DataType.Type.DATE, exp.DataType.Type.DATE32},
    "boolean": {exp.DataType.Type.BOOLEAN},
}.items():
    for _t in _types:
        _FAMILY_OF_TYPE[_t.value] = _family  # type: ignore[assignment]
for _t in (exp.DataType.Type.DECIMAL, exp.DataType.Type.BIGDECIMAL, exp.DataType.Type.MONEY,
           exp.DataType.Type.SMALLMONEY, exp.DataType.Type.UDECIMAL):
    _FAMILY_OF_TYPE[_t.value] = "decimal"


#: Message parts (text and options, :class:`~bitsift.errors.Problem`'s) ending a sentence.
NumberHint = tuple[str | Option, ...]


@dataclass(frozen=True)
class Column:
    """A column of the source table as the catalog spells it."""

    name: str
    family: Family
    type_name: str = ""
    #: False when the database cannot GROUP BY this column's type (PostgreSQL json, xml,
    #: point...): such a column can be neither ranked nor a target, segment or weight.
    groupable: bool = True
    #: A text column of a data file whose values read as numbers: why, and the reader option
    #: that reads it as one (message parts, the end of a sentence about the column; empty
    #: otherwise). Named where the column is refused as ``numeric`` (issue 21 item 3).
    number_hint: NumberHint = ()

    @property
    def default_kind(self) -> Kind:
        """Floating, decimal, date and timestamp columns are numeric (dates binned as time:
        a timestamp has about as many values as rows); everything else is categorical."""
        return ("numeric" if self.family in ("float", "decimal", "date", "timestamp")
                else "categorical")


def refuse_ungroupable(by_name: Mapping[str, Column],
                       roles: Mapping[str, Sequence[str]]) -> None:
    """Raise :class:`ColumnError` naming every column the user named in a role (target,
    attributes, by, weight: parameter names) whose type the database cannot group, with its
    type."""
    ungroupable = [(name, role) for role, names in roles.items()
                   for name in dict.fromkeys(names) if not by_name[name].groupable]
    if not ungroupable:
        return
    parts: list[str | Option] = ["the database cannot group the values of column"
                                 + ("s " if len(ungroupable) > 1 else " ")]
    for index, (name, role) in enumerate(ungroupable):
        # "as target": the target is a role in every spelling, not only an option.
        parts += [", " if index else "",
                  f"{name!r} ({by_name[name].type_name or 'unknown type'}, as ",
                  "target" if role == "target" else Option(role), ")"]
    parts.append(": they cannot be ranked nor used as target, segment or weight")
    raise ColumnError(problems=[Problem(None, tuple(parts))])


class FrozenValue(tuple):  # type: ignore[type-arg]
    """A list, struct or map value made hashable, still shown as the database returned it."""

    shown: str

    def __str__(self) -> str:
        return self.shown


def hashable_value(value: Any) -> Any:
    """A value Python can count by: the database groups lists, structs and maps (DuckDB LIST/
    STRUCT/MAP, PostgreSQL arrays) by their contents, which a dict cannot key on as they come.

    >>> frozen = hashable_value([1, {"a": [2]}])
    >>> frozen == hashable_value([1, {"a": [2]}]), str(frozen)
    (True, "[1, {'a': [2]}]")
    """
    if isinstance(value, list | tuple | dict):
        items = value.items() if isinstance(value, dict) else value
        frozen = FrozenValue(hashable_value(v) for v in items)
        frozen.shown = str(value)
        return frozen
    return value


def family_by_class(value: object,
                    table: Sequence[tuple[type | tuple[type, ...], Family]]) -> Family:
    """The family of the first ``(classes, family)`` entry ``value`` is an instance of, in
    order (a driver's type classes nest: a subclass entry must come before its base), else
    "other".

    >>> family_by_class(True, [(bool, "boolean"), (int, "integer")])
    'boolean'
    >>> family_by_class("x", [(int, "integer")])
    'other'
    """
    for classes, family in table:
        if isinstance(value, classes):
            return family
    return "other"


def family_of(type_name: str, dialect: str = "duckdb") -> Family:
    """Map a type name as an engine prints it to a :data:`Family`.

    >>> family_of("DECIMAL(8,2)")
    'decimal'
    >>> family_of("BIGINT")
    'integer'
    >>> family_of("character varying", "postgres")
    'text'
    """
    try:
        data_type = exp.DataType.build(type_name, dialect=dialect)
    except (sqlglot.errors.ParseError, ValueError):
        return "other"
    return _FAMILY_OF_TYPE.get(data_type.this.value, "other")
