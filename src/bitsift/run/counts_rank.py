"""Ranking a window of stored counts (``bitsift rank DEST --from-counts``), computed in the
database that holds them: the ranking statement's steps from ``cells`` on, fed by the counts
table (:func:`bitsift.sql.counts_sql.stored_rank_statement`), read into the same
:class:`~bitsift.run.result.Ranking` as a ranking of the rows."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlglot import exp

from bitsift.engines.base import Engine
from bitsift.engines.masking import mask_url
from bitsift.errors import DataError, Option, Problem, SpecError
from bitsift.run.counts_meta import DEFAULT_COUNTS_TABLE, CountsMeta
from bitsift.run.counts_values import parse_partition
from bitsift.run.readout import read_ranking, read_segments
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.run.session import Session, session_for
from bitsift.spec.rankspec import AttributeSpec, RankOptions, RankSpec, Thresholds
from bitsift.sql.counts_sql import (
    META_COLUMNS,
    META_SUFFIX,
    StoredAttribute,
    extent_statement,
    meta_table,
    select_statement,
    stored_rank_statement,
    window_condition,
)


def read_meta(engine: Engine, table: exp.Expression, display: str) -> CountsMeta:
    """The counts' metadata, read through ``engine``."""
    where = f"counts table {table.name} in {display}"
    try:
        rows = engine.fetch(select_statement(meta_table(table), META_COLUMNS, engine.caps)).rows
    except DataError:
        raise
    except Exception as error:  # noqa: BLE001 - any driver's "no such table"
        raise DataError(f"{where}: cannot read its metadata table {table.name}{META_SUFFIX}"
                        f" ({str(error).splitlines()[0] if str(error) else error!r}); build "
                        "the counts with `bitsift counts` first") from None
    return CountsMeta.from_rows(rows, where)


def rank_counts(dest: Any, *, counts_table: str = DEFAULT_COUNTS_TABLE,
                since: str | int | None = None, until: str | int | None = None,
                by_partition: bool = False, sort: str = "information_gain",
                limit: int | None = None, missing: str = "category",
                thresholds: Thresholds | None = None, timeout: float | None = None,
                confidence: float = 0.95,
                keys: tuple[str, str] = ("since", "until")) -> Ranking | SegmentedRanking:
    """Rank the window ``[since, until)`` of the counts stored in ``dest`` (a DuckDB file, a
    SQLAlchemy URL or connection): the same result as ranking the source's rows of those
    partitions with numeric attributes cut at the stored cut points. ``by_partition``: one
    ranking per partition (a :class:`SegmentedRanking` whose segment is the partition).
    ``dest``: also an open session on the counts table (left open). ``keys``: the options
    naming the window's ends, for messages."""
    options = window_options(sort=sort, limit=limit, missing=missing, thresholds=thresholds,
                             timeout=timeout, confidence=confidence)
    with session_for(dest, counts_table) as session:
        session.set_timeout(options.timeout)
        window = open_window(session, since, until, counts_table,
                             display_of(dest, session.display), keys)
        result = rank_window(session, window, options, by_partition)
        # Each score's binning comes from the stored attributes (the window's spec).
        return session.record().stamp(result)


@dataclass(frozen=True)
class StoredWindow:
    """A window of stored counts, checked: the counts' metadata, the condition on the
    counts table's partitions and the window in words."""

    meta: CountsMeta
    condition: exp.Expression | None
    described: str


def open_window(session: Session, since: str | int | None, until: str | int | None,
                counts_table: str, shown: str,
                keys: tuple[str, str] = ("since", "until")) -> StoredWindow:
    """The window ``[since, until)`` of the counts table ``session`` is open on; a window
    without stored partitions is an error naming those stored."""
    engine = session.engine
    meta = read_meta(engine, session.table, shown)
    low, high = parse_window(since, until, meta.partition_kind, keys)
    condition = window_condition(low, high, meta.partition_kind)
    described = _window_text(meta, low, high)
    extent = engine.fetch(extent_statement(session.table, engine.caps, condition)).records()[0]
    if not extent["partitions"]:
        stored = engine.fetch(extent_statement(session.table, engine.caps, None)).records()[0]
        have = (f"stored: {stored['first']} to {stored['last']}" if stored["partitions"]
                else "none stored")
        raise DataError(f"no stored partitions {described} in counts table {counts_table} "
                        f"in {shown} ({have}): nothing to rank")
    return StoredWindow(meta, condition, described)


def window_spec(session: Session, window: StoredWindow, options: RankOptions,
                by_partition: bool) -> RankSpec:
    """The request a window's ranking answers: the stored target and attributes (their
    kinds and binning as stored), the partition as the segment with ``by_partition``."""
    meta = window.meta
    return RankSpec(
        source=session.table, source_name=f"{meta.source} {window.described}",
        target=meta.target, options=_with_target(options, meta.target),
        attributes=tuple(AttributeSpec(a["name"], a["kind"], a.get("family", "other"),
                                       binning=a.get("binning"), bins=a.get("bins"))
                         for a in meta.attributes),
        by=(AttributeSpec(meta.partition, "categorical", "other"),) if by_partition else (),
    )


def rank_window(session: Session, window: StoredWindow, options: RankOptions,
                by_partition: bool) -> Ranking | SegmentedRanking:
    """The window ranked in the database holding the counts (one statement)."""
    engine, meta = session.engine, window.meta
    attributes = [StoredAttribute(i, a["name"], a["kind"])
                  for i, a in enumerate(meta.attributes, start=1)]
    statement = stored_rank_statement(
        engine.caps, session.table, meta.target, attributes, window=window.condition,
        by_partition=by_partition, drop_missing=options.missing == "drop", order_by=None,
        z=options.z)
    records = engine.fetch(statement.sql).records()
    spec = window_spec(session, window, options, by_partition)
    if by_partition:
        return read_segments(records, spec, meta.cuts, dialect=engine.caps.name)
    return read_ranking(records, spec, meta.cuts, dialect=engine.caps.name)


def parse_window(since: str | int | None, until: str | int | None, kind: str,
                 keys: tuple[str, str] = ("since", "until"),
                 ) -> tuple[str | int | None, str | int | None]:
    """A window's ends checked against the partition kind, the first before the second."""
    low = None if since is None else parse_partition(since, kind, keys[0])
    high = None if until is None else parse_partition(until, kind, keys[1])
    if low is not None and high is not None and not low < high:  # type: ignore[operator]
        raise SpecError(problems=[Problem(keys[0], (
            Option(keys[0]), f" {low} is not before ", Option(keys[1]), f" {high}: the window "
            "[since, until) holds no partition"))])
    return low, high


def window_options(*, sort: str = "information_gain", limit: int | None = None,
                   missing: str = "category", thresholds: Thresholds | None = None,
                   timeout: float | None = None, confidence: float = 0.95) -> RankOptions:
    """The options of ranking a window (the target comes from the counts)."""
    return RankOptions(target="-", sort=sort, limit=limit, missing=missing,  # type: ignore[arg-type]
                       thresholds=thresholds or Thresholds(), timeout=timeout,
                       confidence=confidence)


def display_of(dest: Any, fallback: str) -> str:
    """The destination for messages: a file's path, a URL without its password."""
    if isinstance(dest, str | Path):
        text = str(dest)
        return mask_url(text) if "://" in text else text
    return fallback


def _with_target(options: RankOptions, target: str) -> RankOptions:
    return RankOptions(target=target, sort=options.sort, limit=options.limit,
                       missing=options.missing, thresholds=options.thresholds,
                       timeout=options.timeout)


def _window_text(meta: CountsMeta, since: str | int | None, until: str | int | None) -> str:
    """The window in words, e.g. ``[2026-01-01, 2026-01-31) of day``."""
    if since is None and until is None:
        return f"(all {meta.partition} partitions)"
    low = "..." if since is None else str(since)
    high = "..." if until is None else str(until)
    return f"({meta.partition} in [{low}, {high}))"
