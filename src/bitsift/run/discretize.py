"""Supervised discretization in Python on a (fine bin × class) histogram from the database.

Only the histogram leaves the database: one row per (fine bin, class) pair. The fine bins are
the distinct values when there are few enough, otherwise equal-frequency bins at a documented
resolution, so cut points can only fall on fine-bin boundaries (see :data:`MDL_RESOLUTION`).

MDL follows Fayyad & Irani (1993), "Multi-interval discretization of continuous-valued
attributes for classification learning", Proc. 13th IJCAI, pp. 1022-1027: recursive binary
splitting at the cut that minimises the class-information entropy, accepted only while

    Gain(A, T; S) > log2(N - 1) / N + Delta(A, T; S) / N,
    Delta(A, T; S) = log2(3^k - 2) - [k Ent(S) - k1 Ent(S1) - k2 Ent(S2)],

with k, k1, k2 the numbers of classes present in S, S1, S2.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

#: Default number of fine bins for MDL when a column has more distinct values than this.
MDL_RESOLUTION = 1024


def _entropy_rows(counts: NDArray[np.float64]) -> NDArray[np.float64]:
    """Entropy in bits of each row of a count matrix (0·log 0 = 0)."""
    totals = counts.sum(axis=1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.where(totals > 0, counts / np.where(totals > 0, totals, 1), 0.0)
        logs = np.where(p > 0, np.log2(np.where(p > 0, p, 1.0)), 0.0)
    # np.where's result is typed Any; the sum of float64 rows is float64.
    return cast(NDArray[np.float64], -(p * logs).sum(axis=1))


@dataclass(frozen=True)
class Split:
    """The best binary split of a histogram slice: cut after fine bin ``index``."""

    index: int
    gain: float
    accepted: bool


def best_split(histogram: ArrayLike) -> Split | None:
    """The binary split of ``histogram`` (rows: ordered fine bins, columns: classes) with the
    highest information gain, and whether the MDL criterion accepts it.

    >>> s = best_split([[5, 0], [5, 0], [0, 5], [0, 5]])
    >>> s.index, round(s.gain, 6), s.accepted
    (1, 1.0, True)
    """
    h = np.asarray(histogram, dtype=float)
    if h.shape[0] < 2:
        return None
    n = h.sum()
    left = np.cumsum(h, axis=0)[:-1]
    right = h.sum(axis=0) - left
    n_left, n_right = left.sum(axis=1), right.sum(axis=1)
    valid = (n_left > 0) & (n_right > 0)
    if not valid.any():
        return None
    whole = h.sum(axis=0, keepdims=True)
    ent_s = float(_entropy_rows(whole)[0])
    ent_left, ent_right = _entropy_rows(left), _entropy_rows(right)
    conditional = (n_left * ent_left + n_right * ent_right) / n
    conditional = np.where(valid, conditional, np.inf)
    index = int(np.argmin(conditional))
    gain = ent_s - float(conditional[index])
    k = int((whole > 0).sum())
    k1 = int((left[index] > 0).sum())
    k2 = int((right[index] > 0).sum())
    delta = np.log2(3.0**k - 2) - (k * ent_s - k1 * ent_left[index] - k2 * ent_right[index])
    threshold = (np.log2(n - 1) + delta) / n
    return Split(index=index, gain=gain, accepted=bool(gain > threshold))


def mdl_cut_indices(histogram: ArrayLike) -> list[int]:
    """Fine-bin indices after which Fayyad & Irani's MDL method cuts (ascending).

    >>> mdl_cut_indices([[20, 0], [20, 0], [0, 20], [0, 20], [20, 0], [20, 0]])
    [1, 3]
    """
    h = np.asarray(histogram, dtype=float)
    cuts: list[int] = []
    stack = [(0, h.shape[0])]
    while stack:
        start, stop = stack.pop()
        split = best_split(h[start:stop])
        if split is None or not split.accepted:
            continue
        cut = start + split.index
        cuts.append(cut)
        stack.append((start, cut + 1))
        stack.append((cut + 1, stop))
    return sorted(cuts)


def mdl_cuts(values: Sequence[float], histogram: ArrayLike) -> list[float]:
    """MDL cut points as values: midway between the fine bins on either side of each cut.

    ``values`` are the fine bins' representative values (distinct values, or bin lower edges),
    ascending, one per histogram row.
    """
    v = np.asarray(values, dtype=float)
    return [float((v[i] + v[i + 1]) / 2.0) for i in mdl_cut_indices(histogram)]


def mdl_cuts_between(lows: Sequence[float], highs: Sequence[float],
                     histogram: ArrayLike) -> list[float]:
    """MDL cut points between fine bins that span value ranges: midway between the highest
    value of the bin before each cut and the lowest value of the bin after it.

    With one distinct value per bin (``lows == highs``) this is :func:`mdl_cuts`.

    >>> mdl_cuts_between([0, 2, 5, 7], [1, 3, 6, 8], [[9, 0], [9, 0], [0, 9], [0, 9]])
    [4.0]
    """
    low = np.asarray(lows, dtype=float)
    high = np.asarray(highs, dtype=float)
    return [float((high[i] + low[i + 1]) / 2.0) for i in mdl_cut_indices(histogram)]


@dataclass(frozen=True)
class Histogram:
    """One attribute's (fine bin x class) counts as the database returned them."""

    lows: list[float]
    highs: list[float]
    counts: NDArray[np.float64]

    def mdl_cuts(self) -> list[float]:
        """Fayyad & Irani's MDL cut points of this histogram."""
        return mdl_cuts_between(self.lows, self.highs, self.counts)


def histograms_from_rows(rows: Iterable[Mapping[str, Any]]) -> dict[int, Histogram]:
    """Histograms per ``attribute_index`` from the rows of templates/histogram.sql.j2
    (``attribute_index, fine, y, n, low, high``; one row per non-empty fine bin and class).

    >>> rows = [{"attribute_index": 1, "fine": f, "y": y, "n": n, "low": lo, "high": hi}
    ...         for f, y, n, lo, hi in [(0, "a", 3, 1.0, 2.0), (1, "b", 2, 5.0, 5.0),
    ...                                 (0, "b", 1, 1.5, 1.5)]]
    >>> h = histograms_from_rows(rows)[1]
    >>> h.lows, h.highs, h.counts.tolist()
    ([1.0, 5.0], [2.0, 5.0], [[3.0, 1.0], [0.0, 2.0]])
    """
    cells: dict[int, dict[tuple[int, Any], float]] = {}
    ranges: dict[int, dict[int, tuple[float, float]]] = {}
    for row in rows:
        attribute, fine = int(row["attribute_index"]), int(row["fine"])
        cells.setdefault(attribute, {})[(fine, row["y"])] = float(row["n"])
        low, high = float(row["low"]), float(row["high"])
        seen = ranges.setdefault(attribute, {}).get(fine)
        if seen is not None:
            low, high = min(low, seen[0]), max(high, seen[1])
        ranges[attribute][fine] = (low, high)
    result = {}
    for attribute, counts in cells.items():
        fines = sorted(ranges[attribute])
        # Classes in a fixed order (by type, then value: bytes from MariaDB, text elsewhere).
        classes = sorted({y for _, y in counts}, key=lambda y: (type(y).__name__, y))
        row_of = {f: i for i, f in enumerate(fines)}
        column_of = {y: j for j, y in enumerate(classes)}
        matrix = np.zeros((len(fines), len(classes)))
        for (fine, y), n in counts.items():
            matrix[row_of[fine], column_of[y]] = n
        result[attribute] = Histogram(
            lows=[ranges[attribute][f][0] for f in fines],
            highs=[ranges[attribute][f][1] for f in fines],
            counts=matrix,
        )
    return result


def best_split_cut(values: Sequence[float], histogram: ArrayLike) -> float | None:
    """The single threshold with the highest IG (C4.5-style binary split), midway between
    the two adjacent values, or None when the column has fewer than two values."""
    split = best_split(histogram)
    if split is None:
        return None
    v = np.asarray(values, dtype=float)
    return float((v[split.index] + v[split.index + 1]) / 2.0)
