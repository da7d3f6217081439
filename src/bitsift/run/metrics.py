"""The Python post-pass: p-values, trust flags and sorting, from the database's aggregate rows."""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any

from bitsift.run.chisquare import chi2_sf
from bitsift.run.result import AttributeScore
from bitsift.spec.rankspec import CONFIDENCE_Z, Thresholds

FLAG_DESCRIPTIONS: dict[str, str] = {
    "id_like": "distinct values close to the row count: an identifier, its IG is an artefact",
    "constant": "one value only: tells nothing (gain ratio reported as 0)",
    "near_perfect": "IG >= 95% of H(Y): possible target leakage, check how it is recorded",
    "high_cardinality": "more values than the cap: IG is inflated, read the gain ratio",
}


#: Every metric in bits, and every ratio of them, is rounded to this many decimal places
#: (1e-12). The ranking statement sums exactly (templates/sums.sql.j2), so one engine gives
#: the same floats for the same counts on every run; rounding also removes what is left of
#: floating-point residue (an IG of 4e-15 for a column that tells nothing is 0) and of
#: engines' LN differing in the last bit, and it makes ties exact ties (ordered by name).
RESOLUTION_DIGITS = 12
#: Unbounded values (the G statistic, weight totals) keep this many significant digits.
SIGNIFICANT_DIGITS = 13


def snap(value: float) -> float:
    """``value`` rounded to :data:`RESOLUTION_DIGITS` decimal places, -0.0 as 0.0.

    >>> snap(3.99e-15), snap(0.19292975178524840), snap(0.19292975178525296), snap(-1e-16)
    (0.0, 0.192929751785, 0.192929751785, 0.0)
    """
    return round(float(value), RESOLUTION_DIGITS) + 0.0


def snap_total(value: float) -> float:
    """An unbounded value rounded to :data:`SIGNIFICANT_DIGITS` significant digits.

    >>> snap_total(1234.5678901234567), snap_total(-0.0)
    (1234.567890123, 0.0)
    """
    return float(f"{float(value):.{SIGNIFICANT_DIGITS}g}") + 0.0


def p_value(g_statistic: float, dof: int) -> float:
    """Chi-square survival function of the G statistic; 1.0 when there is no freedom (and for
    a G that is not finite, which no table of counts gives).

    Computed in pure Python (:func:`bitsift.run.chisquare.chi2_sf`), within 1e-12 relative of
    ``scipy.stats.chi2.sf`` (tests/test_chisquare.py), so that a ranking imports neither
    SciPy nor NumPy for it (0.4 s of CPU: issue 20, fixed costs).

    >>> round(p_value(3.841458820694124, 1), 6)
    0.05
    """
    if dof <= 0 or not math.isfinite(g_statistic):
        return 1.0
    return chi2_sf(max(g_statistic, 0.0), dof)


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


def _n_ln_n(counts: Iterable[float]) -> float:
    """The sum of n ln n over the positive counts, exactly rounded (so in any order the same)."""
    return math.fsum(n * math.log(n) for n in counts if n > 0)


def table_row(table: Iterable[Iterable[float]]) -> dict[str, Any] | None:
    """The fields the ranking statement computes for one attribute, from its value x class
    counts counted beforehand (rows: values, columns: classes; rows without a target and, with
    ``--missing drop``, the NULL value left out). None when no row is counted, where the
    statement returns no row either.

    The same formulas as templates/rank.sql.j2 (sums of n ln n, exactly summed) rather than
    the reference's p log p form, so both paths agree to the last bits before :func:`score`
    snaps them. The target's own row is the table of its classes alone (one value: IG 0).

    >>> row = table_row([[2, 3], [4, 0], [3, 2]])  # a 3-valued attribute, 9/5 classes
    >>> row["distinct_values"], row["dof"], round(row["information_gain"], 3)
    (3, 2, 0.247)
    """
    # Plain Python, not NumPy: the tables are small (values x classes) and a ranking with
    # numeric attributes then imports no NumPy (issue 20, fixed costs).
    t = [[float(n) for n in row] for row in table]
    n_x = [math.fsum(row) for row in t]
    n_y = [math.fsum(column) for column in zip(*t, strict=True)]
    n_total = math.fsum(n_x)
    if n_total <= 0:
        return None
    n_values, n_classes = sum(n > 0 for n in n_x), sum(n > 0 for n in n_y)
    s_xy, s_x, s_y = _n_ln_n(n for row in t for n in row), _n_ln_n(n_x), _n_ln_n(n_y)
    ln_n, ln_2 = math.log(n_total), math.log(2)
    h_y = (ln_n - s_y / n_total) / ln_2 if n_classes > 1 else 0.0
    h_x = (ln_n - s_x / n_total) / ln_2 if n_values > 1 else 0.0
    gain = h_y - (s_x - s_xy) / n_total / ln_2
    ig = gain if n_values > 1 and gain > 0 else 0.0
    # K - J², as the statement computes it: Σ n·ratio² over the positive cells, exactly summed.
    squares = []
    for row, row_total in zip(t, n_x, strict=True):
        for cell, column_total in zip(row, n_y, strict=True):
            if cell > 0:
                ratio = ((math.log(cell) - math.log(row_total))
                         - (math.log(column_total) - ln_n))
                squares.append(cell * ratio * ratio)
    k_bits = math.fsum(squares) / n_total / (ln_2 * ln_2)
    variance = max(k_bits - gain * gain, 0.0)
    return {
        "rows_used": int(n_total),
        "distinct_values": n_values,
        "classes": n_classes,
        "target_entropy": h_y,
        "attribute_entropy": h_x,
        "conditional_entropy": h_y - ig,
        "information_gain": ig,
        "gain_ratio": ig / h_x if n_values > 1 else 0.0,
        "symmetric_uncertainty": 2 * ig / (h_x + h_y) if h_x + h_y > 0 else 0.0,
        "g_statistic": 2 * n_total * ln_2 * ig,
        "dof": (n_values - 1) * (n_classes - 1),
        "information_gain_se": math.sqrt(variance / (n_total + 1)),
    }


def uncertainty(ig: float, variance: float, n: float, values: int, classes: int,
                z: float) -> tuple[float, float, float, float]:
    """``(se, corrected, low, high)`` of a gain ``ig`` (bits) with the variance K - J² (bits²)
    of its log ratio, over ``n`` rows (or the integer weight total), ``values`` x ``classes``
    non-empty margins; z: the normal quantile of the confidence. Each snapped; the variance
    is snapped first, so that what is left of K - J²'s cancellation is 0 on every engine.

    se = sqrt((K - J²) / (n + 1)): Hutter 2002 (NIPS 14), Hutter & Zaffalon 2005 (CSDA 48).
    corrected = IG - (r - 1)(c - 1) / (2 n ln 2): Miller 1955; Panzeri & Treves 1996.
    low, high = corrected ∓ z·se, both clipped at 0 (mutual information is never negative).

    >>> uncertainty(0.25, 0.5, 99, 3, 2, 1.959963984540054)
    (0.070710678119, 0.235427322819, 0.096836940383, 0.374017705255)
    """
    se = snap(math.sqrt(snap(variance) / (n + 1)))
    corrected = snap(ig - (values - 1) * (classes - 1) / (2 * n * math.log(2)))
    return (se, corrected, snap(max(corrected - z * se, 0.0)),
            snap(max(corrected + z * se, 0.0)))


def _variance(row: Mapping[str, Any], n: float) -> float:
    """K - J² back from the statement's se (se² · (n + 1)), before it is snapped."""
    se = row.get("information_gain_se")
    return float(se) ** 2 * (n + 1) if se is not None else 0.0


def score(row: Mapping[str, Any], name: str, kind: str, thresholds: Thresholds,
          cuts: Sequence[float] | None = None, *,
          z: float = CONFIDENCE_Z[0.95]) -> AttributeScore:
    """Build one :class:`AttributeScore` from a result row of the ranking statement.

    Every metric is snapped (:func:`snap`; G by :func:`snap_total`) before anything sorts,
    flags or stores it, and the p-value is computed from the snapped G. An IG that snaps to 0
    zeroes the gain ratio, SU, G and the gain's variance with it, so no field keeps the
    residue the others lost. The se, interval and corrected gain are computed here from the
    snapped values (:func:`uncertainty`), the same on every path; rank ranges are left to
    :func:`rank_ranges`, over the whole ranking. A row with no rows counted (``--missing
    drop``, all NULL) has no se, interval or rank range.
    """
    distinct = int(row["distinct_values"])
    rows = int(row["rows_used"])
    dof = int(row["dof"])
    ig = snap(row["information_gain"])
    h_y = snap(row["target_entropy"])
    informative = ig > 0

    def derived(key: str, rounding: Callable[[float], float] = snap) -> float:
        return rounding(row[key]) if informative else 0.0

    g = derived("g_statistic", snap_total)
    n = float(row.get("weight_used") or rows)
    se: float | None = None
    low: float | None = None
    high: float | None = None
    corrected = 0.0
    if n > 0:
        variance = _variance(row, n) if informative else 0.0
        se, corrected, low, high = uncertainty(ig, variance, n, distinct,
                                               int(row.get("classes") or 0), z)
    return AttributeScore(
        attribute=name,
        kind=kind,
        distinct=distinct,
        information_gain=ig,
        gain_ratio=derived("gain_ratio"),
        symmetric_uncertainty=derived("symmetric_uncertainty"),
        conditional_entropy=snap(row["conditional_entropy"]) if informative else h_y,
        attribute_entropy=snap(row["attribute_entropy"]),
        g_statistic=g,
        dof=dof,
        p_value=p_value(g, dof),
        flags=flags_for(distinct, rows, ig, h_y, thresholds),
        rows=rows,
        target_entropy=h_y,
        cuts=list(cuts) if cuts is not None else None,
        information_gain_se=se,
        information_gain_corrected=corrected,
        information_gain_low=low,
        information_gain_high=high,
    )


def rank_ranges(scores: Sequence[AttributeScore]) -> None:
    """Set each score's best and worst plausible rank among ``scores`` (one ranking, before
    any --limit): rank_low = 1 + the others whose low end lies above this one's high end,
    rank_high = the attributes (itself included) whose high end reaches this one's low end.
    Scores without an interval take no part and get none."""
    measured = [(s, s.information_gain_low, s.information_gain_high) for s in scores
                if s.information_gain_low is not None and s.information_gain_high is not None]
    for s, low, high in measured:
        s.rank_low = 1 + sum(1 for o, o_low, _ in measured if o is not s and o_low > high)
        s.rank_high = sum(1 for _, _, o_high in measured if o_high >= low)


def sort_scores(scores: list[AttributeScore], metric: str) -> list[AttributeScore]:
    """Descending by ``metric``, ties broken by attribute name for a stable order."""
    return sorted(scores, key=lambda s: (-getattr(s, metric), s.attribute))
