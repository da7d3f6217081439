"""The chi-square upper tail in pure Python (the math module only), for the G-test's p-value.

Why not SciPy: importing ``scipy.special`` (NumPy with it) costs about 0.4 s of CPU, half of
a small ranking's process (issue 20, benchmarks/RESULTS.md "Fixed costs"), for one function
evaluated a few dozen times. SciPy stays the independent reference (run/reference.py, used
by ``check``, and tests/test_chisquare.py, which holds this module to 1e-12 relative of
``scipy.stats.chi2.sf``).

Method: the survival function of chi-square with k degrees of freedom is the regularized
upper incomplete gamma function, ``Q(k/2, x/2)`` (Abramowitz & Stegun 26.4.2 with 6.5.1;
recalled from memory). ``Q`` is computed as Numerical Recipes computes it (Press, Teukolsky,
Vetterling & Flannery, *Numerical Recipes*, 3rd ed., 2007, §6.2 "Incomplete Gamma Function";
recalled from memory): below ``x = a + 1`` from the series of ``P`` (A&S 6.5.29) and
``Q = 1 - P`` (``P`` is at most about 0.9 there, so nothing is lost), above it from the
continued fraction of ``Q`` (A&S 6.5.31) evaluated by the modified Lentz method, both times
the factor ``x^a e^-x / Gamma(a)`` — the one place where accuracy is at stake. It is
computed as a logarithm and the tail as ``exp(log factor + log fraction)``, so a tail of
1e-300 keeps its relative accuracy and only a tail below the smallest double (about
1e-323) becomes 0.0. For ``a >= 10`` the logarithm is written without its large
cancelling terms: with ``t = (x - a) / a``,

    a ln x - x - ln Gamma(a) = -a (t - ln(1 + t)) + ln(a / 2 pi) / 2 - s(a),

where ``s`` is the remainder of Stirling's series (A&S 6.1.40; its coefficients are
B_2j / (2j (2j - 1)), Bernoulli numbers recalled from memory, checked against
``math.lgamma`` in the tests) and ``t - ln(1 + t)`` comes from an atanh series that has no
cancellation. ``math.lgamma`` of 5e5 is 6e6 and good to about 1e-9 absolute; this form
keeps the exponent good to about 1e-13 however large ``a`` is.

Neither expansion is truncated early: both run until the next term no longer changes the
result (at most :data:`MAX_TERMS`, reached by no finite input in double precision:
around ``x = a`` both need about ``sqrt(a)`` terms, some 5,000 for a million degrees of
freedom). The same inputs give the same bits on one platform (plain float arithmetic in a
fixed order); across platforms only the C library's ``log``/``exp`` may differ in the
last bit.
"""

from __future__ import annotations

import math

#: A cap on the terms of either expansion; about sqrt(a) are used near x = a, so 1e8
#: degrees of freedom (a = 5e7) need some 50,000.
MAX_TERMS = 1_000_000
_EPSILON = 2.0**-53
_TINY = 1e-300
#: Above this ``a`` the exponent is taken from Stirling's series (see the module's docstring).
_STIRLING_FROM = 10.0
#: B_2j / (2j (2j - 1)) for j = 1..8, the coefficients of a^-(2j - 1) in Stirling's series
#: (A&S 6.1.40 with Table 23.2's Bernoulli numbers; recalled from memory, tested).
_STIRLING = (1 / 12, -1 / 360, 1 / 1260, -1 / 1680, 1 / 1188, -691 / 360360, 1 / 156,
             -3617 / 122400)


def chi2_sf(statistic: float, dof: float) -> float:
    """P(X >= statistic) for X chi-square with ``dof`` degrees of freedom.

    1.0 for a statistic of 0 or less, 0.0 for an infinite one; NaN for a NaN statistic and
    for degrees of freedom that are NaN, infinite or not positive (no distribution: the
    caller decides what no freedom means, see :func:`bitsift.run.metrics.p_value`).

    >>> round(chi2_sf(3.841458820694124, 1), 15), round(chi2_sf(18.307038053275146, 10), 15)
    (0.05, 0.05)
    >>> chi2_sf(0.0, 3), chi2_sf(math.inf, 3), chi2_sf(2000.0, 1)
    (1.0, 0.0, 0.0)
    """
    statistic, dof = float(statistic), float(dof)
    if math.isnan(statistic) or not math.isfinite(dof) or dof <= 0:
        return math.nan
    if statistic / 2 <= 0:  # 5e-324 halves to 0: P(X < 5e-324) is below any double anyway
        return 1.0
    if statistic == math.inf:
        return 0.0
    return upper_gamma_q(dof / 2, statistic / 2)


def upper_gamma_q(a: float, x: float) -> float:
    """The regularized upper incomplete gamma function Q(a, x), for finite a > 0, x > 0."""
    if x < a + 1:
        return 1.0 - math.exp(_log_factor(a, x)) * _lower_series(a, x)
    return math.exp(_log_factor(a, x) + math.log(_upper_fraction(a, x)))


def _lower_series(a: float, x: float) -> float:
    """P(a, x) / (x^a e^-x / Gamma(a)) = sum over n >= 0 of x^n / (a (a + 1) ... (a + n))
    (A&S 6.5.29 / NR3 6.2.5). Every term is positive, so stopping is safe."""
    term = total = 1.0 / a
    denominator = a
    for _ in range(MAX_TERMS):
        denominator += 1.0
        term *= x / denominator
        total += term
        if term < total * _EPSILON:
            return total
    raise ArithmeticError(f"the gamma series did not converge (a={a!r}, x={x!r})")


def _upper_fraction(a: float, x: float) -> float:
    """Q(a, x) / (x^a e^-x / Gamma(a)) as the continued fraction
    1 / (x + 1 - a - 1 (1 - a) / (x + 3 - a - 2 (2 - a) / (x + 5 - a - ...)))
    (A&S 6.5.31's even form, NR3 6.2.7), by the modified Lentz method (NR3 §5.2)."""
    b = x + 1.0 - a
    c = 1.0 / _TINY
    d = 1.0 / b
    fraction = d
    for i in range(1, MAX_TERMS):
        an = -i * (i - a)
        b += 2.0
        d = an * d + b
        if abs(d) < _TINY:
            d = _TINY
        c = b + an / c
        if abs(c) < _TINY:
            c = _TINY
        d = 1.0 / d
        step = d * c
        fraction *= step
        if abs(step - 1.0) <= _EPSILON:
            return fraction
    raise ArithmeticError(f"the gamma continued fraction did not converge (a={a!r}, x={x!r})")


def _log_factor(a: float, x: float) -> float:
    """ln(x^a e^-x / Gamma(a)), without the cancellation of its large terms (module docstring)."""
    if a < _STIRLING_FROM:
        return a * math.log(x) - x - math.lgamma(a)
    t = (x - a) / a
    return -a * _t_minus_log1p(t, x, a) + 0.5 * math.log(a / (2 * math.pi)) - _stirling_rest(a)


def _t_minus_log1p(t: float, x: float, a: float) -> float:
    """t - ln(1 + t) for t = (x - a) / a > -1, to a few ulps of the result.

    Between t = -0.8 and 3: with u = t / (2 + t), ln(1 + t) = 2 atanh(u), and
    t - 2 atanh(u) = t u - 2 (u^3/3 + u^5/5 + ...) (t - 2u = t u), every part small and
    none cancelling the others much (|u| <= 2/3). Outside, the difference is at least
    0.6 times its larger term: computed directly (from ln(x / a) below, as 1 + t lost x)."""
    if t < -0.8:
        return t - (math.log(x) - math.log(a))
    if t > 3.0:
        return t - math.log1p(t)
    u = t / (2.0 + t)
    u2 = u * u
    power = u * u2
    rest = 0.0
    k = 3.0
    while True:
        term = power / k
        if abs(term) <= abs(rest) * _EPSILON * 0.5:
            break
        rest += term
        power *= u2
        k += 2.0
    return t * u - 2.0 * rest


def _stirling_rest(a: float) -> float:
    """ln Gamma(a) - ((a - 1/2) ln a - a + ln(2 pi) / 2), from Stirling's series (a >= 10:
    the eighth term is below 4e-17 there, the series' error below the next)."""
    inverse = 1.0 / a
    inverse2 = inverse * inverse
    total = 0.0
    for coefficient in reversed(_STIRLING):
        total = total * inverse2 + coefficient
    return total * inverse
