"""The HTML report: one self-contained file (inline SVG and CSS, nothing fetched) that people read.

:func:`report_context` turns one or more :class:`~bitsift.analysis.profile_model.ProfiledRun` (one
per segment, once segmented runs exist) into plain dictionaries of display-ready text and geometry;
``templates/report.html.j2`` only lays them out. Every number shown also sits in a ``data-value``
attribute with full precision, so tests can compare it with the JSON output.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from bitsift.analysis.profile_model import AttributeProfile, ProfiledRun, ValueProfile
from bitsift.names import escape_text
from bitsift.numformat import (
    cut_texts,
    format_bits,
    format_cuts,
    format_metric,
    format_share,
)
from bitsift.output import report_interval as interval
from bitsift.output.report_redundancy import redundancy_context
from bitsift.output.texttable import aligned
from bitsift.run.metrics import FLAG_DESCRIPTIONS
from bitsift.run.result import AttributeScore
from bitsift.sql.templates import render
from bitsift.version import __version__

#: Class colours: the Okabe-Ito palette (Okabe & Ito, "Color Universal Design", 2008) without
#: its black, ordered so that the first few classes differ most for every kind of colour vision.
CLASS_COLOURS: tuple[str, ...] = (
    "#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442",
)
#: Classes beyond the palette share one neutral grey (named in every tooltip).
OTHER_CLASS_COLOUR = "#9A9A9A"

METRIC_LABELS: dict[str, str] = {
    "information_gain": "information gain (bits)",
    "gain_ratio": "gain ratio",
    "symmetric_uncertainty": "symmetric uncertainty",
}

#: Columns of the metrics table: key of :class:`AttributeScore`, heading, tooltip.
TABLE_COLUMNS: tuple[tuple[str, str], ...] = (
    ("kind", "kind"),
    ("distinct", "values"),
    ("information_gain", "info gain"),
    ("gain_ratio", "gain ratio"),
    ("symmetric_uncertainty", "sym. unc."),
    ("conditional_entropy", "H(Y|X)"),
    ("attribute_entropy", "H(X)"),
    ("g_statistic", "G"),
    ("dof", "dof"),
    ("p_value", "p"),
)

CAUTIONS: tuple[str, ...] = (
    "Information gain measures association in this data, not cause. A high-ranking attribute "
    "may be a consequence of the target, a stand-in for something else, or an artefact of how "
    "the rows were collected; it says nothing about what would happen if the attribute changed.",
    "Ranking attributes about people (sex, age, religion, ethnicity, health and the like) and "
    "using them in decisions about people can be unlawful or unfair. Defer to local law and to "
    "your organisation's policy before acting on such a ranking.",
)
SENSITIVE_NOTE = (
    "Columns marked sensitive were named with --sensitive by whoever produced this report: they "
    "describe people. Their numbers are shown so that they can be checked, not to invite their use."
)

GLOSSARY: tuple[tuple[str, str], ...] = (
    ("H(Y), target entropy",
     "How uncertain the target's class is, in bits: 0 when every row has the same class, "
     "log2(k) when k classes are equally common."),
    ("H(Y|X), conditional entropy",
     "The uncertainty left once the attribute's value is known: the row-weighted average of "
     "each value's own entropy H(Y|X=x)."),
    ("contribution",
     "A value's share of the rows times its own entropy. The contributions of an attribute add up "
     "to H(Y|X); values with a large share and a low own entropy carry the signal."),
    ("information gain",
     "H(Y) − H(Y|X): the bits of uncertainty about the target that the attribute removes. "
     "Attributes with many values gain by chance alone."),
    ("gain ratio",
     "Information gain divided by H(X), the attribute's own entropy: a correction for attributes "
     "with many values."),
    ("symmetric uncertainty",
     "2 · IG / (H(X) + H(Y)), between 0 (no association) and 1 (each determines the other)."),
    ("G and p",
     "G = 2 · N · ln 2 · IG, compared with a chi-square distribution with dof = (values − 1) · "
     "(classes − 1) degrees of freedom: p is the chance of a gain this large if attribute and "
     "target were independent. On large tables tiny gains get tiny p-values."),
    ("redundancy, mutual information",
     "I(X1; X2): the bits two attributes tell about each other, measured like information gain "
     "on the same rows and bins. Near-copies (a city and its postcode) share almost all of "
     "their entropy; the heatmap colours each pair by its symmetric uncertainty, 0 to 1."),
    ("mRMR selection",
     "Minimum redundancy, maximum relevance (Peng, Long & Ding, 2005): starting from the most "
     "relevant attribute, each step adds the one whose information gain, less (MID) or divided "
     "by (MIQ) its mean mutual information with those already chosen, is largest."),
    ("bins of numeric attributes",
     "Numeric attributes are cut at the cut points shown: into bins of about equal row counts "
     "(quantile), of equal width (equal-width), at the one threshold with the highest gain "
     "(best-split) or where Fayyad & Irani's MDL rule accepts a split (mdl); a value equal to "
     "a cut point falls into the bin above it."),
)

# Bar chart geometry, in SVG user units (the chart scales with the page width).
_CHART_WIDTH = 1080
_LABEL_RIGHT = 200
_BAR_LEFT = 212
_BAR_RIGHT = 700
_VALUE_RIGHT = 782
_FLAGS_LEFT = 796
_ROW_HEIGHT = 26
_BAR_HEIGHT = 16
_CHART_TOP = 30
_NAME_CHARS = 30


def class_colour(index: int) -> str:
    return CLASS_COLOURS[index] if index < len(CLASS_COLOURS) else OTHER_CLASS_COLOUR


def nice_ticks(top: float, count: int = 5) -> list[float]:
    """Round tick values from 0 to at least ``top``.

    >>> nice_ticks(1.3236)
    [0.0, 0.5, 1.0, 1.5]
    >>> nice_ticks(0)
    [0.0, 0.2, 0.4, 0.6000000000000001, 0.8, 1.0]
    """
    if not top > 0:
        top = 1.0
    raw = top / count
    magnitude = 10 ** math.floor(math.log10(raw))
    step = next(m * magnitude for m in (1, 2, 2.5, 5, 10) if m * magnitude >= raw)
    steps = math.ceil(top / step - 1e-9)
    return [i * step for i in range(steps + 1)]


def _short(name: str, limit: int = _NAME_CHARS) -> str:
    return name if len(name) <= limit else name[: limit - 1] + "…"


def _segments(counts: Sequence[int], classes: Sequence[str]) -> list[dict[str, Any]]:
    total = sum(counts)
    segments = []
    for index, (label, n) in enumerate(zip(classes, counts, strict=True)):
        if n == 0 or total == 0:
            continue
        segments.append({
            "label": label,
            "colour": class_colour(index),
            "width": round(100 * n / total, 3),
            "title": f"{label}: {n:,} of {total:,} rows ({format_share(n / total)})",
        })
    return segments


def _chart(run: ProfiledRun, anchors: dict[str, str]) -> dict[str, Any]:
    ranking = run.ranking
    metric = ranking.sort
    values = [float(getattr(s, metric)) for s in ranking.attributes]
    bound = ranking.target_entropy if metric == "information_gain" else 1.0
    whiskers = metric in interval.WHISKER_METRICS
    ticks = nice_ticks(max([*values, *interval.highs(ranking, whiskers)], default=0.0))
    scale_top = ticks[-1]
    span = _BAR_RIGHT - _BAR_LEFT

    def x_of(value: float) -> float:
        return round(_BAR_LEFT + span * min(max(value, 0.0), scale_top) / scale_top, 2)

    rows = []
    for position, (scored, value) in enumerate(zip(ranking.attributes, values, strict=True)):
        top = _CHART_TOP + position * _ROW_HEIGHT
        marks = list(scored.flags)
        sensitive = scored.attribute in run.sensitive
        rows.append({
            "whisker": interval.whisker(scored, x_of, top + _ROW_HEIGHT / 2, whiskers),
            "overlaps_above": interval.overlaps_above(ranking, position),
            "rank_text": interval.rank_text(scored),
            "attribute": scored.attribute,
            "short": _short(scored.attribute),
            "anchor": anchors.get(scored.attribute),
            "value": value,
            "value_repr": repr(value),
            "text": format_metric(metric, value),
            "bar_y": top + (_ROW_HEIGHT - _BAR_HEIGHT) / 2,
            "text_y": top + _ROW_HEIGHT / 2 + 4,
            "bar_width": round(x_of(value) - _BAR_LEFT, 2),
            "flags": marks,
            "flagged": bool(marks),
            "sensitive": sensitive,
            "marks_text": ", ".join((["sensitive"] if sensitive else []) + marks),
            "band": position % 2 == 1,
            "band_y": top,
        })
    height = _CHART_TOP + len(rows) * _ROW_HEIGHT + 10
    return {
        "metric": metric,
        "metric_label": METRIC_LABELS.get(metric, metric),
        "width": _CHART_WIDTH,
        "height": height,
        "label_right": _LABEL_RIGHT,
        "bar_left": _BAR_LEFT,
        "bar_right": _BAR_RIGHT,
        "value_right": _VALUE_RIGHT,
        "flags_left": _FLAGS_LEFT,
        "bar_height": _BAR_HEIGHT,
        "row_height": _ROW_HEIGHT,
        "top": _CHART_TOP,
        "bottom": height - 10,
        "ticks": [{"x": x_of(t), "text": f"{t:g}"} for t in ticks],
        "bound": (
            {"x": x_of(bound), "text": f"H(Y) = {format_bits(bound)}"}
            if metric == "information_gain" and 0 < bound <= scale_top
            else None
        ),
        "rows": rows,
    }


def _metric_cells(scored: AttributeScore) -> list[dict[str, Any]]:
    cells = []
    for key, _heading in TABLE_COLUMNS:
        value = getattr(scored, key)
        cells.append({
            "key": key,
            "text": format_metric(key, value),
            "value_repr": repr(value) if isinstance(value, int | float) else str(value),
            "numeric": isinstance(value, int | float) and not isinstance(value, bool),
        })
    return cells


def _value_row(value: ValueProfile, classes: Sequence[str]) -> dict[str, Any]:
    return {
        "label": value.label,
        "kind": value.kind,
        "rows": f"{value.rows:,}",
        "rows_value": value.rows,
        "share": format_share(value.share),
        "share_value": repr(value.share),
        "segments": _segments(value.counts, classes),
        "entropy": format_bits(value.entropy),
        "entropy_value": repr(value.entropy),
        "contribution": format_bits(value.contribution),
        "contribution_value": repr(value.contribution),
        "merged": value.merged_values,
    }


def _drilldown(scored: AttributeScore, profile: AttributeProfile, anchor: str,
               sensitive: bool) -> dict[str, Any]:
    cuts = None
    if profile.cuts is not None:
        cuts = cut_texts(profile.cuts, profile.temporal) or ["(none: a single bin)"]
    return {
        "attribute": scored.attribute,
        "anchor": anchor,
        "kind": scored.kind,
        "sensitive": sensitive,
        "flags": [{"name": f, "text": FLAG_DESCRIPTIONS.get(f, f)} for f in scored.flags],
        "rows": f"{profile.rows:,}",
        "distinct": f"{profile.distinct:,}",
        "summary": [
            ("information gain", format_metric("information_gain", scored.information_gain)),
            ("gain ratio", format_metric("gain_ratio", scored.gain_ratio)),
            ("H(Y|X)", format_metric("conditional_entropy", scored.conditional_entropy)),
            ("p", format_metric("p_value", scored.p_value)),
        ],
        "cuts": cuts,
        "value_rows": [_value_row(v, profile.classes) for v in profile.values],
        "total": {
            "rows": f"{profile.rows:,}",
            "segments": _segments(profile.class_counts, profile.classes),
            "target_entropy": format_bits(profile.target_entropy),
            "conditional_entropy": format_bits(profile.conditional_entropy),
            "conditional_entropy_value": repr(profile.conditional_entropy),
            "information_gain": format_bits(profile.information_gain),
        },
    }


def _binning_label(p: dict[str, Any]) -> str:
    """``quantile, 10 bins`` / ``best-split``, plus the per-column overrides."""
    method = str(p.get("binning") or "quantile")
    label = f"{method}, {p.get('bins')} bins" if method in ("quantile", "equal-width") else method
    overrides = p.get("binning_for") or ()
    if overrides:
        label += "; " + ", ".join(f"{c}: {m}" + (f" {b} bins" if b else "")
                                  for c, m, b in overrides)
    return label


def _parameters(run: ProfiledRun) -> list[tuple[str, str]]:
    p = run.parameters
    ranking = run.ranking
    items = [
        ("source", str(p.get("source", ranking.table))),
        ("target", ranking.target),
        ("engine dialect", ranking.dialect),
        ("rows used", f"{ranking.rows:,}"),
        ("rows left out (NULL target)", f"{ranking.rows_excluded:,}"),
        ("classes", f"{ranking.classes:,}"),
        ("H(Y)", f"{format_bits(ranking.target_entropy)} bits"),
        ("attributes ranked", f"{p.get('attributes', len(ranking.attributes)):,}"),
        ("sorted by", METRIC_LABELS.get(ranking.sort, ranking.sort)),
        ("missing values", {"category": "their own value", "drop": "dropped per attribute"}.get(
            str(p.get("missing")), str(p.get("missing")))),
        ("numeric binning", _binning_label(p)),
    ]
    if p.get("where"):
        items.append(("rows where", str(p["where"])))
    if p.get("limit"):
        items.append(("shown", f"top {p['limit']} attributes"))
    if run.sensitive:
        items.append(("marked sensitive", ", ".join(run.sensitive)))
    return items


def run_context(run: ProfiledRun, prefix: str) -> dict[str, Any]:
    """Display-ready data of one run; ``prefix`` keeps element ids unique across runs."""
    ranking = run.ranking
    profiled = run.profiled()
    anchors = {s.attribute: f"{prefix}-a{i}" for i, (s, _) in enumerate(profiled, start=1)}
    profiles = run.profiles
    classes = [
        {"label": label, "colour": class_colour(i), "rows": f"{n:,}",
         "share": format_share(n / sum(profiles.class_rows)) if profiles.class_rows else ""}
        for i, (label, n) in enumerate(zip(profiles.classes, profiles.class_rows, strict=True))
    ]
    flags_seen = sorted({f for s in ranking.attributes for f in s.flags})
    return {
        "id": prefix,
        "confidence": f"{ranking.confidence:.0%}",
        "segment": run.segment,
        "title": f"{ranking.target} in {ranking.table}",
        "parameters": _parameters(run),
        "classes": classes,
        "class_bar": _segments(profiles.class_rows, profiles.classes),
        "grey_classes": len(profiles.classes) > len(CLASS_COLOURS),
        "chart": _chart(run, anchors),
        "columns": [heading for _, heading in TABLE_COLUMNS],
        "table": [
            {"attribute": s.attribute, "anchor": anchors.get(s.attribute),
             "sensitive": s.attribute in run.sensitive, "flags": list(s.flags),
             "cells": _metric_cells(s)}
            for s in ranking.attributes
        ],
        "flags_seen": [{"name": f, "text": FLAG_DESCRIPTIONS.get(f, f)} for f in flags_seen],
        "drilldowns": [
            _drilldown(s, p, anchors[s.attribute], s.attribute in run.sensitive)
            for s, p in profiled
        ],
        "not_profiled": len(ranking.attributes) - len(profiled),
        "sensitive": list(run.sensitive),
        # The heatmap and the mRMR selection (report --select), else None.
        "redundancy": redundancy_context(run, prefix),
    }


def report_context(runs: Sequence[ProfiledRun], *, now: _dt.datetime | None = None,
                   title: str | None = None) -> dict[str, Any]:
    """Everything ``report.html.j2`` shows, for one run or one run per segment."""
    if not runs:
        raise ValueError("a report needs at least one run")
    first = runs[0].ranking
    stamp = (now or _dt.datetime.now(_dt.UTC)).strftime("%Y-%m-%d %H:%M UTC")
    return {
        "title": title or f"What tells about {first.target!r} in {first.table}",
        "generated": stamp,
        "version": __version__,
        "runs": [run_context(run, f"r{i}") for i, run in enumerate(runs, start=1)],
        "glossary": list(GLOSSARY),
        "cautions": list(CAUTIONS),
        "sensitive_note": SENSITIVE_NOTE if any(r.sensitive for r in runs) else None,
    }


def render_report(runs: Sequence[ProfiledRun], *, now: _dt.datetime | None = None,
                  title: str | None = None) -> str:
    """The report as one HTML document (no external resources)."""
    return render("report.html.j2", **report_context(runs, now=now, title=title))


def write_report(runs: Sequence[ProfiledRun], path: str | Path, *,
                 now: _dt.datetime | None = None, title: str | None = None) -> Path:
    """Render the report and write it to ``path`` (UTF-8); returns the path."""
    target = Path(path)
    target.write_text(render_report(runs, now=now, title=title), encoding="utf-8")
    return target


# --- the drill-down in a terminal (``bitsift profile``) ------------------------------------

#: Class columns shown in the terminal; further classes are summed into one column.
TERMINAL_CLASSES = 6
_LABEL_CHARS = 32


def _clip(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _class_shares(counts: Sequence[int], shown: int) -> list[str]:
    total = sum(counts)
    cells = [format_share(n / total) if total else "" for n in counts[:shown]]
    if len(counts) > shown:
        rest = sum(counts[shown:])
        cells.append(format_share(rest / total) if total else "")
    return cells


def profile_text(run: ProfiledRun) -> str:
    """The drill-down of every profiled attribute as aligned text for a terminal."""
    ranking, profiles = run.ranking, run.profiles
    total = sum(profiles.class_rows)
    classes = ", ".join(
        f"{label} {format_share(n / total)}"
        for label, n in zip(profiles.classes, profiles.class_rows, strict=True)
    )
    out = [
        f"{ranking.table}: target {ranking.target!r}, {ranking.rows:,} rows"
        f" ({ranking.rows_excluded:,} left out: NULL target), {ranking.classes} classes: {classes}"
    ]
    shown = min(len(profiles.classes), TERMINAL_CLASSES)
    class_heads = [_clip(c, 12) for c in profiles.classes[:shown]]
    if len(profiles.classes) > shown:
        class_heads.append("other classes")
    for scored, profile in run.profiled():
        marks = (["SENSITIVE"] if scored.attribute in run.sensitive else []) + scored.flags
        out += [
            "",
            f"{scored.attribute} ({scored.kind}, {profile.distinct:,}"
            f" value{'' if profile.distinct == 1 else 's'})"
            + (f"  [{', '.join(marks)}]" if marks else ""),
            f"information gain {format_bits(scored.information_gain)} bits"
            f" = H(Y) {format_bits(profile.target_entropy)}"
            f" - H(Y|X) {format_bits(profile.conditional_entropy)};"
            f" gain ratio {format_bits(scored.gain_ratio)};"
            f" p {format_metric('p_value', scored.p_value)}",
        ]
        if profile.cuts is not None:
            cuts = (format_cuts(profile.cuts, min_digits=6, separator=", ",
                                none="none (a single bin)") if profile.temporal is None else
                    ", ".join(cut_texts(profile.cuts, profile.temporal)) or "none (a single bin)")
            out.append(f"cut points: {cuts}")
        table = [["value", "rows", "share", *class_heads, "H(Y|X=x)", "contribution"]]
        for value in profile.values:
            table.append([
                _clip(value.label, _LABEL_CHARS), f"{value.rows:,}", format_share(value.share),
                *_class_shares(value.counts, shown),
                format_bits(value.entropy), format_bits(value.contribution),
            ])
        table.append([
            "all rows", f"{profile.rows:,}", "100 %", *_class_shares(profile.class_counts, shown),
            format_bits(profile.target_entropy), format_bits(profile.conditional_entropy),
        ])
        lines = aligned(table)
        width = max(len(line) for line in lines)
        out += [lines[0], "-" * width, *lines[1:-1], "-" * width, lines[-1]]
    out += ["", "Class columns: share of the value's rows. H(Y|X=x): the value's own entropy;"
            " contribution = share x H(Y|X=x), summing to H(Y|X).",
            "Caution: " + CAUTIONS[0].split(". ")[0] + "."]
    if run.sensitive:
        out.append("Caution: " + CAUTIONS[1])
    # Names and class labels in the headings: one line each, nothing acting on the terminal.
    return "\n".join(map(escape_text, out)) + "\n"


def profile_dict(run: ProfiledRun) -> dict[str, Any]:
    """The drill-down as one JSON-ready object; sensitive columns carry a "sensitive" flag."""
    ranking, profiles = run.ranking, run.profiles
    attributes = []
    for scored, profile in run.profiled():
        sensitive = scored.attribute in run.sensitive
        entry = profile.to_dict()
        entry["sensitive"] = sensitive
        entry["flags"] = list(scored.flags) + (["sensitive"] if sensitive else [])
        entry["score"] = scored.to_dict()
        attributes.append(entry)
    return {
        "target": ranking.target,
        "table": ranking.table,
        "rows": ranking.rows,
        "rows_excluded": ranking.rows_excluded,
        "target_entropy": ranking.target_entropy,
        "classes": [{"label": c, "rows": n}
                    for c, n in zip(profiles.classes, profiles.class_rows, strict=True)],
        "sensitive": list(run.sensitive),
        "attributes": attributes,
        "cautions": list(CAUTIONS),
    }
