"""Numbers as every text output shows them: metrics, p-values, shares of rows and cut points.

The one place that decides how many digits a number gets, so that the terminal table, the
profile drill-down, the HTML report and the selection tables agree. Standard library only: any
layer (the profile's bin labels included) may use it.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Sequence

from bitsift import jsonout

#: Decimals of a metric in bits (information gain, entropies, ratios).
BITS_DECIMALS = 4
#: The most significant digits a cut point needs: 17 tell any two doubles apart.
CUT_DIGITS_MAX = 17
#: Cut points at or beyond this size are not widened to their integer digits (1e15 and up
#: print in e-notation whatever the digits), and the widening stops at 12 digits.
_WHOLE_DIGITS_LIMIT = 1e15
_WHOLE_DIGITS_CAP = 12


def format_bits(value: float) -> str:
    """A metric in bits (or a ratio of them) with :data:`BITS_DECIMALS` decimals.

    >>> format_bits(0.123456), format_bits(1.0)
    ('0.1235', '1.0000')
    """
    return f"{value:.{BITS_DECIMALS}f}"


def format_p_value(p: float) -> str:
    """A p-value as the tables show it: three decimals, small ones in scientific notation, and
    one below the smallest double (the chi-square tail underflows to 0) as an upper bound.

    >>> format_p_value(0.04321), format_p_value(2.5e-9), format_p_value(0.0)
    ('0.043', '2.50e-09', '<1e-300')
    """
    if p == 0:
        return "<1e-300"
    return f"{p:.2e}" if p < 1e-3 else f"{p:.3f}"


def format_metric(key: str, value: object, *, grouped: bool = True) -> str:
    """A metric of an attribute score (``key`` as in :data:`bitsift.run.result.ATTRIBUTE_KEYS`):
    4 decimals, G with 1, p-values by :func:`format_p_value`; ``grouped`` puts thousands
    separators in whole numbers and G (the report does, the terminal table does not).

    >>> format_metric("information_gain", 0.123456), format_metric("p_value", 2.5e-9)
    ('0.1235', '2.50e-09')
    >>> format_metric("p_value", 0.0)  # below the smallest double
    '<1e-300'
    >>> format_metric("distinct", 19816), format_metric("distinct", 19816, grouped=False)
    ('19,816', '19816')
    >>> format_metric("g_statistic", 1234.56), format_metric("g_statistic", 1234.56, grouped=False)
    ('1,234.6', '1234.6')
    """
    if isinstance(value, bool) or value is None:
        return str(value)
    if isinstance(value, int):
        return f"{value:,}" if grouped else str(value)
    if not isinstance(value, float):
        return str(value)
    if key == "p_value":
        return format_p_value(value)
    if key == "g_statistic":
        return f"{value:,.1f}" if grouped else f"{value:.1f}"
    return format_bits(value)


def format_share(share: float) -> str:
    """A share of rows in percent.

    >>> format_share(0.0861), format_share(0.0004), format_share(0.0)
    ('8.6 %', '< 0.1 %', '0 %')
    """
    if share <= 0:
        return "0 %"
    if share >= 1:
        return "100 %"
    if share < 0.001:
        return "< 0.1 %"
    return f"{share * 100:.1f} %"


def _whole_digits(cuts: Sequence[float]) -> int:
    """Digits of the largest integer part: epoch seconds read 1741824000, not 1.742e+09."""
    return max((len(str(int(abs(c)))) for c in cuts if abs(c) < _WHOLE_DIGITS_LIMIT), default=0)


def _apart(labels: Sequence[str]) -> bool:
    """Every label differs from its neighbour (cut points are sorted, so that is all of them)."""
    return all(a != b for a, b in zip(labels, labels[1:], strict=False))


def cut_labels(cuts: Sequence[float], min_digits: int = 6) -> list[str]:
    """Cut points as text with the fewest significant digits (at least ``min_digits`` and the
    integer digits) that keep neighbouring cuts distinct.

    >>> cut_labels([2.45, 4.75], 4), cut_labels([1.000001, 1.000002])
    (['2.45', '4.75'], ['1.000001', '1.000002'])
    >>> cut_labels([12.3456789]), cut_labels([1741824000.0, 1741910400.0], 4)
    (['12.3457'], ['1741824000', '1741910400'])
    """
    first = max(min_digits, min(_whole_digits(cuts), _WHOLE_DIGITS_CAP))
    for digits in range(first, CUT_DIGITS_MAX + 1):
        labels = [f"{c:.{digits}g}" for c in cuts]
        if _apart(labels):
            return labels
    return labels


def format_cuts(cuts: Sequence[float], min_digits: int = 4, separator: str = " | ",
                none: str = "(none: one bin)") -> str:
    """Cut points on one line (see :func:`cut_labels`); ``none`` when there are none.

    >>> format_cuts([2.45, 4.75]), format_cuts([1.00001, 1.00002]), format_cuts([])
    ('2.45 | 4.75', '1.00001 | 1.00002', '(none: one bin)')
    """
    return separator.join(cut_labels(cuts, min_digits)) if cuts else none


def format_selection_score(score: float, criterion: str) -> str:
    """An mRMR step's score: a difference of bits (mid) in bits' decimals, a quotient (miq),
    which may be large, with 4 significant digits.

    >>> format_selection_score(0.12345, "mid"), format_selection_score(1234.5, "miq")
    ('0.1235', '1234')
    """
    return f"{score:.4g}" if criterion == "miq" else format_bits(score)


_EPOCH = _dt.datetime(1970, 1, 1)
_DAY = 86_400


def iso_cut(seconds: float, family: str) -> str:
    """A cut point of a date or timestamp binned as epoch seconds, in ISO 8601. A DATE's cut
    is the first day on its right (its values are whole days, so ``x < cut`` holds for the
    same days); a timestamp's is the instant, to the microsecond, without a zone (epochs are
    of the value as written).

    >>> iso_cut(1709596800.0, "date"), iso_cut(1709640000.0, "date")
    ('2024-03-05', '2024-03-06')
    >>> iso_cut(1709640000.0, "timestamp"), iso_cut(1709640000.25, "timestamp")
    ('2024-03-05T12:00:00', '2024-03-05T12:00:00.250000')
    """
    if family == "date":
        return (_EPOCH + _dt.timedelta(days=math.ceil(seconds / _DAY))).date().isoformat()
    return (_EPOCH + _dt.timedelta(microseconds=round(seconds * 1_000_000))).isoformat()


def cut_texts(cuts: Sequence[float], temporal: str | None = None, min_digits: int = 6,
              ) -> list[str]:
    """Cut points as text: :func:`cut_labels`, or ISO 8601 (:func:`iso_cut`) for a date or
    timestamp binned as time (``temporal``: its family).

    >>> cut_texts([1709596800.0], "date"), cut_texts([2.5])
    (['2024-03-05'], ['2.5'])
    """
    if temporal is None:
        return cut_labels(cuts, min_digits)
    return [iso_cut(c, temporal) for c in cuts]


def shown_cuts(cuts: Sequence[float], temporal: str | None = None) -> list[float] | list[str]:
    """Cut points as every structured output holds them: the numbers themselves, or ISO 8601
    strings (:func:`iso_cut`) for a date or timestamp binned as time.

    >>> shown_cuts([2.5, 4.75]), shown_cuts([1709596800.0], "date")
    ([2.5, 4.75], ['2024-03-05'])
    """
    if temporal is None:
        return list(cuts)
    return [iso_cut(c, temporal) for c in cuts]


def cuts_json(cuts: Sequence[float], temporal: str | None = None) -> str:
    """Cut points as the history's ``cut_points`` holds them: a compact JSON array of
    :func:`shown_cuts`, each number written as the JSON output writes it (the shortest text
    that reads back as the same double).

    >>> cuts_json([1.000001, 1.000002]), cuts_json([1709640000.0], "timestamp")
    ('[1.000001,1.000002]', '["2024-03-05T12:00:00"]')
    >>> cuts_json([])  # one bin
    '[]'
    """
    return jsonout.dumps(shown_cuts(cuts, temporal), separators=(",", ":"))
