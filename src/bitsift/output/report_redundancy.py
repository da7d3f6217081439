"""The report's redundancy heatmap and mRMR selection: display-ready data and SVG geometry.

:func:`redundancy_context` reads a run's :class:`~bitsift.analysis.selection.Selection` (with the
full matrix among its candidates) and returns plain dictionaries that ``templates/report.html.j2``
lays out as an inline SVG (no script, nothing fetched). The heatmap is a lower triangle: the chosen
attributes first, in the order they were chosen, then the other candidates in ranking order, so the
chosen set is the outlined triangle in the top-left corner. Cells are coloured by symmetric
uncertainty (0 to 1, comparable between pairs); every cell carries the mutual information and the
SU at full precision in ``data-mi`` and ``data-su``.
"""

from __future__ import annotations

from typing import Any

from bitsift.analysis.profile_model import ProfiledRun
from bitsift.analysis.redundancy import RedundancyMatrix
from bitsift.numformat import format_bits, format_selection_score

#: Sequential single-hue ramp, light (shares nothing) to dark (each determines the other):
#: ColorBrewer "Blues", 9 classes (Brewer, colorbrewer2.org; hex values recalled from memory).
#: Lightness alone carries the value, so it reads the same for every kind of colour vision and
#: in greyscale.
HEAT_RAMP: tuple[str, ...] = (
    "#f7fbff", "#deebf7", "#c6dbef", "#9ecae1", "#6baed6",
    "#4292c6", "#2171b5", "#08519c", "#08306b",
)
#: Outline of the chosen set: Okabe-Ito vermilion, far from every blue of the ramp.
CHOSEN_OUTLINE = "#D55E00"
#: Bars of the selection table: relevance (Okabe-Ito blue) and redundancy (Okabe-Ito orange).
RELEVANCE_COLOUR = "#0072B2"
REDUNDANCY_COLOUR = "#E69F00"

CRITERION_TEXT: dict[str, str] = {
    "mid": "MID: relevance − mean redundancy",
    "miq": "MIQ: relevance / mean redundancy",
}

# Heatmap geometry, in SVG user units (the drawing scales with the page width).
_LABEL_RIGHT = 200
_GRID_LEFT = 208
_GRID_TOP = 12
_MAX_CELL = 34
_MIN_CELL = 14
_GRID_SPAN = 620
_CELL_TEXT_MIN = 26
_NAME_CHARS = 28
_LEGEND_WIDTH = 230
_BAR_WIDTH = 150


def heat_colour(value: float) -> str:
    """The ramp's colour for a value in [0, 1], interpolated between its nine stops.

    >>> heat_colour(0.0), heat_colour(1.0), heat_colour(0.5)
    ('#f7fbff', '#08306b', '#6baed6')
    """
    value = min(max(value, 0.0), 1.0)
    position = value * (len(HEAT_RAMP) - 1)
    low = int(position)
    if low >= len(HEAT_RAMP) - 1:
        return HEAT_RAMP[-1]
    share = position - low
    a, b = _rgb(HEAT_RAMP[low]), _rgb(HEAT_RAMP[low + 1])
    mixed = (round(x + (y - x) * share) for x, y in zip(a, b, strict=True))
    return "#" + "".join(f"{c:02x}" for c in mixed)


def _rgb(colour: str) -> tuple[int, int, int]:
    return int(colour[1:3], 16), int(colour[3:5], 16), int(colour[5:7], 16)


def _ink(value: float) -> str:
    """Dark text on the light half of the ramp, white on the dark half."""
    return "#ffffff" if value > 0.55 else "#1f2a36"


def _short(name: str, limit: int = _NAME_CHARS) -> str:
    return name if len(name) <= limit else name[: limit - 1] + "…"


def _cell_text(su: float) -> str:
    """Two decimals without the leading zero ('.42'); '0' for what rounds to nothing."""
    if su < 0.005:
        return "0"
    return "1" if su >= 0.995 else f"{su:.2f}".removeprefix("0")


def _heatmap(order: list[str], matrix: RedundancyMatrix, chosen: int,
             prefix: str) -> dict[str, Any]:
    n = len(order)
    cell = max(_MIN_CELL, min(_MAX_CELL, _GRID_SPAN // max(n - 1, 1)))
    grid = (n - 1) * cell
    cells: list[dict[str, Any]] = []
    rows: list[dict[str, Any]] = []
    columns: list[dict[str, Any]] = []
    for i in range(1, n):
        y = _GRID_TOP + (i - 1) * cell
        rows.append({"text": _short(order[i]), "name": order[i], "y": y + cell / 2 + 4,
                     "chosen": i < chosen})
        for j in range(i):
            pair = matrix.pair(order[i], order[j])
            su, mi = pair.symmetric_uncertainty, pair.mutual_information
            cells.append({
                "x": _GRID_LEFT + j * cell, "y": y, "size": cell,
                "colour": heat_colour(su), "ink": _ink(su),
                "text": _cell_text(su) if cell >= _CELL_TEXT_MIN else "",
                "first": order[i], "second": order[j],
                "su": repr(su), "mi": repr(mi),
                "title": f"{order[i]} × {order[j]}: I = {format_bits(mi)} bits,"
                         f" SU = {format_bits(su)}, {pair.rows:,} rows",
                "chosen": i < chosen and j < chosen,
            })
    for j in range(n - 1):
        columns.append({"text": _short(order[j]), "name": order[j],
                        "x": _GRID_LEFT + j * cell + cell / 2,
                        "y": _GRID_TOP + grid + 8, "chosen": j < chosen})
    outline = None
    if chosen >= 2:  # the staircase around the chosen set's pairs
        points = [(_GRID_LEFT, _GRID_TOP)]
        for i in range(1, chosen):
            points += [(_GRID_LEFT + i * cell, _GRID_TOP + (i - 1) * cell),
                       (_GRID_LEFT + i * cell, _GRID_TOP + i * cell)]
        points.append((_GRID_LEFT, _GRID_TOP + (chosen - 1) * cell))
        outline = " ".join(f"{x},{y}" for x, y in points)
    longest = max((len(c["text"]) for c in columns), default=0)
    legend_x = _GRID_LEFT + grid + 40
    legend = {
        "x": legend_x,
        "y": _GRID_TOP + 8,
        "steps": [{"x": legend_x + k * 20, "colour": heat_colour(k / 10)} for k in range(11)],
        "ticks": [{"x": legend_x + k * 20 + 10, "text": t}
                  for k, t in ((0, "0"), (5, "0.5"), (10, "1"))],
    }
    return {
        "id": f"{prefix}-heatmap",
        "width": legend_x + _LEGEND_WIDTH,
        "height": max(_GRID_TOP + grid + 16 + int(longest * 5.2), _GRID_TOP + 120),
        "label_right": _LABEL_RIGHT,
        "cells": cells,
        "rows": rows,
        "columns": columns,
        "outline": outline,
        "outline_colour": CHOSEN_OUTLINE,
        "legend": legend,
    }


def redundancy_context(run: ProfiledRun, prefix: str) -> dict[str, Any] | None:
    """The heatmap and the selection table of one run, or None when the run has no selection."""
    selection = run.selection
    if selection is None:
        return None
    chosen = selection.attributes
    rest = [n for n in selection.candidates if n not in chosen]
    order = [*chosen, *rest]
    top_relevance = max((s.relevance for s in selection.steps), default=0.0) or 1.0

    def bar(value: float) -> float:
        return round(_BAR_WIDTH * min(max(value, 0.0), top_relevance) / top_relevance, 2)

    steps = []
    for step in selection.steps:
        steps.append({
            "position": step.position,
            "attribute": step.attribute,
            "sensitive": step.attribute in run.sensitive,
            "relevance": format_bits(step.relevance),
            "relevance_value": repr(step.relevance),
            "redundancy": format_bits(step.redundancy) if step.position > 1 else "–",
            "redundancy_value": repr(step.redundancy),
            "score": format_selection_score(step.score, selection.criterion),
            "score_value": repr(step.score),
            "closest": step.most_redundant_with,
            "closest_mi": format_bits(step.max_redundancy),
            "relevance_bar": bar(step.relevance),
            "redundancy_bar": bar(step.redundancy),
        })
    return {
        "criterion": selection.criterion,
        "criterion_text": CRITERION_TEXT.get(selection.criterion, selection.criterion),
        "k": len(selection.steps),
        "candidates": len(selection.candidates),
        "missing": selection.missing,
        "notes": list(selection.notes),
        "steps": steps,
        "bar_width": _BAR_WIDTH,
        "relevance_colour": RELEVANCE_COLOUR,
        "redundancy_colour": REDUNDANCY_COLOUR,
        "heatmap": _heatmap(order, selection.matrix, len(chosen), prefix)
        if len(order) >= 2 else None,
    }
