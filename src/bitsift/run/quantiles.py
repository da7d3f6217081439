"""Exact quantile cut points in run mode without sorting a whole column.

An engine's exact quantile aggregate (DuckDB's ``quantile_cont``, ``PERCENTILE_CONT``) keeps
every value of the column in memory and sorts or selects over all of them: on a 10-million-row
table that is most of a ranking's time and memory (benchmarks/RESULTS.md). Here the same
cut points come from three small aggregate statements, and only aggregates leave the database:

1. ``quantile_ranges.sql.j2``: the lowest and highest value of each attribute over the whole
   source (free on DuckDB, which answers it from its column statistics);
2. ``quantile_buckets.sql.j2``: the values counted in :data:`BUCKETS` equal-width buckets
   ``FLOOR((value - lo) * scale)``, a non-decreasing function of the value, so each bucket
   holds a run of consecutive values in sorted order and the running counts say which bucket
   holds the value of a given rank; summed, they give the count ``n`` of values in the rows
   the ranking reads (target present, ``--where`` true);
3. ``quantile_picks.sql.j2``: within those few buckets only, the values numbered in order,
   and the wanted ranks' values returned, with their bucket's row count.

The cut point at level p is then that of numpy's default ("linear") method and of
``quantile_cont``: with ``h = (n - 1) p`` and ``k = floor(h)``,
``v[k] + (h - k) (v[k + 1] - v[k])`` over the sorted values ``v`` (0-based), rounded as numpy
rounds it (:func:`interpolate`). DuckDB's own aggregate can differ in the last bit; since no
value lies strictly between two consecutive order statistics, that changes a bin only if the
last bit moves a cut point onto one of them.

Nothing is approximated: a bucket that holds most of the rows (a very skewed column) only
makes step 3 read more of them. Where the method does not apply (an infinite or NaN value,
a range too wide for a finite scale) or steps 2 and 3 disagree (the table changed between
them), the attribute falls back to the dialect's one-statement quantile (the bounds pre-pass).
"""

from __future__ import annotations

import bisect
import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from bitsift.engines.base import Engine
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.sqlbuild import quantile_levels
from bitsift.sql.sqlstatements import (
    quantile_buckets_statement,
    quantile_picks_statement,
    quantile_ranges_statement,
)

#: Equal-width buckets per attribute in step 2, at least. Measured on DuckDB, 10M rows x 4
#: numeric columns: 256/1,024/4,096 buckets took 0.29/0.35/0.37 s for step 2 and
#: 0.33/0.30/0.27 s for step 3; more buckets make step 2's hash table larger, fewer make step 3
#: number more rows (bitsift.run.quantile_counts, 10M rows: 1,024-8,192 within noise).
BUCKETS = 1024
#: Beyond BUCKETS x ROWS_PER_BUCKET rows, more buckets: step 3 numbers the rows of a few
#: buckets in memory, so their size stays bounded as the table grows ...
ROWS_PER_BUCKET = 8192
#: ... up to this many, since step 2 returns a row per bucket (and class) to the client.
MAX_BUCKETS = 16384


def bucket_count(rows: int) -> int:
    """Buckets for a source of ``rows`` rows: about ``ROWS_PER_BUCKET`` rows each, within
    [BUCKETS, MAX_BUCKETS].

    >>> bucket_count(10_000), bucket_count(30_000_000), bucket_count(10**12)
    (1024, 3662, 16384)
    """
    return min(MAX_BUCKETS, max(BUCKETS, rows // ROWS_PER_BUCKET))


def interpolate(low: float, high: float, fraction: float) -> float:
    """The linear method's value ``fraction`` of the way from ``low`` to ``high``, computed as
    numpy computes it (from the nearer end: ``high - (high - low)(1 - fraction)`` when
    ``fraction >= 0.5``), so the cut points equal ``numpy.quantile``'s bit for bit; kept
    within [low, high] so no value between two order statistics' ranks can change bins."""
    span = high - low
    value = high - span * (1 - fraction) if fraction >= 0.5 else low + span * fraction
    return min(max(value, low), high)


@dataclass
class Plan:
    """What the three steps found for one attribute."""

    index: int
    low: float
    high: float
    scale: float
    #: Step 2: bucket -> rows; a bucket that is not a finite number (a NaN or infinite value
    #: the statistics of step 1 did not show) makes the plan unusable.
    bucket_rows: dict[int, int] = field(default_factory=dict)
    usable: bool = True
    #: Per level: (h, rank k, rank k + 1), ranks 0-based.
    wanted: list[tuple[float, int, int]] = field(default_factory=list)
    #: The non-empty buckets in order, and the rows before each.
    order: list[int] = field(default_factory=list)
    offsets: list[int] = field(default_factory=list)

    @property
    def count(self) -> int:
        return sum(self.bucket_rows.values())

    def plan_levels(self, bins: int) -> None:
        """The ranks each quantile level needs, and where the buckets start."""
        count = self.count
        for level in quantile_levels(bins):
            h = (count - 1) * level
            k = math.floor(h)
            self.wanted.append((h, k, min(k + 1, count - 1)))
        self.order = sorted(self.bucket_rows)
        self.offsets = list(itertools.accumulate(
            (self.bucket_rows[b] for b in self.order[:-1]), initial=0))

    def locate(self, rank: int) -> tuple[int, int]:
        """(bucket, position from 1) of the value of 0-based ``rank``."""
        at = bisect.bisect_right(self.offsets, rank) - 1
        return self.order[at], rank - self.offsets[at] + 1

    def picks(self) -> set[tuple[int, int]]:
        return {self.locate(rank) for _, k, k1 in self.wanted for rank in (k, k1)}


def _finite(*values: object) -> bool:
    return all(isinstance(v, int | float) and math.isfinite(v) for v in values)


def plans_for(ranges: Mapping[str, object], indexes: list[int], buckets: int) -> dict[int, Plan]:
    """Step 1's row read: a plan for each attribute with a finite range."""
    plans = {}
    for i in indexes:
        low, high = ranges[f"lo{i}"], ranges[f"hi{i}"]
        if low is None or high is None:
            plans[i] = Plan(index=i, low=0.0, high=0.0, scale=1.0)  # no value at all
            continue
        low, high = float(low), float(high)  # type: ignore[arg-type]
        # Infinities and NaN (sorted above every number by DuckDB and PostgreSQL) are left
        # to the engine's own quantile, as is a range too wide for a finite scale.
        scale = buckets / (high - low) if high > low else 1.0
        if _finite(low, high, high - low, scale) and scale > 0:
            plans[i] = Plan(index=i, low=low, high=high, scale=scale)
    return plans


def quantile_indexes(spec: RankSpec) -> list[int]:
    """Positions (from 1) of the attributes binned by quantile: numeric, no other binning."""
    return [i for i, a in enumerate(spec.attributes, start=1)
            if a.kind == "numeric" and (a.binning or "quantile") == "quantile"]


def fetch_plans(engine: Engine, spec: RankSpec, indexes: list[int],
                buckets: int | None = None) -> dict[int, Plan]:
    """Step 1, run and read: the plans of the attributes numbered ``indexes``, with as many
    buckets as :func:`bucket_count` gives for the source's rows, unless ``buckets`` says."""
    ranges = engine.fetch(quantile_ranges_statement(spec, engine.caps, indexes).sql).records()[0]
    return plans_for(ranges, indexes, buckets or bucket_count(int(ranges["row_count"] or 0)))


def bucketed_cuts(engine: Engine, spec: RankSpec,
                  buckets: int | None = None) -> dict[str, list[float]]:
    """Cut points of the attributes binned by quantile, by name, for those the method serves
    (the others are left to the bounds pre-pass). Duplicates are kept, as the bounds
    pre-pass keeps them: the caller merges them. ``buckets``: as many as
    :func:`bucket_count` gives for the source's rows, unless given."""
    indexes = quantile_indexes(spec)
    if not indexes:
        return {}
    plans = fetch_plans(engine, spec, indexes, buckets)
    if not plans:
        return {}
    shapes = {i: (p.low, p.scale) for i, p in plans.items()}
    counted = engine.fetch(quantile_buckets_statement(spec, engine.caps, shapes).sql)
    for record in counted.records():
        plan = plans[int(record["attribute_index"])]
        bucket = record["bucket"]
        if _finite(bucket):
            plan.bucket_rows[int(bucket)] = int(record["n"])
        else:
            plan.usable = False
    cuts: dict[str, list[float]] = {}
    searched: dict[int, Plan] = {}
    for i, plan in plans.items():
        attribute = spec.attributes[i - 1]
        if not plan.usable:
            continue
        if plan.count == 0:
            cuts[attribute.name] = []  # no value in the rows the ranking reads
        elif plan.low == plan.high:
            cuts[attribute.name] = [plan.low]  # one value: every quantile is that value
        else:
            plan.plan_levels(attribute.bins or 2)
            searched[i] = plan
    if not searched:
        return cuts
    picks = {i: plan.picks() for i, plan in searched.items()}
    picked = engine.fetch(quantile_picks_statement(spec, engine.caps, shapes, picks).sql)
    values: dict[tuple[int, int, int], float] = {}
    for record in picked.records():
        i, bucket = int(record["attribute_index"]), int(record["bucket"])
        # A bucket's rows differing from step 2's: the table changed in between.
        if int(record["bucket_rows"]) == searched[i].bucket_rows.get(bucket):
            values[(i, bucket, int(record["position"]))] = float(record["v"])
    for i, plan in searched.items():
        found = _cut_points(plan, values)
        if found is not None:
            cuts[spec.attributes[i - 1].name] = found
    return cuts


def _cut_points(plan: Plan, values: Mapping[tuple[int, int, int], float]) -> list[float] | None:
    """The interpolated cut points of one attribute, or None if a value is missing."""
    found = []
    for h, k, k1 in plan.wanted:
        low = values.get((plan.index, *plan.locate(k)))
        high = values.get((plan.index, *plan.locate(k1)))
        if low is None or high is None:
            return None
        found.append(interpolate(low, high, h - k))
    return found

