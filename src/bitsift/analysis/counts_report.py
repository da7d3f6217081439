"""The HTML report's runs from stored counts (``bitsift report DEST --from-counts``,
docs/stored-counts.md): a window ranked from the counts (:mod:`bitsift.run.counts_rank`), and
the drill-down of its top attributes from the same counts, summed over the window per value
and class in the database holding them. The drill-down follows the rules of the one counted
from rows (templates/profile.sql.j2): the ``max_values`` most frequent values one by one
(ties in value order), every bin of a numeric attribute, the rest merged with its share of
n·H(Y|X)."""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import replace
from decimal import Decimal
from typing import Any

from bitsift.analysis.profile_model import ProfiledRun, Profiles
from bitsift.analysis.profile_read import read_profiles
from bitsift.errors import ColumnError, Option, Problem, SpecError, unknown_names_message
from bitsift.names import resolve_names, split_names
from bitsift.run.counts_meta import DEFAULT_COUNTS_TABLE
from bitsift.run.counts_rank import (
    StoredWindow,
    display_of,
    open_window,
    rank_window,
    window_options,
    window_spec,
)
from bitsift.run.counts_values import decode, partition_value
from bitsift.run.result import SEGMENT_STATUS, SegmentedRanking, segment_label
from bitsift.run.session import Session, session_for
from bitsift.spec.rankspec import RankSpec, Thresholds
from bitsift.sql.counts_sql import window_cells_statement
from bitsift.sql.sqlstatements import DEFAULT_MAX_VALUES

#: One drill-down cell: (stored attribute index, value, class) -> rows; values and classes
#: as stored (tagged text: a NaN is one value, as in the database), decoded when read out.
Cells = dict[tuple[int, str | None, str | None], int]


def report_counts(dest: Any, *, counts_table: str = DEFAULT_COUNTS_TABLE,
                  since: str | int | None = None, until: str | int | None = None,
                  by_partition: bool = False, top: int | None = None,
                  max_values: int = DEFAULT_MAX_VALUES,
                  sensitive: str | Iterable[str] | None = None,
                  sort: str = "information_gain", limit: int | None = None,
                  missing: str = "category", thresholds: Thresholds | None = None,
                  timeout: float | None = None, confidence: float = 0.95) -> list[ProfiledRun]:
    """The report's runs for the window ``[since, until)`` of the counts in ``dest`` (one
    per partition with ``by_partition``): each a ranking and the drill-down of its ``top``
    attributes (None: all), from the counts alone. ``dest``: a counts DEST or an open
    session on the counts table (left open)."""
    if top is not None and top < 1:
        raise SpecError.option("top", f" must be at least 1, not {top}")
    if max_values < 1:
        raise SpecError.option("max_values", f" must be at least 1, not {max_values}")
    options = window_options(sort=sort, limit=limit, missing=missing, thresholds=thresholds,
                             timeout=timeout, confidence=confidence)
    with session_for(dest, counts_table) as session:
        session.set_timeout(timeout)
        window = open_window(session, since, until, counts_table,
                             display_of(dest, session.display))
        spec = window_spec(session, window, options, by_partition)
        marked = _sensitive(sensitive, spec)
        result = rank_window(session, window, options, by_partition)
        parts = result.segments if isinstance(result, SegmentedRanking) else [result]
        chosen = sorted({s.attribute for part in parts
                         for s in part.attributes[: top or None]})
        cells = _cells(session, window, spec, chosen, by_partition)
        record = session.record()
    runs = []
    for part in parts:
        ranking = record.stamp(part)
        key = None if part.segment is None else next(iter(part.segment.values()))
        names = [s.attribute for s in part.attributes][: top or None]
        profiles = (_profiles(cells.get(key, {}), spec, window.meta.cuts, names, max_values,
                              missing == "drop")
                    if part.status == "ok" and names
                    else Profiles(classes=(), class_rows=(), attributes={}))
        label = None
        if part.segment is not None:
            label = segment_label(part.segment)
            if part.status != "ok":
                label += f" ({SEGMENT_STATUS[part.status]})"
        parameters = {
            "source": spec.source_name, "target": spec.target, "dialect": ranking.dialect,
            "attributes": len(spec.attributes), "missing": missing,
            "bins": _stored_bins(window), "binning": "as stored", "binning_for": (),
            "where": window.meta.options.get("where"), "sort": sort, "limit": limit,
            "top": top, "max_values": max_values,
        }
        runs.append(ProfiledRun(ranking=ranking, profiles=profiles, parameters=parameters,
                                sensitive=marked, notes=record.notes, segment=label))
    return runs


def _stored_bins(window: StoredWindow) -> Any:
    return window.meta.options.get("bins")


def _sensitive(names: str | Iterable[str] | None, spec: RankSpec) -> tuple[str, ...]:
    """The ``sensitive`` names as stored (the target and the stored attributes)."""
    stored = [spec.target, *(a.name for a in spec.attributes)]
    found, unknown = resolve_names(split_names(names), stored)
    if unknown:
        raise ColumnError(problems=[Problem("sensitive", (
            unknown_names_message("stored attribute", unknown, stored) + " (",
            Option("sensitive"), ")"))])
    return tuple(dict.fromkeys(found))


def _cells(session: Session, window: StoredWindow, spec: RankSpec, chosen: Sequence[str],
           by_partition: bool) -> dict[Any, Cells]:
    """The window's counts of the target and the ``chosen`` attributes, per partition with
    ``by_partition`` (else under ``None``), values and classes decoded."""
    index = {a.name: i for i, a in enumerate(spec.attributes, start=1)}
    statement = window_cells_statement(session.table, session.engine.caps, window.condition,
                                       sorted(index[n] for n in chosen), by_partition)
    cells: dict[Any, Cells] = {}
    kind = window.meta.partition_kind
    for row in session.engine.fetch(statement).records():
        key = partition_value(row["partition"], kind) if by_partition else None
        cell = (int(row["attribute_index"]), row["value"], row["class"])
        part = cells.setdefault(key, {})
        part[cell] = part.get(cell, 0) + int(row["n"])
    return cells


def _profiles(cells: Cells, spec: RankSpec, cuts: Mapping[str, Sequence[float]],
              names: list[str], max_values: int, drop_missing: bool) -> Profiles:
    """Profiles of the attributes ``names`` from summed cells, through the reader of the
    drill-down statement's rows (:func:`bitsift.analysis.profile_read.read_profiles`)."""
    stored = {a.name: i for i, a in enumerate(spec.attributes, start=1)}
    subset = replace(spec, by=(), attributes=tuple(
        a for n in names for a in spec.attributes if a.name == n))
    records: list[dict[str, Any]] = [
        {"attribute_index": 0, "y": decode(y), "n": n}
        for (attr, _, y), n in sorted(cells.items(), key=_cell_order) if attr == 0]
    for position, attribute in enumerate(subset.attributes, start=1):
        own = {(v, y): n for (attr, v, y), n in cells.items()
               if attr == stored[attribute.name] and not (drop_missing and v is None)}
        limit = max_values if attribute.kind != "numeric" else len(own) + 2
        records += _attribute_records(position, own, limit)
    return read_profiles(records, subset, cuts)


def _attribute_records(position: int, cells: Mapping[tuple[str | None, str | None], int],
                       limit: int) -> list[dict[str, Any]]:
    """One attribute's rows as templates/profile.sql.j2 gives them: values ranked by rows
    (ties by value), the first ``limit`` one by one, the rest as one row per class."""
    totals: dict[str | None, int] = {}
    for (value, _), n in cells.items():
        totals[value] = totals.get(value, 0) + n
    order = sorted(totals, key=lambda v: (-totals[v], _orderable(v)))
    rank = {v: i for i, v in enumerate(order, start=1)}
    records: list[dict[str, Any]] = []
    rest: dict[str | None, int] = {}
    for (value, y), n in sorted(cells.items(), key=lambda c: (rank[c[0][0]],
                                                              _orderable(c[0][1]))):
        if rank[value] <= limit:
            records.append({"attribute_index": position, "value_rank": rank[value],
                            f"a{position}": decode(value), "y": decode(y), "n": n,
                            "rest_values": 0, "rest_nats": 0.0})
        else:
            rest[y] = rest.get(y, 0) + n
    merged = [v for v in order if rank[v] > limit]
    if merged:
        nats = (math.fsum(totals[v] * math.log(totals[v]) for v in merged)
                - math.fsum(n * math.log(n) for (v, _), n in cells.items()
                            if rank[v] > limit and n > 0))
        records += [{"attribute_index": position, "value_rank": limit + 1,
                     f"a{position}": None, "y": decode(y), "n": n,
                     "rest_values": len(merged), "rest_nats": nats}
                    for y, n in sorted(rest.items(), key=lambda item: _orderable(item[0]))]
    return records


def _orderable(text: str | None) -> tuple[int, Any]:
    """A sort key for stored values of one column: numbers by value (NaN after them), other
    values by their text, NULL last."""
    value = decode(text)
    if value is None:
        return (3, "")
    if isinstance(value, int | float | Decimal) and not isinstance(value, bool):
        return (1, 0) if value != value else (0, value)
    return (2, str(value))


def _cell_order(item: tuple[tuple[int, str | None, str | None], int]) -> tuple[Any, ...]:
    (attr, value, y), _ = item
    return (attr, _orderable(value), _orderable(y))
