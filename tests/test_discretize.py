"""MDL and best-split discretization against independent implementations.

MDL: Fayyad & Irani (1993), "Multi-interval discretization of continuous-valued attributes for
classification learning", Proc. 13th IJCAI, pp. 1022-1027. The reference below is written
straight from the paper's formulas (a loop over candidate cuts, entropies from scipy), a
different code path from bitsift.run.discretize's vectorised one.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import entropy
from sklearn.datasets import load_iris

from bitsift.run.discretize import best_split_cut, mdl_cut_indices, mdl_cuts


def _ent(labels: np.ndarray) -> float:
    if labels.size == 0:
        return 0.0
    _, counts = np.unique(labels, return_counts=True)
    return float(entropy(counts, base=2))


def paper_mdl(x: np.ndarray, y: np.ndarray) -> list[float]:
    """Fayyad & Irani's recursive MDL discretization, from the paper, on raw samples."""
    order = np.argsort(x, kind="stable")
    x, y = x[order], y[order]
    cuts: list[float] = []

    def recurse(lo: int, hi: int) -> None:
        xs, ys = x[lo:hi], y[lo:hi]
        n = hi - lo
        values = np.unique(xs)
        if values.size < 2:
            return
        best = None
        for a, b in zip(values[:-1], values[1:], strict=True):
            t = (a + b) / 2
            left, right = ys[xs < t], ys[xs >= t]
            e = (left.size * _ent(left) + right.size * _ent(right)) / n
            if best is None or e < best[0] - 1e-15:
                best = (e, t, left, right)
        assert best is not None
        e, t, left, right = best
        ent_s = _ent(ys)
        gain = ent_s - e
        k, k1, k2 = (len(np.unique(v)) for v in (ys, left, right))
        delta = math.log2(3**k - 2) - (k * ent_s - k1 * _ent(left) - k2 * _ent(right))
        if gain > (math.log2(n - 1) + delta) / n:
            cuts.append(float(t))
            split = lo + left.size
            recurse(lo, split)
            recurse(split, hi)

    recurse(0, x.size)
    return sorted(cuts)


def histogram(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    values = np.unique(x)
    classes = np.unique(y)
    h = np.array([[np.sum((x == v) & (y == c)) for c in classes] for v in values])
    return values, h


@pytest.mark.slow
@pytest.mark.parametrize("feature", range(4))
def test_mdl_on_iris_equals_the_papers_procedure(feature: int) -> None:
    # iris is bundled with scikit-learn (Fisher 1936), no download.
    X, y = load_iris(return_X_y=True)
    x = X[:, feature]
    values, h = histogram(x, y)
    expected = paper_mdl(x, y)
    assert expected, "MDL should cut every iris feature"
    assert mdl_cuts(values, h) == pytest.approx(expected, abs=1e-12)


def test_mdl_iris_petal_cuts_as_commonly_reported() -> None:
    # Recalled from memory (not from a printed table): MDL cuts iris petal length at 2.45 and
    # 4.75 and petal width at 0.8 and 1.75.
    X, y = load_iris(return_X_y=True)
    assert mdl_cuts(*histogram(X[:, 2], y)) == pytest.approx([2.45, 4.75])
    assert mdl_cuts(*histogram(X[:, 3], y)) == pytest.approx([0.8, 1.75])


def test_mdl_refuses_to_cut_noise() -> None:
    rng = np.random.default_rng(3)
    x = rng.normal(size=400)
    y = rng.integers(0, 2, size=400)
    assert mdl_cut_indices(histogram(x, y)[1]) == []


@pytest.mark.slow
@pytest.mark.parametrize("seed", range(5))
def test_best_split_equals_brute_force(seed: int) -> None:
    rng = np.random.default_rng(seed)
    x = rng.integers(0, 30, size=300).astype(float)  # many ties
    y = (x + rng.normal(0, 8, size=300) > 15).astype(int) + (rng.random(300) < 0.1)
    values, h = histogram(x, y)
    got = best_split_cut(values, h)
    best_t, best_ig = None, -1.0
    for a, b in zip(values[:-1], values[1:], strict=True):
        t = (a + b) / 2
        left, right = y[x < t], y[x >= t]
        ig = _ent(y) - (left.size * _ent(left) + right.size * _ent(right)) / y.size
        if ig > best_ig + 1e-12:
            best_t, best_ig = t, ig
    assert got == best_t
