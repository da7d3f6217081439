"""Formatters: text renderings of a :class:`~bitsift.run.result.Ranking`. They only read it."""

from __future__ import annotations

from collections.abc import Callable

from bitsift import jsonout
from bitsift.names import escape_text
from bitsift.numformat import format_bits, format_cuts, format_metric
from bitsift.output.texttable import aligned, csv_text
from bitsift.run.metrics import FLAG_DESCRIPTIONS
from bitsift.run.result import (
    ATTRIBUTE_KEYS,
    SEGMENT_STATUS,
    AttributeScore,
    Ranking,
    SegmentedRanking,
    segment_columns,
    segment_label,
)
from bitsift.spec.rankspec import CONFIDENCE_Z

FORMATS: tuple[str, ...] = ("table", "json", "csv", "markdown")

_TABLE_COLUMNS: tuple[tuple[str, str], ...] = (
    ("attribute", "attribute"),
    ("kind", "kind"),
    ("distinct", "values"),
    ("information_gain", "info gain"),
    ("interval", "corrected ± {level}"),
    ("rank_range", "rank"),
    ("gain_ratio", "gain ratio"),
    ("symmetric_uncertainty", "sym unc"),
    ("conditional_entropy", "H(Y|X)"),
    ("attribute_entropy", "H(X)"),
    ("g_statistic", "G"),
    ("dof", "dof"),
    ("p_value", "p"),
    ("flags", "flags"),
)
#: Attribute, kind and flags: left-aligned text; the numbers between them right-aligned.
_TEXT_COLUMNS = frozenset({0, 1, len(_TABLE_COLUMNS) - 1})


def _cell(key: str, value: object) -> str:
    """One table cell as text; names are escaped (a column name may hold control characters:
    raw, they could retitle the terminal or start a forged row)."""
    if value is None:  # a p-value that is not reported (fractional weights)
        return "-"
    if key == "flags":
        return ",".join(value) if isinstance(value, list) else str(value)
    if isinstance(value, float):
        return format_metric(key, value, grouped=False)
    return escape_text(str(value))


def interval_text(score: AttributeScore, confidence: float) -> str:
    """The gain's interval, compactly: the corrected gain ± z·se (``0.1850 ± 0.0040``); its
    low end is clipped at 0 in the fields. ``-`` without an se (fractional weights).

    >>> s = AttributeScore("a", "categorical", 3, 0.2, 0.1, 0.1, 0.7, 1.5, 9.0, 2, 0.01,
    ...                    information_gain_se=0.002, information_gain_corrected=0.185)
    >>> interval_text(s, 0.95)
    '0.1850 ± 0.0039'
    """
    if score.information_gain_se is None:
        return "-"
    half = CONFIDENCE_Z[confidence] * score.information_gain_se
    return (f"{format_metric('information_gain', score.information_gain_corrected)}"
            f" ± {format_metric('information_gain', half)}")


def rank_text(score: AttributeScore) -> str:
    """The rank range ``1–2`` (one number when both ends agree); ``-`` without one."""
    if score.rank_low is None or score.rank_high is None:
        return "-"
    if score.rank_low == score.rank_high:
        return str(score.rank_low)
    return f"{score.rank_low}\u2013{score.rank_high}"


def _headers(ranking: Ranking) -> list[str]:
    return [h.format(level=f"{ranking.confidence:.0%}") for _, h in _TABLE_COLUMNS]


def _rows(ranking: Ranking) -> list[list[str]]:
    def cell(key: str, a: AttributeScore) -> str:
        if key == "interval":
            return interval_text(a, ranking.confidence)
        if key == "rank_range":
            return rank_text(a)
        return _cell(key, getattr(a, key))

    return [[cell(k, a) for k, _ in _TABLE_COLUMNS] for a in ranking.attributes]


def _summary(ranking: Ranking) -> str:
    return _plain_summary(ranking) + _target_bins_line(ranking)


def _target_bins_line(ranking: Ranking) -> str:
    """A binned target (``--target-bins``): its classes' cut points, on a line of their own."""
    binning = ranking.target_binning
    if binning is None:
        return ""
    cuts = [float(c) for c in binning["cuts"]]
    return (f"\ntarget {ranking.target!r} binned by {binning['method']} into {len(cuts) + 1} "
            f"classes at: {format_cuts(cuts)}")


def _plain_summary(ranking: Ranking) -> str:
    if ranking.weight is not None:
        return (
            f"{escape_text(ranking.table)}: target {ranking.target!r}, weight"
            f" {ranking.weight!r} (total {ranking.weight_total or 0:,.6g}), {ranking.rows:,} rows"
            f" ({ranking.rows_excluded:,} excluded: NULL target;"
            f" {ranking.rows_without_weight:,} without weight), {ranking.classes} classes,"
            f" H(Y) = {format_bits(ranking.target_entropy)} bits; sorted by {ranking.sort}"
        )
    return (
        f"{escape_text(ranking.table)}: target {ranking.target!r}, {ranking.rows:,} rows"
        f" ({ranking.rows_excluded:,} excluded: NULL target), {ranking.classes} classes,"
        f" H(Y) = {format_bits(ranking.target_entropy)} bits; sorted by {ranking.sort}"
    )


def _legend(ranking: Ranking) -> list[str]:
    seen = sorted({f for a in ranking.attributes for f in a.flags})
    return [f"  {f}: {FLAG_DESCRIPTIONS[f]}" for f in seen]


def as_table(ranking: Ranking) -> str:
    """An aligned terminal table: text left, numbers right."""
    header = _headers(ranking)
    out = [_summary(ranking), "",
           *aligned([header, *_rows(ranking)], left=_TEXT_COLUMNS, rule=True)]
    out += _cut_lines(ranking)
    legend = _legend(ranking)
    if legend:
        out += ["", "flags:", *legend]
    return "\n".join(out) + "\n"


def _cut_lines(ranking: Ranking) -> list[str]:
    """One line per numeric attribute: its binning, bin count and cut points."""
    binned = [a for a in ranking.attributes if a.cuts is not None]
    parts = [a for a in ranking.attributes if a.date_part]
    lines = []
    if binned:
        rows = [[a.attribute, f"{a.binning or 'quantile'}{' of time' if a.temporal else ''}, "
                 f"{a.bins} bin{'s' if a.bins != 1 else ''}: {_shown_cuts(a)}"] for a in binned]
        lines += ["", "cut points (bin k holds cut[k-1] <= x < cut[k]):",
                  *("  " + line for line in aligned(rows, left={0, 1}))]
    if parts:
        lines += ["", "date parts ranked as categories:",
                  *("  " + line for line in aligned([[a.attribute, a.date_part or ""]
                                                     for a in parts], left={0, 1}))]
    return lines


def _shown_cuts(score: AttributeScore) -> str:
    """An attribute's cut points on one line: numbers, or ISO 8601 for dated attributes."""
    shown = score.shown_cuts() or []
    if score.temporal is None:
        return format_cuts(score.cuts or [])
    return " | ".join(str(c) for c in shown) or "(none: one bin)"


def _csv_row(score: AttributeScore) -> list[object]:
    """An attribute's CSV cells in :data:`ATTRIBUTE_KEYS` order: flags and cut points joined
    with ``;``, cut points in full (``repr``: a program reads them back)."""
    record = score.to_dict()
    record["flags"] = ";".join(score.flags)
    shown = score.shown_cuts()
    record["cuts"] = (None if shown is None else ";".join(
        c if isinstance(c, str) else repr(c) for c in shown))
    return [record[k] for k in ATTRIBUTE_KEYS]


def as_json(ranking: Ranking) -> str:
    """Exactly one JSON object: the contract of :meth:`Ranking.to_dict`."""
    return jsonout.dumps(ranking.to_dict(), indent=2) + "\n"


def as_csv(ranking: Ranking) -> str:
    """One row per attribute; flags and cut points joined with ``;``."""
    return csv_text(ATTRIBUTE_KEYS, (_csv_row(a) for a in ranking.attributes))


def _markdown_escape(text: str) -> str:
    return text.replace("|", "\\|")


def as_markdown(ranking: Ranking) -> str:
    """A GitHub-flavoured Markdown table with a one-line summary."""
    header = _headers(ranking)
    # "H(Y|X)" holds a pipe: unescaped, it would split the header into one cell too many.
    lines = [_summary(ranking), "", "| " + " | ".join(map(_markdown_escape, header)) + " |"]
    lines.append("|" + "|".join("---" if i in _TEXT_COLUMNS else "---:"
                                for i in range(len(header))) + "|")
    for row in _rows(ranking):
        lines.append("| " + " | ".join(_markdown_escape(c) for c in row) + " |")
    lines += [_markdown_escape(line) for line in _cut_lines(ranking)]
    return "\n".join(lines) + "\n"


FORMATTERS: dict[str, Callable[[Ranking], str]] = {
    "table": as_table,
    "json": as_json,
    "csv": as_csv,
    "markdown": as_markdown,
}


def render(ranking: Ranking | SegmentedRanking, fmt: str) -> str:
    """``ranking`` in format ``fmt`` (one of :data:`FORMATS`)."""
    if isinstance(ranking, SegmentedRanking):
        return SEGMENTED_FORMATTERS[fmt](ranking)
    return FORMATTERS[fmt](ranking)


# --- segmented rankings (--by): one section per segment -------------------------------------


def _segment_heading(ranking: Ranking) -> str:
    text = f"segment {escape_text(segment_label(ranking.segment))}"
    if ranking.status != "ok":
        text += f": {SEGMENT_STATUS[ranking.status]}"
    return text


def _segments_summary(segmented: SegmentedRanking) -> str:
    ranked = sum(1 for s in segmented.segments if s.status == "ok")
    weight = f", weight {segmented.weight!r}" if segmented.weight else ""
    return (f"{escape_text(segmented.table)}: target {segmented.target!r}{weight}, by"
            f" {escape_text(', '.join(segmented.by))}: {len(segmented.segments)} segments,"
            f" {ranked} ranked")


def _segment_sections(segmented: SegmentedRanking, one: Callable[[Ranking], str],
                      heading: Callable[[str], str]) -> str:
    out = [_segments_summary(segmented)]
    for ranking in segmented.segments:
        out += ["", heading(_segment_heading(ranking))]
        if ranking.status == "no_rows":
            out.append(f"{ranking.rows_excluded:,} rows excluded: NULL target"
                       + (f"; {ranking.rows_without_weight:,} without weight"
                          if ranking.weight else ""))
        else:
            out.append(one(ranking).rstrip("\n"))
    return "\n".join(out) + "\n"


def segmented_table(segmented: SegmentedRanking) -> str:
    """One terminal table per segment, each under a line naming the segment."""
    return _segment_sections(segmented, as_table, lambda text: f"== {text} ==")


def segmented_markdown(segmented: SegmentedRanking) -> str:
    """One Markdown section (### heading) and table per segment."""
    return _segment_sections(segmented, as_markdown,
                             lambda text: f"### {_markdown_escape(text)}")


def segmented_json(segmented: SegmentedRanking) -> str:
    """Exactly one JSON object: :meth:`SegmentedRanking.to_dict`."""
    return jsonout.dumps(segmented.to_dict(), indent=2) + "\n"


def segmented_csv(segmented: SegmentedRanking) -> str:
    """One row per segment and attribute: the segment columns (renamed ``segment_<name>``
    where they clash with an attribute key), then the attribute keys."""
    heads = segment_columns(segmented.by)
    rows = [[*((ranking.segment or {}).get(b) for b in segmented.by), *_csv_row(a)]
            for ranking in segmented.segments for a in ranking.attributes]
    return csv_text([*heads, *ATTRIBUTE_KEYS], rows)


SEGMENTED_FORMATTERS: dict[str, Callable[[SegmentedRanking], str]] = {
    "table": segmented_table,
    "json": segmented_json,
    "csv": segmented_csv,
    "markdown": segmented_markdown,
}
