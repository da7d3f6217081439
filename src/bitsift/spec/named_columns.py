"""The columns a ranking request names, matched to the table's and checked role by role: the
first steps of :func:`bitsift.spec.rankspec.resolve`."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from bitsift.errors import ColumnError, Option, Problem, SpecError, unknown_names_message
from bitsift.names import resolve_names
from bitsift.spec.schema import NUMERIC_FAMILIES, TEMPORAL_FAMILIES, Column


@dataclass(frozen=True)
class NamedColumns:
    """The columns the options name, in the catalog's spelling, by role (``binned``: those of
    ``binning_for``, ``dated``: of ``date_part``, in their order)."""

    target: str
    picked: list[str]
    excluded: list[str]
    categorical: list[str]
    numeric: list[str]
    by: list[str]
    weight: str | None
    binned: list[str]
    dated: list[str]


def named_columns(asked: dict[str, list[str]], by_name: dict[str, Column], source_name: str,
                  ) -> NamedColumns:
    """The names ``asked`` for each role (the fields of :class:`NamedColumns`; ``weight`` and
    ``target`` as lists of one) matched to columns (:func:`bitsift.names.resolve_names`), in
    the catalog's spelling; :class:`ColumnError` naming every unknown one at once, in the
    order of ``asked``."""
    found: dict[str, list[str]] = {}
    unknown: list[str] = []
    for role, names in asked.items():
        found[role], bad = resolve_names(names, list(by_name))
        unknown += bad
    if unknown:
        raise ColumnError(
            unknown_names_message("column", unknown, by_name) + f" in {source_name}"
        )
    return NamedColumns(target=found["target"][0], picked=found["picked"],
                        excluded=found["excluded"], categorical=found["categorical"],
                        numeric=found["numeric"], by=found["by"],
                        weight=found["weight"][0] if found["weight"] else None,
                        binned=found["binned"], dated=found["dated"])


def check_binnable(named: NamedColumns, by_name: dict[str, Column]) -> None:
    """Columns named in ``numeric`` must be numbers or dates, in ``date_part`` dates."""
    binnable = NUMERIC_FAMILIES | TEMPORAL_FAMILIES
    not_numeric = [n for n in named.numeric if by_name[n].family not in binnable]
    if not_numeric:
        # A data file's text column holding numbers: the reader option that reads it so.
        hints = [part for n in not_numeric if by_name[n].number_hint
                 for part in (f". {n!r} is read as text, but ", *by_name[n].number_hint)]
        raise ColumnError(problems=[Problem("numeric", (
            Option("numeric"), " needs number columns (or dates and timestamps, binned as "
            "epoch seconds); not those: " + typed_names(not_numeric, by_name), *hints))])
    # "other": a column described without a connection (`bitsift sql` with no SOURCE).
    not_dates = [n for n in named.dated
                 if by_name[n].family not in TEMPORAL_FAMILIES | {"other"}]
    if not_dates:
        raise ColumnError.option("date_part", " needs date or timestamp columns; not those: "
                                 + typed_names(not_dates, by_name))


def typed_names(names: Sequence[str], by_name: dict[str, Column]) -> str:
    """``'a' (VARCHAR), 'b' (text)``: names with their database type, for an error."""
    return ", ".join(f"{n!r} ({by_name[n].type_name or by_name[n].family})" for n in names)


def check_segments_and_weight(target: str, segments: Sequence[str], weight: str | None,
                              picked: Sequence[str], by_name: dict[str, Column]) -> None:
    """Every conflict between --by, --weight, the target and --attributes, reported at once."""
    by = Option("by")
    problems = []
    if target in segments:
        problems.append(Problem("by", (f"the target {target!r} cannot also be a segment (", by,
                                       ")")))
    if weight is not None:
        if weight == target:
            problems.append(Problem.of(f"the target {target!r} cannot also be the weight",
                                       "weight"))
        if weight in segments:
            problems.append(Problem("weight", (f"{weight!r} cannot be both a segment (", by,
                                               ") and the weight")))
        family = by_name[weight].family
        # "other": paste mode without a connection does not know the type.
        if family not in NUMERIC_FAMILIES and family != "other":
            problems.append(Problem.option("weight", f" needs a number column; {weight!r} is "
                                           f"{by_name[weight].type_name or family}"))
    both = [n for n in dict.fromkeys(picked) if n in segments or n == weight]
    if both:
        problems.append(Problem("attributes", ("columns named both in ", Option("attributes"),
                                               " and as a segment or weight: ", ", ".join(both))))
    if problems:
        raise SpecError(problems=problems)
