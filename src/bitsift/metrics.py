"""The Python post-pass: p-values, trust flags and sorting, from the database's aggregate rows."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any

from scipy import stats

from bitsift.result import AttributeScore
from bitsift.spec import Thresholds

FLAG_DESCRIPTIONS: dict[str, str] = {
    "id_like": "distinct values close to the row count: an identifier, its IG is an artefact",
    "constant": "one value only: tells nothing (gain ratio reported as 0)",
    "near_perfect": "IG >= 95% of H(Y): possible target leakage, check how it is recorded",
    "high_cardinality": "more values than the cap: IG is inflated, read the gain ratio",
}


def p_value(g_statistic: float, dof: int) -> float:
    """Chi-square survival function of the G statistic; 1.0 when there is no freedom.

    >>> round(p_value(3.841458820694124, 1), 6)
    0.05
    """
    if dof <= 0 or not math.isfinite(g_statistic):
        return 1.0
    return float(stats.chi2.sf(max(g_statistic, 0.0), dof))


def flags_for(distinct: int, rows: int, information_gain: float, target_entropy: float,
              thresholds: Thresholds) -> list[str]:
    """The trust flags of one attribute (see :data:`FLAG_DESCRIPTIONS`)."""
    flags = []
    if distinct > thresholds.id_min_values and distinct >= thresholds.id_like_ratio * rows:
        flags.append("id_like")
    if distinct <= 1:
        flags.append("constant")
    if target_entropy > 0 and information_gain >= thresholds.near_perfect_ratio * target_entropy:
        flags.append("near_perfect")
    if distinct > thresholds.high_cardinality:
        flags.append("high_cardinality")
    return flags


def score(row: Mapping[str, Any], name: str, kind: str, thresholds: Thresholds,
          cuts: Sequence[float] | None = None) -> AttributeScore:
    """Build one :class:`AttributeScore` from a result row of the ranking statement."""
    distinct = int(row["distinct_values"])
    rows = int(row["rows_used"])
    g = float(row["g_statistic"])
    dof = int(row["dof"])
    ig = float(row["information_gain"])
    h_y = float(row["target_entropy"])
    return AttributeScore(
        attribute=name,
        kind=kind,
        distinct=distinct,
        information_gain=ig,
        gain_ratio=float(row["gain_ratio"]),
        symmetric_uncertainty=float(row["symmetric_uncertainty"]),
        conditional_entropy=float(row["conditional_entropy"]),
        attribute_entropy=float(row["attribute_entropy"]),
        g_statistic=g,
        dof=dof,
        p_value=p_value(g, dof),
        flags=flags_for(distinct, rows, ig, h_y, thresholds),
        rows=rows,
        target_entropy=h_y,
        cuts=list(cuts) if cuts is not None else None,
    )


def sort_scores(scores: list[AttributeScore], metric: str) -> list[AttributeScore]:
    """Descending by ``metric``, ties broken by attribute name for a stable order."""
    return sorted(scores, key=lambda s: (-getattr(s, metric), s.attribute))
