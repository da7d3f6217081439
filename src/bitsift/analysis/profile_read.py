"""Reading a drill-down's value x class counts (the rows of templates/profile.sql.j2) into
profiles: labels, entropies and contributions, numeric bins labelled by the ranking's cuts."""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Mapping, Sequence
from decimal import Decimal
from typing import Any

from bitsift.analysis.profile_model import (
    MISSING_LABEL,
    AttributeProfile,
    Profiles,
    ValueKind,
    ValueProfile,
    entropy_bits,
)
from bitsift.engines.base import Engine
from bitsift.numformat import cut_texts
from bitsift.run.metrics import snap_total
from bitsift.spec.rankspec import RankSpec
from bitsift.spec.schema import hashable_value
from bitsift.sql.sqlstatements import DEFAULT_MAX_VALUES, profile_statement


def _number(value: Any) -> int:
    return int(value or 0)


def class_label(value: Any) -> str:
    """How a class or a value is shown: text as is, booleans lower case, dates in ISO form."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, _dt.date | _dt.datetime | _dt.time):
        return value.isoformat()
    if isinstance(value, Decimal):
        return format(value.normalize(), "f") if value == value.to_integral() else str(value)
    if isinstance(value, bytes | bytearray | memoryview):
        # Text grouped byte-exactly (MySQL/MariaDB BINARY) comes back as bytes.
        return bytes(value).decode("utf-8", errors="backslashreplace")
    return str(value)


def bin_label(index: int, cuts: Sequence[float], temporal: str | None = None,
              ) -> tuple[str, float | None, float | None]:
    """Label and bounds of bin ``index``: bin j holds cuts[j-1] <= value < cuts[j].

    >>> bin_label(0, [1.5, 3.0])
    ('< 1.5', None, 1.5)
    >>> bin_label(1, [1.5, 3.0])
    ('[1.5, 3)', 1.5, 3.0)
    >>> bin_label(2, [1.5, 3.0])
    ('>= 3', 3.0, None)
    """
    if not cuts:
        return "all values", None, None
    labels = cut_texts([float(c) for c in cuts], temporal)
    if index <= 0:
        return f"< {labels[0]}", None, float(cuts[0])
    if index >= len(cuts):
        return f">= {labels[-1]}", float(cuts[-1]), None
    return f"[{labels[index - 1]}, {labels[index]})", float(cuts[index - 1]), float(cuts[index])


def _value_sort_key(kind: str, raw: Any, rows: int, rank: int) -> tuple[Any, ...]:
    # Bins in their numeric order, categorical values by rows (the database's rank breaks
    # ties); missing values after the others, the merged rest last.
    order = {"bin": 0, "value": 0, "missing": 1, "other": 2}[kind]
    if kind == "bin":
        return (order, int(raw), 0)
    return (order, -rows, rank)


def read_profiles(
    records: Sequence[Mapping[str, Any]],
    spec: RankSpec,
    cuts: Mapping[str, Sequence[float]],
) -> Profiles:
    """Turn the rows of :func:`profile_statement` into :class:`Profiles`."""
    class_totals: dict[Any, int] = {}
    # attribute index -> value rank (-1: the merged rest) -> (raw value, rows per class)
    cells: dict[int, dict[int, tuple[Any, dict[Any, int]]]] = {}
    rest: dict[int, tuple[int, float]] = {}
    for record in records:
        attr = _number(record["attribute_index"])
        # A list or struct class (DuckDB) is counted by its contents, shown as it came.
        y, n = hashable_value(record["y"]), _number(record["n"])
        if attr == 0:
            class_totals[y] = class_totals.get(y, 0) + n
            continue
        rank = _number(record["value_rank"])
        is_rest = _number(record["rest_values"]) > 0
        if is_rest:
            rank = -1
        raw, per_class = cells.setdefault(attr, {}).setdefault(
            rank, (None if is_rest else record[f"a{attr}"], {})
        )
        per_class[y] = per_class.get(y, 0) + n
        if is_rest:
            # Summed by the engine in any order: snapped so the same counts give the same floats.
            rest[attr] = (_number(record["rest_values"]), snap_total(record["rest_nats"] or 0.0))
    ordered = sorted(class_totals, key=lambda c: (-class_totals[c], class_label(c)))
    classes = tuple(class_label(c) for c in ordered)
    profiles: dict[str, AttributeProfile] = {}
    for index, attribute in enumerate(spec.attributes, start=1):
        found = cells.get(index, {})
        total = sum(sum(per_class.values()) for _, per_class in found.values())
        attribute_cuts = list(cuts.get(attribute.name, ())) if attribute.kind == "numeric" else None
        rows: list[tuple[tuple[Any, ...], ValueProfile]] = []
        for rank, (raw, per_class) in found.items():
            counts = tuple(per_class.get(c, 0) for c in ordered)
            n_x = sum(counts)
            share = n_x / total if total else 0.0
            low = high = None
            merged = 1
            kind: ValueKind
            if rank == -1:
                merged, nats = rest[index]
                kind, label = "other", f"(other {merged:,} values)"
                contribution = nats / total / math.log(2) if total else 0.0
                entropy = contribution / share if share else 0.0
            else:
                if raw is None:
                    kind, label = "missing", MISSING_LABEL
                elif attribute_cuts is not None:
                    kind = "bin"
                    label, low, high = bin_label(int(raw), attribute_cuts,
                                                 attribute.family if attribute.epoch else None)
                else:
                    kind, label = "value", class_label(raw)
                entropy = entropy_bits(counts)
                contribution = share * entropy
            value = ValueProfile(label=label, kind=kind, rows=n_x, share=share, counts=counts,
                                 entropy=entropy, contribution=contribution,
                                 merged_values=merged, low=low, high=high)
            rows.append((_value_sort_key(kind, raw, n_x, rank), value))
        rows.sort(key=lambda pair: pair[0])
        profiles[attribute.name] = AttributeProfile(
            attribute=attribute.name,
            kind=attribute.kind,
            classes=classes,
            values=tuple(v for _, v in rows),
            cuts=tuple(attribute_cuts) if attribute_cuts is not None else None,
            temporal=attribute.family if attribute.epoch else None,
        )
    return Profiles(classes=classes, class_rows=tuple(class_totals[c] for c in ordered),
                    attributes=profiles)


def fetch_profiles(
    engine: Engine,
    spec: RankSpec,
    cuts: Mapping[str, Sequence[float]],
    *,
    max_values: int = DEFAULT_MAX_VALUES,
) -> Profiles:
    """Run :func:`profile_statement` on an open engine and read its rows."""
    statement = profile_statement(spec, engine.caps, cuts, max_values=max_values)
    return read_profiles(engine.fetch(statement.sql).records(), spec, cuts)
