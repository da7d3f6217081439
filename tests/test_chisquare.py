"""The pure-Python chi-square tail (run/chisquare.py) against SciPy, closed forms, a published
table, and a 60-digit decimal evaluation where SciPy itself is off."""

from __future__ import annotations

import math
from decimal import Decimal, localcontext
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import stats

from bitsift.run.chisquare import _stirling_rest, chi2_sf
from bitsift.run.metrics import p_value

DOFS = [*range(1, 11), 20, 50, 100, 1_000, 10_000, 100_000, 1_000_000]
TOLERANCE = 1e-12


def _grid(dof: int) -> list[float]:
    """1e-6 to 1e5 on a log scale, and dof ± 30 standard deviations (sqrt(2 dof))."""
    spread = math.sqrt(2 * dof) * np.linspace(-30, 30, 121)
    points = [*np.geomspace(1e-6, 1e5, 221).tolist(), *(dof + spread).tolist(),
              float(dof), dof + 1.0, dof + 2.0]
    return sorted({x for x in points if x > 0})


def _bernoulli(count: int) -> list[Fraction]:
    numbers = [Fraction(1)]
    for m in range(1, count + 1):
        numbers.append(-sum(math.comb(m + 1, k) * numbers[k] for k in range(m)) / (m + 1))
    return numbers


def _decimal_q(a: float, x: float) -> float:
    """Q(a, x) to about 60 digits: the same series / continued fraction in decimal arithmetic,
    ln Gamma from Stirling's series with 19 terms after shifting a above 60 (exact Bernoulli
    numbers): an evaluation independent of both SciPy's and bitsift's rounding."""
    bernoulli = _bernoulli(40)
    with localcontext() as context:
        context.prec = 70
        eps = Decimal(10) ** -60
        pi = Decimal("3.14159265358979323846264338327950288419716939937510582097494459")
        da, dx = Decimal(a), Decimal(x)
        shifted, shift = da, Decimal(0)
        while shifted < 60:
            shift += shifted.ln()
            shifted += 1
        ln_gamma = (shifted - Decimal("0.5")) * shifted.ln() - shifted + (2 * pi).ln() / 2
        for j in range(1, 20):
            c = bernoulli[2 * j] / (2 * j * (2 * j - 1))
            ln_gamma += Decimal(c.numerator) / Decimal(c.denominator) / shifted ** (2 * j - 1)
        log_factor = da * dx.ln() - dx - (ln_gamma - shift)
        if dx < da + 1:
            term = total = 1 / da
            denominator = da
            while term >= total * eps:
                denominator += 1
                term *= dx / denominator
                total += term
            return float(1 - log_factor.exp() * total)
        b = dx + 1 - da
        c_, d = Decimal(10) ** 300, 1 / b
        fraction, i = d, 1
        while True:
            an = -i * (i - da)
            b += 2
            d = 1 / (an * d + b)
            c_ = b + an / c_
            fraction *= d * c_
            i += 1
            if abs(d * c_ - 1) < eps:
                return float((log_factor + fraction.ln()).exp())


@pytest.mark.parametrize("dof", DOFS)
def test_the_tail_is_scipys_to_1e_12_relative(dof: int) -> None:
    """Against scipy.stats.chi2.sf wherever SciPy's value is at least 1e-300; where the two
    differ by more, SciPy is the one that is off (its large-a branch, at dof 1e4 here): the
    60-digit decimal evaluation must then agree with bitsift and not with SciPy."""
    disputed = []
    for x in _grid(dof):
        expected = float(stats.chi2.sf(x, dof))
        got = chi2_sf(x, dof)
        assert 0.0 <= got <= 1.0
        if expected >= 1e-300:
            if abs(got - expected) > TOLERANCE * expected:
                disputed.append((x, got, expected))
        elif got == 0.0:
            assert expected == 0.0  # no underflow where SciPy still has a value
        else:  # below 1e-300 (SciPy may already give 0): at least no larger than the tail
            assert got < 1e-290, (x, got, expected)
    assert len(disputed) <= 5, disputed[:10]
    for x, got, expected in disputed:
        exact = _decimal_q(dof / 2, x / 2)
        assert abs(got - exact) <= TOLERANCE * exact, (x, got, exact)
        assert abs(expected - exact) > TOLERANCE * exact, (x, expected, exact)


def test_the_decimal_reference_is_scipy_where_both_are_sure() -> None:
    """The decimal evaluation used above agrees with SciPy at ordinary points (so a dispute
    settled by it is not settled by a broken reference)."""
    for dof, x in [(1, 3.841458820694124), (7, 30.0), (50, 40.0), (1000, 1100.0),
                   (3, 500.0)]:
        exact = _decimal_q(dof / 2, x / 2)
        assert exact == pytest.approx(float(stats.chi2.sf(x, dof)), rel=1e-13)


def test_closed_forms() -> None:
    """dof 2: Q(1, x/2) = exp(-x/2); dof 1: erfc(sqrt(x/2)) (A&S 26.4.4 / 26.4.21 with
    6.5.17, recalled from memory; both follow from integrating the density)."""
    for x in np.geomspace(1e-8, 1400, 500).tolist():
        assert chi2_sf(x, 2) == pytest.approx(math.exp(-x / 2), rel=1e-13, abs=0)
        assert chi2_sf(x, 1) == pytest.approx(math.erfc(math.sqrt(x / 2)), rel=1e-12, abs=0)


#: Upper 5% / 1% critical values, to the three decimals printed in the NIST/SEMATECH
#: e-Handbook of Statistical Methods, §1.3.6.7.4 "Critical Values of the Chi-Square
#: Distribution" (recalled from memory; the same figures as the usual textbook tables).
PUBLISHED = [(1, 3.841, 0.05), (2, 5.991, 0.05), (5, 11.070, 0.05), (10, 18.307, 0.05),
             (1, 6.635, 0.01), (10, 23.209, 0.01), (100, 124.342, 0.05)]


@pytest.mark.parametrize(("dof", "critical", "alpha"), PUBLISHED)
def test_published_critical_values(dof: int, critical: float, alpha: float) -> None:
    # Three decimals move the tail by at most 0.0005 times the density (< 0.06 here).
    assert abs(chi2_sf(critical, dof) - alpha) < 3e-5


def test_edges() -> None:
    assert chi2_sf(0.0, 3) == 1.0 and chi2_sf(-2.0, 3) == 1.0 and chi2_sf(-math.inf, 1) == 1.0
    assert chi2_sf(math.inf, 3) == 0.0
    assert math.isnan(chi2_sf(math.nan, 3)) and math.isnan(chi2_sf(1.0, math.nan))
    assert math.isnan(chi2_sf(1.0, 0)) and math.isnan(chi2_sf(1.0, -1))
    assert math.isnan(chi2_sf(1.0, math.inf))
    assert chi2_sf(5e-324, 1) == pytest.approx(1.0) and chi2_sf(1e300, 1) == 0.0
    # The ranking's contract (unchanged): no freedom or no finite G, no evidence: 1.0.
    assert p_value(5.0, 0) == 1.0 and p_value(math.inf, 3) == 1.0 and p_value(-1e-9, 2) == 1.0
    assert p_value(3.841458820694124, 1) == chi2_sf(3.841458820694124, 1)


def test_huge_degrees_of_freedom_converge() -> None:
    """1e8 degrees of freedom (a = 5e7): about sqrt(a) terms near x = a, exact, no
    approximation; the median of chi-square is close to dof (1 - 2/(9 dof))^3."""
    for dof in (10**7, 10**8):
        median = dof * (1 - 2 / (9 * dof)) ** 3
        assert chi2_sf(median, dof) == pytest.approx(0.5, abs=1e-4)
        assert chi2_sf(dof + 10 * math.sqrt(2 * dof), dof) < 1e-20
        assert chi2_sf(dof - 10 * math.sqrt(2 * dof), dof) == 1.0  # 1 - 8e-24, rounded


def test_the_stirling_remainder_is_lgammas() -> None:
    """Stirling's coefficients (recalled) against math.lgamma where lgamma is still exact
    enough (moderate a): the remainder itself is near 1 / (12 a)."""
    for a in (10.0, 12.5, 20.0, 33.3, 64.0):
        plain = (a - 0.5) * math.log(a) - a + 0.5 * math.log(2 * math.pi)
        assert _stirling_rest(a) == pytest.approx(math.lgamma(a) - plain, rel=0, abs=2e-14)


def test_the_same_bits_every_time() -> None:
    points = [(x, dof) for dof in (1, 9, 120, 5_000) for x in (0.3, dof, 2.5 * dof + 40)]
    first = [chi2_sf(x, dof).hex() for x, dof in points]
    assert [chi2_sf(x, dof).hex() for x, dof in points] == first


@given(st.floats(0, 1e5), st.floats(0, 1e5), st.integers(1, 2000))
def test_monotone_and_a_probability(x: float, y: float, dof: int) -> None:
    low, high = sorted((x, y))
    p_low, p_high = chi2_sf(low, dof), chi2_sf(high, dof)
    assert 0.0 <= p_high <= p_low <= 1.0


@given(st.floats(0.01, 1e4), st.integers(1, 500))
def test_more_freedom_a_larger_tail(x: float, dof: int) -> None:
    assert chi2_sf(x, dof) <= chi2_sf(x, dof + 1)
