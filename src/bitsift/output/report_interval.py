"""The gain's interval in the report's ranking chart: a whisker per bar, and which rows' rank
ranges overlap the row above (shaded: the data cannot tell the two apart)."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from bitsift.numformat import format_metric
from bitsift.output.formatting import rank_text
from bitsift.run.result import AttributeScore, Ranking

__all__ = ["WHISKER_METRICS", "highs", "overlaps_above", "rank_text", "ranks_overlap",
           "whisker"]

#: Charts on the scale of the gain (bits), where its interval is drawn as a whisker.
WHISKER_METRICS: tuple[str, ...] = ("information_gain", "information_gain_corrected")


def highs(ranking: Ranking, whiskers: bool) -> list[float]:
    """The high ends of the intervals (when drawn), so the chart's scale holds every whisker."""
    return [s.information_gain_high for s in ranking.attributes
            if whiskers and s.information_gain_high is not None]


def overlaps_above(ranking: Ranking, position: int) -> bool:
    """Whether the attribute at ``position`` (0-based) shares a rank with the one above."""
    return position > 0 and ranks_overlap(ranking.attributes[position - 1],
                                          ranking.attributes[position])


def ranks_overlap(above: AttributeScore, below: AttributeScore) -> bool:
    """Whether two attributes' rank ranges share a rank; False when either has none.

    >>> a = AttributeScore("a", "categorical", 2, .3, 0, 0, 0, 0, 0, 1, None, rank_low=1,
    ...                    rank_high=2)
    >>> b = AttributeScore("b", "categorical", 2, .2, 0, 0, 0, 0, 0, 1, None, rank_low=2,
    ...                    rank_high=3)
    >>> ranks_overlap(a, b), ranks_overlap(a, AttributeScore(
    ...     "c", "categorical", 2, .1, 0, 0, 0, 0, 0, 1, None, rank_low=3, rank_high=3))
    (True, False)
    """
    if (above.rank_low is None or above.rank_high is None or below.rank_low is None
            or below.rank_high is None):
        return False
    return below.rank_low <= above.rank_high and above.rank_low <= below.rank_high


def whisker(scored: AttributeScore, x_of: Callable[[float], float], y: float,
            drawn: bool = True) -> dict[str, Any] | None:
    """The interval of the gain as a whisker across the bar at height ``y``; None when not
    ``drawn`` (a chart of another metric) or without one (fractional weights, no rows)."""
    low, high = scored.information_gain_low, scored.information_gain_high
    if not drawn or low is None or high is None:
        return None
    return {"x1": x_of(low), "x2": x_of(high), "y": round(y, 2),
            "text": f"{format_metric('information_gain', low)}\u2013"
                    f"{format_metric('information_gain', high)} bits, rank "
                    f"{rank_text(scored)}"}
