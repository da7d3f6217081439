"""``--target-bins N``: a numeric target ranked as N quantile bins of itself.

The cut points are computed in the database by the attribute binning machinery
(:func:`bitsift.run.cuts.fetch_cuts`: the bucketed exact quantiles where the dialect has them,
else the bounds pre-pass), over the rows the ranking reads (target present, ``--where``). The
spec's ``source`` then becomes a derived table that passes every column through and replaces
the target by its bin label (text), so every statement built from the spec (ranking, pairs,
drill-down, cut points of the attributes) reads the binned target without a template knowing.
The derived table has no alias here: :func:`bitsift.sql.sqlbuild.finish` names every unnamed
one (PostgreSQL and MySQL require a name).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

from bitsift.engines.base import Engine
from bitsift.numformat import cut_labels
from bitsift.run.cuts import fetch_cuts
from bitsift.spec.rankspec import AttributeSpec, RankSpec
from bitsift.spec.schema import Column
from bitsift.sql.sqlstatements import binned_target_source

#: How the target is cut (the only method: equal-frequency bins are what a class needs).
TARGET_BINNING = "quantile"


def target_labels(cuts: Sequence[float]) -> list[str]:
    """The class label of each bin: numbered (so they sort in order) and with its range.

    >>> target_labels([2.5, 10.0])
    ['1: < 2.5', '2: 2.5 to < 10', '3: >= 10']
    >>> target_labels([])
    ['1: all values']
    """
    if not cuts:
        return ["1: all values"]
    shown = cut_labels(cuts, 4)
    width = len(str(len(cuts) + 1))
    ranges = [f"< {shown[0]}",
              *(f"{low} to < {high}" for low, high in zip(shown, shown[1:], strict=False)),
              f">= {shown[-1]}"]
    return [f"{index:0{width}d}: {text}" for index, text in enumerate(ranges, start=1)]


def bin_target(engine: Engine, spec: RankSpec, columns: Sequence[Column]) -> RankSpec:
    """``spec`` with its target read as ``options.target_bins`` quantile bins (see the module
    docstring); unchanged without ``target_bins``."""
    bins = spec.options.target_bins
    if bins is None or spec.target_cuts is not None:
        return spec
    as_attribute = AttributeSpec(name=spec.target, kind="numeric", family=spec.target_family,
                                 binning=TARGET_BINNING, bins=bins)
    probe = replace(spec, attributes=(as_attribute,), by=(), weight=None)
    cuts = fetch_cuts(engine, probe).get(spec.target, [])
    return replace(spec, source=binned_target_source(spec, [c.name for c in columns], cuts,
                                                     target_labels(cuts)),
                   target_family="text",
                   target_cuts=tuple(cuts))


def target_binning(spec: RankSpec) -> dict[str, object] | None:
    """The JSON contract's ``target_binning``: method, bins asked, cut points, class labels."""
    if spec.target_cuts is None:
        return None
    return {"method": TARGET_BINNING, "bins": spec.options.target_bins,
            "cuts": list(spec.target_cuts), "labels": target_labels(spec.target_cuts)}
