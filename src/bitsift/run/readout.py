"""From the rows of the ranking statement to results: one :class:`Ranking`, or one per segment.

The statement (templates/rank.sql.j2) returns one row per attribute, ``attribute_index`` 0
describing the target. With segments (``--by``) it returns one such group per segment, led by
the columns ``segment_1`` .. ``segment_k``; a segment whose rows all lack a target arrives as one
row with ``attribute_index`` NULL. Weighted statements (``--weight``) add ``weight_used``,
``rows_without_weight``, ``rows_negative_weight`` and ``rows_fractional_weight``.
"""

from __future__ import annotations

import datetime as _dt
import decimal
import math
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any

from bitsift.errors import DataError, Option, Problem
from bitsift.run.metrics import rank_ranges, score, snap, snap_total, sort_scores
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.run.target_bins import target_binning
from bitsift.spec.rankspec import RankSpec

Record = Mapping[str, Any]

#: What an attribute's row holds when --missing drop left it without a single value.
_NOTHING_MEASURED: dict[str, Any] = {
    "distinct_values": 0, "rows_used": 0, "g_statistic": 0.0, "dof": 0,
    "information_gain": 0.0, "target_entropy": 0.0, "gain_ratio": 0.0,
    "symmetric_uncertainty": 0.0, "conditional_entropy": 0.0, "attribute_entropy": 0.0,
}


def plain_value(value: Any) -> Any:
    """A segment value as JSON can hold it: bytes (MySQL's byte-exact keys) decoded, decimals
    as numbers, dates and times in ISO 8601; None, booleans, numbers and text unchanged.

    >>> plain_value(b"north"), plain_value(decimal.Decimal("2.50"))
    ('north', 2.5)
    >>> plain_value(_dt.date(2024, 1, 2))
    '2024-01-02'
    """
    if value is None or isinstance(value, bool | int | float | str):
        return value
    if isinstance(value, bytes | bytearray | memoryview):
        return bytes(value).decode("utf-8", errors="replace")
    if isinstance(value, decimal.Decimal):
        # PostgreSQL's NUMERIC holds NaN and ±Infinity: floats, as int() cannot take them.
        if value.is_finite() and value == value.to_integral_value():
            return int(value)
        return float(value)
    if isinstance(value, _dt.date | _dt.time):
        return value.isoformat()
    return str(value)


def _count(record: Record, key: str) -> int:
    return int(record.get(key) or 0)


def _negative_weights(records: Sequence[Record], spec: RankSpec) -> None:
    negative = sum(_count(r, "rows_negative_weight") for r in _one_per_segment(records, spec))
    if negative:
        scope = " matching --where" if spec.where else ""
        raise DataError(
            f"the weight column {spec.weight!r} has {negative:,} negative or non-finite "
            f"value(s) in {spec.source_name}{scope}: weights must be finite numbers, 0 or more"
        )


def _fractional_weights(records: Sequence[Record], spec: RankSpec) -> bool:
    return any(_count(r, "rows_fractional_weight") for r in _one_per_segment(records, spec))


#: The one NaN every segment key holds: NaN != NaN, so rows of the NaN segment carrying
#: different NaN objects would each make a segment of their own (dicts and tuples compare
#: by identity first, so one shared object groups them).
SEGMENT_NAN = float("nan")


def _key_value(value: Any) -> Any:
    plain = plain_value(value)
    return SEGMENT_NAN if isinstance(plain, float) and math.isnan(plain) else plain


def _segment_key(record: Record, spec: RankSpec) -> tuple[Any, ...]:
    return tuple(_key_value(record[f"segment_{i}"]) for i in range(1, len(spec.by) + 1))


def _one_per_segment(records: Sequence[Record], spec: RankSpec) -> list[Record]:
    """One record per segment (the per-segment columns repeat on every row of a segment)."""
    seen: dict[tuple[Any, ...], Record] = {}
    for record in records:
        seen.setdefault(_segment_key(record, spec) if spec.by else (), record)
    return list(seen.values())


def _sort_key(values: tuple[Any, ...]) -> tuple[Any, ...]:
    # NULL segments last, NaN just before them (as DuckDB and PostgreSQL order NaN: above
    # +inf); values of one column share a type, so the rest compare.
    return tuple((2, 0) if v is None else (1, 0) if v is SEGMENT_NAN else (0, v)
                 for v in values)


def _ranking(records: Sequence[Record], spec: RankSpec, cuts: Mapping[str, Sequence[float]],
             dialect: str, *, whole_numbers: bool, segment: dict[str, Any] | None) -> Ranking:
    """The ranking of one segment (or of the whole table); ``status`` says when it is empty."""
    by_index = {int(r["attribute_index"]): r for r in records
                if r["attribute_index"] is not None}
    first = records[0] if records else {}
    excluded = _count(first, "rows_excluded")
    target_row = by_index.get(0)
    weighted = spec.weight is not None
    base = Ranking(
        target=spec.target, table=spec.source_name, rows=0, rows_excluded=excluded,
        target_entropy=0.0, classes=0, attributes=[], dialect=dialect, sort=spec.options.sort,
        segment=segment, status="no_rows", weight=spec.weight,
        weight_total=0.0 if weighted else None,
        rows_without_weight=_count(first, "rows_without_weight"),
        confidence=spec.options.confidence,
        target_binning=target_binning(spec),
    )
    if target_row is None or _count(target_row, "rows_used") == 0:
        return base
    classes = _count(target_row, "classes")
    scores = []
    for index, attribute in enumerate(spec.attributes, start=1):
        row = by_index.get(index, _NOTHING_MEASURED)
        scored = score(row, attribute.name, attribute.kind, spec.options.thresholds,
                       cuts.get(attribute.name), z=spec.options.z)
        # Each score names its binning method, and a dated attribute its part or time binning.
        scored = replace(scored, binning=attribute.binning, date_part=attribute.date_part,
                         temporal=attribute.family if attribute.epoch else None)
        # No p-value and no interval where the weights are not whole numbers: both assume counts.
        if not whole_numbers:
            scored = replace(scored, p_value=None, information_gain_se=None,
                             information_gain_low=None, information_gain_high=None)
        scores.append(scored)
    rank_ranges(scores)
    ordered = sort_scores(scores, spec.options.sort)
    if spec.options.limit:
        ordered = ordered[: spec.options.limit]
    return replace(
        base,
        rows=_count(target_row, "rows_used"),
        target_entropy=snap(target_row["target_entropy"]),
        classes=classes,
        attributes=ordered,
        status="ok" if classes >= 2 else "single_class",
        weight_total=snap_total(target_row["weight_used"]) if weighted else None,
    )


def refuse_many_classes(classes: int, spec: RankSpec) -> None:
    """:class:`DataError` when the target has more classes than ``max_classes`` (in the
    whole table, or in the largest segment): it looks continuous or like an identifier, and
    every metric against it would be confidently wrong.

    Read from the ranking's own target row, so the check costs no pass of its own: a float
    or decimal target is refused from its type before anything runs, and what is left (an
    integer or text target with many values) costs one ranking, whose cells are bounded by
    the rows like any other (decided for issue 21, item 1)."""
    cap = spec.options.max_classes
    if classes <= cap:
        return
    way_out: tuple[str | Option, ...] = (
        (" rank against quantile bins of it with ", Option("target_bins"), " N, or")
        if spec.target_family in ("integer", "float", "decimal") else ())
    raise DataError(problems=[Problem("max_classes", (
        f"the target {spec.target!r} has {classes:,} classes in {spec.source_name}, more than "
        "the ", Option("max_classes"), f" {cap}: it looks continuous or like an identifier;",
        *way_out, " choose a categorical target (or raise ", Option("max_classes"), ")"))])


def _weight_notes(spec: RankSpec, whole_numbers: bool) -> list[str]:
    if spec.weight is None or whole_numbers:
        return []
    return [f"the weights in {spec.weight!r} are not all whole numbers: p-values, standard "
            "errors, intervals and rank ranges are not reported (the G-test and the se read "
            "weights as frequency counts)"]


def _no_rows_error(spec: RankSpec, excluded: int) -> DataError:
    if excluded:
        return DataError(
            f"every row of {spec.source_name} has a NULL {spec.target!r} ({excluded} rows)"
        )
    weights = f" with a positive {spec.weight!r}" if spec.weight else ""
    return DataError(f"{spec.source_name} has no rows{weights} to rank"
                     + (" matching --where" if spec.where else ""))


def read_ranking(records: Sequence[Record], spec: RankSpec, cuts: Mapping[str, Sequence[float]],
                 *, dialect: str) -> Ranking:
    """The ranking of an unsegmented statement; :class:`DataError` when there is nothing to rank
    (no rows, a single class) or a weight is negative."""
    if spec.weight is not None:
        _negative_weights(records, spec)
    whole = spec.weight is None or not _fractional_weights(records, spec)
    ranking = _ranking(records, spec, cuts, dialect, whole_numbers=whole, segment=None)
    refuse_many_classes(ranking.classes, spec)
    if ranking.status == "no_rows":
        if ranking.rows_without_weight and not ranking.rows_excluded:
            raise DataError(f"no row of {spec.source_name} has a positive {spec.weight!r} "
                            f"({ranking.rows_without_weight} rows with NULL or 0)")
        raise _no_rows_error(spec, ranking.rows_excluded)
    if ranking.status == "single_class":
        raise DataError(
            f"target {spec.target!r} has a single class in {spec.source_name}: nothing to rank"
        )
    return replace(ranking, notes=_weight_notes(spec, whole))


def read_segments(records: Sequence[Record], spec: RankSpec,
                  cuts: Mapping[str, Sequence[float]], *, dialect: str) -> SegmentedRanking:
    """One ranking per segment, ordered by segment values (NULL last).

    Segments with a single class or without rows are kept, with their ``status``; only a
    statement with no usable row at all, or a negative weight, raises :class:`DataError`.
    """
    if spec.weight is not None:
        _negative_weights(records, spec)
    whole = spec.weight is None or not _fractional_weights(records, spec)
    groups: dict[tuple[Any, ...], list[Record]] = {}
    for record in records:
        groups.setdefault(_segment_key(record, spec), []).append(record)
    names = [s.name for s in spec.by]
    segments = [
        _ranking(groups[key], spec, cuts, dialect, whole_numbers=whole,
                 segment=dict(zip(names, key, strict=True)))
        for key in sorted(groups, key=_sort_key)
    ]
    refuse_many_classes(max((s.classes for s in segments), default=0), spec)
    if not any(s.rows for s in segments):
        raise _no_rows_error(spec, sum(s.rows_excluded for s in segments))
    return SegmentedRanking(
        target=spec.target, table=spec.source_name, by=names, segments=segments,
        weight=spec.weight, dialect=dialect, sort=spec.options.sort,
        notes=_weight_notes(spec, whole), confidence=spec.options.confidence,
    )
