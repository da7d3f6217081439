"""Cut points of the numeric attributes: computed in the database, cleaned in the client.

Below both :mod:`bitsift.run.api` (which ranks with them) and the run-mode modules
(:mod:`bitsift.run.concurrent`, :mod:`bitsift.run.quantile_counts`) that fetch them part by part.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

from bitsift.engines.base import Engine
from bitsift.run import quantiles
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.sqlbuild import bounds_statement, cut_count, histogram_statement


def fetch_cuts(engine: Engine, spec: RankSpec) -> dict[str, list[float]]:
    """The cut points of every numeric attribute: the bounds pre-pass (quantile, equal-width,
    best-split, computed in SQL) and, for mdl, the histogram pre-pass whose cut points are
    found in Python. Where the run policy's ``run_quantile`` is "buckets", quantile cut points
    come from :mod:`bitsift.run.quantiles` instead (same values, no whole-column sort).
    Duplicate and non-finite cut points are dropped."""
    cuts: dict[str, list[float]] = {}
    if engine.policy.run_quantile in ("buckets", "counted"):
        cuts = {name: _clean(found) for name, found in
                quantiles.bucketed_cuts(engine, spec).items()}
    statement = bounds_statement(spec, engine.caps, skip=cuts)
    record = engine.fetch(statement.sql).records()[0] if statement is not None else {}
    for index, attribute in enumerate(spec.attributes, start=1):
        if attribute.kind != "numeric" or attribute.binning == "mdl" or attribute.name in cuts:
            continue
        values = [record.get(f"c{index}_{j}") for j in range(1, cut_count(attribute) + 1)]
        cuts[attribute.name] = _clean(values)
    cuts.update(fetch_mdl_cuts(engine, spec))
    return cuts


def _clean(values: Iterable[Any]) -> list[float]:
    """Cut points sorted, without duplicates, NULLs and non-finite values."""
    return sorted({float(v) for v in values if v is not None and math.isfinite(float(v))})


def fetch_mdl_cuts(engine: Engine, spec: RankSpec,
                   resolution: int | None = None) -> dict[str, list[float]]:
    """MDL cut points of the attributes binned by mdl: the database counts the (fine bin x
    class) histogram, :mod:`bitsift.run.discretize` splits it (Fayyad & Irani 1993).
    ``resolution``: fine bins at most (default :data:`~bitsift.run.discretize.MDL_RESOLUTION`).

    NumPy (for the splitting) is imported only when an attribute is binned by mdl: every
    ranking part passes here, and the import costs 0.1-0.2 s.
    """
    if not any(a.kind == "numeric" and a.binning == "mdl" for a in spec.attributes):
        return {}
    from bitsift.run import discretize

    if resolution is None:
        resolution = discretize.MDL_RESOLUTION
    statement = histogram_statement(spec, engine.caps, resolution)
    if statement is None:
        return {}
    histograms = discretize.histograms_from_rows(engine.fetch(statement.sql).records())
    cuts = {}
    for index, attribute in enumerate(spec.attributes, start=1):
        if attribute.kind == "numeric" and attribute.binning == "mdl":
            histogram = histograms.get(index)
            found = histogram.mdl_cuts() if histogram is not None else []
            cuts[attribute.name] = sorted({c for c in found if math.isfinite(c)})
    return cuts
