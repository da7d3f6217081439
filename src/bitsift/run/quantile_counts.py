"""Quantile-binned attributes ranked in run mode from bucket counts, never binned row by row.

:mod:`bitsift.run.quantiles` finds exact quantile cut points without sorting a column; the ranking
statement then bins every row with a CASE over those cut points, which on DuckDB costs as
much as the counting itself (benchmarks/RESULTS.md). Here one scan counts each attribute's
rows per (equal-width bucket, class), and that serves both the choice of the cut points and
the bins' counts:

1. ``quantile_ranges.sql.j2``: the lowest and highest value (free on DuckDB);
2. ``quantile_cells.sql.j2``: rows per (bucket, class), NULL values and NULL targets included,
   with each cell's lowest and highest value;
3. only where step 2 cannot place a cut point well (below): ``quantile_splits.sql.j2``, in the
   few buckets holding a wanted rank, that rank's value ``v`` and, per class, the bucket's rows
   below ``v`` and equal to it;
4. the ranking statement's own formulas, computed here from the counts already in the client
   (:func:`bitsift.run.metrics.table_row`): no statement sends them back to the database, so
   their number is not capped and every dialect that runs steps 1-3 can count this way.

The bucket ``FLOOR((value - lo) * scale)`` never decreases as the value grows, so every row of
an earlier bucket lies below a later bucket's values, and equal values share a bucket. Hence
a bucket's lowest value ``m`` is a cut point with exactly the earlier buckets below it
(``value < m`` holds for those rows and for no other): any union of consecutive buckets is a
bin whose count per class step 2 gives exactly, and whose edge bitsift can report.

**How the cut points are chosen** (:func:`_edge`; ``n`` rows with a value, level ``p``,
``h = (n - 1) p``, ``k = floor(h)``, numpy's linear quantile ``q`` between the order statistics
``v[k]`` and ``v[k + 1]``):

- ``q`` itself, numpy's value bit for bit, where step 2 places it on a bucket edge: when
  ``v[k]`` is the last value of its bucket and ``v[k + 1]`` the first of a later one (both are
  the buckets' highest and lowest values), or ``q`` equals the lowest value of its bucket
  (a bucket of one value: ties);
- otherwise the lowest value of the bucket holding ``v[k]`` or of the next non-empty bucket,
  whichever leaves below it a number of rows nearer to ``ceil(h)`` (the rows below ``q`` when
  no two values tie; the lower edge on a tie). That cut point lies within one fine bucket of
  ``q``, its bins are exact unions of buckets, and the rows below it differ from ``q``'s by
  at most half a bucket;
- when that difference exceeds :data:`NEAR_SHARE` of a bin's rows (``n / bins``), the
  attribute's buckets are too coarse where its quantiles lie (heavy tails: most rows in one
  equal-width bucket), and step 3 finds its exact quantiles: a cut point ``c`` interpolated
  between ``v[k]`` and ``v[k + 1]`` has below it the buckets before ``v[k]``'s, the rows of
  that bucket below ``v[k]``, and the rows equal to ``v[k]`` when ``v[k] < c`` (no value lies
  strictly between two consecutive order statistics): every bin's count, to the row;
- up to :data:`EXACT_ROWS` rows, every cut point is exact (step 3 reads so few rows that it
  costs nothing measurable): small tables get numpy's cut points, as pasted statements do.

So above ``EXACT_ROWS`` rows a run-mode cut point may differ from the exact quantile that a
pasted statement (``bitsift sql``, the bounds CTE) computes: by at most one fine bucket (of
1,024 or more over the column's range), and its bins are counted exactly at the cut point
reported; the ranking, the history and every later statement (drill-down, pairs) use that
reported cut point.

Where step 2 shows an infinite or NaN value, or step 3 a bucket whose rows changed (the table
changed in between), the attribute is ranked the usual way (:func:`bitsift.run.cuts.fetch_cuts`,
then the ranking statement). Segments (``--by``) and weights take the usual way too.
"""

from __future__ import annotations

import bisect
import math
from collections import defaultdict
from collections.abc import Hashable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

from bitsift.engines.base import Engine
from bitsift.run.cuts import fetch_cuts
from bitsift.run.metrics import table_row
from bitsift.run.parts import Record, merge_parts
from bitsift.run.quantiles import Plan, fetch_plans, interpolate, quantile_indexes
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.sqlbuild import rank_statement
from bitsift.sql.sqlstatements import quantile_cells_statement, quantile_splits_statement

#: A cut point on a bucket edge stands for the exact quantile when the rows it leaves below
#: it differ from the exact quantile's by at most this share of a bin's rows (1 % of the
#: rows at 10 bins); otherwise that attribute's exact quantiles are found (step 3).
NEAR_SHARE = 0.1
#: Up to this many rows with a value, every cut point is exact: step 3 reads so few rows that
#: it costs next to nothing (measured on DuckDB: 2M rows x 4 numeric columns, step 3 took
#: 0.28 s alone, against 0.23 s for step 2).
EXACT_ROWS = 100_000

#: A class as Python sees it (NaN made equal to NaN, as the engines group it); None: NULL.
ClassKey = Hashable
PerClass = dict[ClassKey, int]

class _NaN:
    """The one key of every NaN class value (NaN never equals itself in Python)."""

    def __repr__(self) -> str:
        return "NaN"


_NAN = _NaN()


def class_key(value: Any) -> ClassKey:
    return _NAN if isinstance(value, float) and math.isnan(value) else value


def counts_apply(spec: RankSpec) -> bool:
    """Whether the attributes binned by quantile can be ranked from bucket counts."""
    return not spec.by and not spec.weight and bool(quantile_indexes(spec))


@dataclass
class Cells:
    """Step 2's counts of one attribute (rows with a target only, except ``all_rows``)."""

    plan: Plan
    #: bucket -> class -> rows, for rows with a value.
    buckets: dict[int, PerClass] = field(default_factory=lambda: defaultdict(dict))
    #: class -> rows without a value.
    missing: PerClass = field(default_factory=dict)
    #: class (None included) -> rows, every row: the target's own counts.
    all_rows: PerClass = field(default_factory=dict)
    #: bucket -> its lowest and its highest value, over the rows with a target.
    low: dict[int, float] = field(default_factory=dict)
    high: dict[int, float] = field(default_factory=dict)
    #: The buckets in order and the rows per class before each (and after the last).
    _running: tuple[list[int], list[PerClass]] | None = field(default=None, repr=False)

    def totals(self) -> PerClass:
        found: PerClass = defaultdict(int)
        for per_class in self.buckets.values():
            for key, n in per_class.items():
                found[key] += n
        return found

    def before(self, bucket: int) -> PerClass:
        """Rows per class in the buckets before ``bucket`` (running sums, made once)."""
        if self._running is None:
            order = sorted(self.buckets)
            running: list[PerClass] = [{}]
            for b in order:
                total = dict(running[-1])
                for key, n in self.buckets[b].items():
                    total[key] = total.get(key, 0) + n
                running.append(total)
            self._running = (order, running)
        order, running = self._running
        return dict(running[bisect.bisect_left(order, bucket)])


@dataclass(frozen=True)
class Split:
    """Step 3's row for one wanted (bucket, position)."""

    value: float
    bucket_rows: int
    less: PerClass
    equal: PerClass


def _add(into: PerClass, key: ClassKey, n: int) -> None:
    into[key] = into.get(key, 0) + n


def _cells(engine: Engine, spec: RankSpec, plans: Mapping[int, Plan]) -> dict[int, Cells]:
    """Step 2, read; an attribute showing a bucket that is not a finite number is unusable."""
    shapes = {i: (p.low, p.scale) for i, p in plans.items()}
    cells = {i: Cells(plan=p) for i, p in plans.items()}
    result = engine.fetch(quantile_cells_statement(spec, engine.caps, shapes).sql)
    at = {name: result.columns.index(name)
          for name in ("attribute_index", "bucket", "y", "n", "v_low", "v_high")}
    for row in result.rows:  # thousands of rows: read by position, not as dicts
        found = cells[int(row[at["attribute_index"]])]
        key, bucket, n = class_key(row[at["y"]]), row[at["bucket"]], int(row[at["n"]])
        _add(found.all_rows, key, n)
        if bucket is not None and not (isinstance(bucket, int | float) and math.isfinite(bucket)):
            found.plan.usable = False
        elif key is None:
            continue
        elif bucket is None:
            _add(found.missing, key, n)
        else:
            b = int(bucket)
            _add(found.buckets[b], key, n)
            low, high = float(row[at["v_low"]]), float(row[at["v_high"]])
            if low < found.low.get(b, math.inf):
                found.low[b] = low
            if high > found.high.get(b, -math.inf):
                found.high[b] = high
    for found in cells.values():
        found.plan.bucket_rows = {b: sum(c.values()) for b, c in found.buckets.items()}
    return cells


def _splits(engine: Engine, spec: RankSpec, searched: Mapping[int, Plan],
            ) -> dict[tuple[int, int, int], Split]:
    """Step 3, read: (attribute, bucket, position) -> its value and its bucket's split."""
    shapes = {i: (p.low, p.scale) for i, p in searched.items()}
    picks = {i: plan.picks() for i, plan in searched.items()}
    statement = quantile_splits_statement(spec, engine.caps, shapes, picks)
    found: dict[tuple[int, int, int], Split] = {}
    for record in engine.fetch(statement.sql).records():
        where = (int(record["attribute_index"]), int(record["bucket"]), int(record["position"]))
        split = found.setdefault(where, Split(float(record["v"]), int(record["bucket_rows"]),
                                              {}, {}))
        key = class_key(record["y"])
        _add(split.less, key, int(record["n_less"]))
        _add(split.equal, key, int(record["n_equal"]))
    return found


def _bins(cells: Cells, splits: Mapping[tuple[int, int, int], Split],
          ) -> tuple[list[float], list[PerClass]] | None:
    """Cut points and rows per class of each bin (bin j: the values from cut j - 1 up to
    cut j), or None when step 3 does not match step 2. The plan's levels are planned
    (:meth:`~bitsift.run.quantiles.Plan.plan_levels`) unless it has one value or none."""
    plan = cells.plan
    totals = cells.totals()
    if plan.count == 0:
        return [], [dict(totals)]
    if plan.low == plan.high:  # one value: every quantile is that value, no row below it
        return [plan.low], [{}, dict(totals)]
    below: dict[float, PerClass] = {}
    for h, k, k1 in plan.wanted:
        low_at, high_at = plan.locate(k), plan.locate(k1)
        low, high = splits.get((plan.index, *low_at)), splits.get((plan.index, *high_at))
        if low is None or high is None:
            return None
        for at, split in ((low_at, low), (high_at, high)):
            if split.bucket_rows != plan.bucket_rows.get(at[0]):
                return None  # the table changed between steps 2 and 3
        cut = interpolate(low.value, high.value, h - k)
        if cut in below:
            continue
        counted = cells.before(low_at[0])
        for key, n in low.less.items():
            _add(counted, key, n)
        if low.value < cut:
            for key, n in low.equal.items():
                _add(counted, key, n)
        below[cut] = counted
    cuts = sorted(below)
    counts = _differences([below[c] for c in cuts] + [totals])
    if any(n < 0 for per_class in counts for n in per_class.values()):
        return None  # cannot happen with consistent steps: never trust it silently
    return cuts, counts


def _known(cells: Cells, bucket: int, position: int) -> float | None:
    """The value at ``position`` (from 1) of ``bucket`` where the bucket's lowest and highest
    values give it (its first or last row, or a bucket of one value), else None."""
    low, high = cells.low[bucket], cells.high[bucket]
    if position == 1 or low == high:
        return low
    return high if position == cells.plan.bucket_rows[bucket] else None


def _edge(cells: Cells, bins: int, h: float, k: int, k1: int,
          near_share: float) -> tuple[float, int] | None:
    """One quantile level's cut point and the bucket it starts (the cut leaves exactly the
    buckets before that one below it), or None when the level needs step 3.

    The exact quantile (numpy's, from ``v[k]`` and ``v[k1]``) where the counts alone place it
    on a bucket edge: between the last value of one bucket and the first of the next, or on
    the lowest value of its bucket. Otherwise the lowest value of the bucket holding ``v[k]``
    or of the next bucket, whichever leaves below it a row count nearer to ``ceil(h)`` (the
    rows below the exact quantile when no two values tie; the lower one on a tie); None when
    that count is further from ``ceil(h)`` than ``near_share`` of a bin's rows."""
    plan = cells.plan
    (bucket, position), (bucket1, position1) = plan.locate(k), plan.locate(k1)
    low, high = _known(cells, bucket, position), _known(cells, bucket1, position1)
    if low is not None and high is not None:
        cut = interpolate(low, high, h - k)
        if cut > low and bucket1 != bucket:
            return cut, bucket1
        if cut == low == cells.low[bucket]:
            return cut, bucket
    at = plan.order.index(bucket)
    target = math.ceil(h)
    candidates = [(abs(plan.offsets[at] - target), plan.offsets[at], bucket)]
    if at + 1 < len(plan.order):
        after = plan.offsets[at + 1]
        candidates.append((abs(after - target), after, plan.order[at + 1]))
    miss, _, chosen = min(candidates)
    if miss > near_share * plan.count / bins:
        return None
    return cells.low[chosen], chosen


def _near_bins(cells: Cells, bins: int, near_share: float,
               ) -> tuple[list[float], list[PerClass]] | None:
    """Cut points on bucket edges (:func:`_edge`) and each bin's rows per class, from step 2
    alone; None when some level needs step 3. The plan's levels are planned."""
    starts: dict[float, int] = {}
    for h, k, k1 in cells.plan.wanted:
        found = _edge(cells, bins, h, k, k1, near_share)
        if found is None:
            return None
        cut, bucket = found
        starts[cut] = bucket  # equal cut points merged, as the exact ones are
    cuts = sorted(starts)
    bounds = [cells.before(starts[c]) for c in cuts] + [cells.totals()]
    return cuts, _differences(bounds)


def _differences(bounds: Sequence[PerClass]) -> list[PerClass]:
    """Each bin's rows per class from the rows below each cut point (and the total last)."""
    counts: list[PerClass] = []
    previous: PerClass = {}
    for bound in bounds:
        counts.append({k: bound.get(k, 0) - previous.get(k, 0)
                       for k in set(bound) | set(previous)})
        previous = bound
    return counts


def _table(per_value: Sequence[PerClass], classes: Sequence[ClassKey]) -> list[list[int]]:
    """Value x class counts: one row per value, one column per class of ``classes``."""
    return [[per_class.get(key, 0) for key in classes] for per_class in per_value]


def _counted_records(spec: RankSpec, indexes: Sequence[int], cells: Mapping[int, Cells],
                     binned: Mapping[int, tuple[list[float], list[PerClass]]]) -> list[Record]:
    """The ranking statement's rows (the target's, then each attribute's, numbered 1..K in
    ``indexes`` order) computed here from the counts, by the statement's own formulas
    (:func:`bitsift.run.metrics.table_row`): the counts are already in the client."""
    all_rows = cells[indexes[0]].all_rows
    classes = [key for key in all_rows if key is not None]
    shared = {"rows_excluded": all_rows.get(None, 0)}
    tables: list[tuple[int, str, str, list[PerClass]]] = [
        (0, spec.target, "target", [{k: n for k, n in all_rows.items() if k is not None}])]
    for position, i in enumerate(indexes, start=1):
        attribute = spec.attributes[i - 1]
        per_value = list(binned[i][1])
        if spec.options.missing != "drop":
            per_value.append(cells[i].missing)  # NULL: one more value
        tables.append((position, attribute.name, attribute.kind, per_value))
    records = []
    for position, name, kind, per_value in tables:
        row = table_row(_table(per_value, classes))
        if row is not None:  # no row counted: the statement has no row for it either
            records.append({"attribute_index": position, "attribute": name, "kind": kind,
                            **shared, **row})
    return records


def rank_counted(engine: Engine, spec: RankSpec, buckets: int | None = None,
                 exact_rows: int | None = None,
                 ) -> tuple[list[Record], dict[str, list[float]]]:
    """Result rows (as the ranking statement returns them, ``attribute_index`` numbering
    ``spec.attributes``, the target's row included) and cut points of every attribute of
    ``spec``: those binned by quantile from counts, any other the usual way. ``buckets``: as
    many as :func:`bitsift.run.quantiles.bucket_count` gives for the source's rows, unless
    given. ``exact_rows``: up to how many rows every cut point is exact (default
    :data:`EXACT_ROWS`)."""
    small = EXACT_ROWS if exact_rows is None else exact_rows
    indexes = quantile_indexes(spec) if counts_apply(spec) else []
    plans = fetch_plans(engine, spec, indexes, buckets) if indexes else {}
    cells = _cells(engine, spec, plans) if plans else {}
    binned: dict[int, tuple[list[float], list[PerClass]]] = {}
    refined: dict[int, Plan] = {}
    for i, found in cells.items():
        plan = found.plan
        if not plan.usable:
            continue
        if plan.count == 0 or plan.low == plan.high:
            result = _bins(found, {})
        else:
            bins = spec.attributes[i - 1].bins or 2
            plan.plan_levels(bins)
            result = _near_bins(found, bins, 0.0 if plan.count <= small else NEAR_SHARE)
            if result is None:
                refined[i] = plan
                continue
        if result is not None:
            binned[i] = result
    splits = _splits(engine, spec, refined) if refined else {}
    for i in refined:
        result = _bins(cells[i], splits)
        if result is not None:
            binned[i] = result
    counted = [i for i in indexes if i in binned]
    parts: list[tuple[list[int], list[Record]]] = []
    cuts: dict[str, list[float]] = {}
    if counted:
        parts.append((counted, _counted_records(spec, counted, cells, binned)))
        cuts.update({spec.attributes[i - 1].name: binned[i][0] for i in counted})
    rest = [i for i in range(1, len(spec.attributes) + 1) if i not in counted]
    if rest:
        narrowed = replace(spec, attributes=tuple(spec.attributes[i - 1] for i in rest))
        known = {spec.attributes[i - 1].name: binned[i][0] for i in rest if i in binned}
        found_cuts = {**fetch_cuts(engine, _without(narrowed, known)), **known}
        statement = rank_statement(narrowed, engine.caps, found_cuts)
        parts.append((rest, engine.fetch(statement.sql).records()))
        cuts.update(found_cuts)
    return merge_parts(parts), cuts


def _without(spec: RankSpec, known: Mapping[str, object]) -> RankSpec:
    """``spec`` without the attributes whose cut points are ``known`` (none left to find)."""
    return replace(spec, attributes=tuple(a for a in spec.attributes if a.name not in known))

