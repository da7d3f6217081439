"""Formatters: text renderings of a :class:`~bitsift.result.Ranking`. They only read it."""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Callable

from bitsift.metrics import FLAG_DESCRIPTIONS
from bitsift.result import ATTRIBUTE_KEYS, Ranking

FORMATS: tuple[str, ...] = ("table", "json", "csv", "markdown")

_TABLE_COLUMNS: tuple[tuple[str, str], ...] = (
    ("attribute", "attribute"),
    ("kind", "kind"),
    ("distinct", "values"),
    ("information_gain", "info gain"),
    ("gain_ratio", "gain ratio"),
    ("symmetric_uncertainty", "sym unc"),
    ("conditional_entropy", "H(Y|X)"),
    ("attribute_entropy", "H(X)"),
    ("g_statistic", "G"),
    ("dof", "dof"),
    ("p_value", "p"),
    ("flags", "flags"),
)


def _cell(key: str, value: object) -> str:
    if key == "flags":
        return ",".join(value) if isinstance(value, list) else str(value)
    if key == "p_value" and isinstance(value, float):
        return f"{value:.2e}" if 0 < value < 1e-3 else f"{value:.3f}"
    if key == "g_statistic" and isinstance(value, float):
        return f"{value:.1f}"
    if isinstance(value, float):
        return f"{value:.4f}"
    return str(value)


def _rows(ranking: Ranking) -> list[list[str]]:
    return [[_cell(k, getattr(a, k)) for k, _ in _TABLE_COLUMNS] for a in ranking.attributes]


def _summary(ranking: Ranking) -> str:
    return (
        f"{ranking.table}: target {ranking.target!r}, {ranking.rows:,} rows"
        f" ({ranking.rows_excluded:,} excluded: NULL target), {ranking.classes} classes,"
        f" H(Y) = {ranking.target_entropy:.4f} bits; sorted by {ranking.sort}"
    )


def _legend(ranking: Ranking) -> list[str]:
    seen = sorted({f for a in ranking.attributes for f in a.flags})
    return [f"  {f}: {FLAG_DESCRIPTIONS[f]}" for f in seen]


def as_table(ranking: Ranking) -> str:
    """An aligned terminal table: text left, numbers right."""
    header = [h for _, h in _TABLE_COLUMNS]
    rows = _rows(ranking)
    widths = [max(len(r[i]) for r in [header, *rows]) for i in range(len(header))]
    left = {0, 1, len(header) - 1}

    def line(cells: list[str]) -> str:
        parts = [
            c.ljust(w) if i in left else c.rjust(w)
            for i, (c, w) in enumerate(zip(cells, widths, strict=True))
        ]
        return "  ".join(parts).rstrip()

    out = [_summary(ranking), "", line(header), line(["-" * w for w in widths])]
    out += [line(r) for r in rows]
    legend = _legend(ranking)
    if legend:
        out += ["", "flags:", *legend]
    return "\n".join(out) + "\n"


def as_json(ranking: Ranking) -> str:
    """Exactly one JSON object: the contract of :meth:`Ranking.to_dict`."""
    return json.dumps(ranking.to_dict(), indent=2) + "\n"


def as_csv(ranking: Ranking) -> str:
    """One row per attribute; flags joined with ``;``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(ATTRIBUTE_KEYS)
    for a in ranking.attributes:
        record = a.to_dict()
        record["flags"] = ";".join(a.flags)
        writer.writerow([record[k] for k in ATTRIBUTE_KEYS])
    return buffer.getvalue()


def _markdown_escape(text: str) -> str:
    return text.replace("|", "\\|")


def as_markdown(ranking: Ranking) -> str:
    """A GitHub-flavoured Markdown table with a one-line summary."""
    header = [h for _, h in _TABLE_COLUMNS]
    # "H(Y|X)" holds a pipe: unescaped, it would split the header into one cell too many.
    lines = [_summary(ranking), "", "| " + " | ".join(map(_markdown_escape, header)) + " |"]
    text_columns = {0, 1, len(header) - 1}  # attribute, kind, flags: left; numbers: right
    lines.append("|" + "|".join("---" if i in text_columns else "---:"
                                for i in range(len(header))) + "|")
    for row in _rows(ranking):
        lines.append("| " + " | ".join(_markdown_escape(c) for c in row) + " |")
    return "\n".join(lines) + "\n"


FORMATTERS: dict[str, Callable[[Ranking], str]] = {
    "table": as_table,
    "json": as_json,
    "csv": as_csv,
    "markdown": as_markdown,
}


def render(ranking: Ranking, fmt: str) -> str:
    return FORMATTERS[fmt](ranking)
