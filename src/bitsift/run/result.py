"""Result objects: a :class:`Ranking` of :class:`AttributeScore` rows. Formatters only read them."""

from __future__ import annotations

import html
import math
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any, Generic, TypeVar

from bitsift.errors import install_extra
from bitsift.numformat import format_bits, format_p_value, shown_cuts

#: Keys of one attribute in the JSON contract, in order.
ATTRIBUTE_KEYS: tuple[str, ...] = (
    "attribute",
    "kind",
    "distinct",
    "information_gain",
    "gain_ratio",
    "symmetric_uncertainty",
    "conditional_entropy",
    "attribute_entropy",
    "g_statistic",
    "dof",
    "p_value",
    "information_gain_se",
    "information_gain_corrected",
    "information_gain_low",
    "information_gain_high",
    "rank_low",
    "rank_high",
    "flags",
    "binning",
    "bins",
    "cuts",
    "date_part",
)


@dataclass
class AttributeScore:
    """Every metric of one attribute against the target. Entropies in bits."""

    attribute: str
    kind: str
    distinct: int
    information_gain: float
    gain_ratio: float
    symmetric_uncertainty: float
    conditional_entropy: float
    attribute_entropy: float
    g_statistic: float
    dof: int
    #: None when the weights are not whole numbers (the G-test needs frequency weights).
    p_value: float | None
    flags: list[str] = field(default_factory=list)
    #: Rows that entered this attribute's counts (differs from the table's with --missing drop).
    rows: int = 0
    #: H(Y) over those rows (equals the target entropy unless --missing drop).
    target_entropy: float = 0.0
    #: Cut points of a numeric attribute's bins, ascending (value < cut[0] is bin 0...).
    cuts: list[float] | None = None
    #: How a numeric attribute was binned: quantile, equal-width, best-split or mdl.
    binning: str | None = None
    #: The standard error of the gain (bits); None with fractional weights or no rows.
    information_gain_se: float | None = None
    #: The gain less its first-order bias (r-1)(c-1)/(2 n ln 2); negative: below the noise.
    information_gain_corrected: float = 0.0
    #: The interval corrected ± z·se at the run's confidence, both ends clipped at 0.
    information_gain_low: float | None = None
    information_gain_high: float | None = None
    #: The best and worst plausible rank among the ranking's attributes (by the intervals).
    rank_low: int | None = None
    rank_high: int | None = None
    #: A date or timestamp ranked as categories of this part (year, month, dow, hour).
    date_part: str | None = None
    #: "date" or "timestamp" for a dated attribute binned as time: its cut points are epoch
    #: seconds here and ISO 8601 strings in every output (:meth:`shown_cuts`).
    temporal: str | None = None

    @property
    def bins(self) -> int | None:
        """The number of bins the cut points make (numeric attributes; some may be empty)."""
        return len(self.cuts) + 1 if self.cuts is not None else None

    def shown_cuts(self) -> list[float] | list[str] | None:
        """The cut points as outputs show them: numbers, or ISO 8601 for dated attributes."""
        return None if self.cuts is None else shown_cuts(self.cuts, self.temporal)

    def to_dict(self) -> dict[str, Any]:
        out = {key: getattr(self, key) for key in ATTRIBUTE_KEYS}
        out["cuts"] = self.shown_cuts()
        return out


_Member = TypeVar("_Member")


class _Members(Generic[_Member]):
    """What a result does with what it holds (a ranking its attributes, a segmented ranking
    its segments): iterate over them in order, count them, find one."""

    def _members(self) -> list[_Member]:
        raise NotImplementedError

    def __iter__(self) -> Iterator[_Member]:
        return iter(self._members())

    def __len__(self) -> int:
        return len(self._members())

    def _find(self, matches: Callable[[_Member], bool], key: object) -> _Member:
        """The first member that ``matches``; KeyError(``key``) when there is none."""
        for member in self._members():
            if matches(member):
                return member
        raise KeyError(key)


def _pandas() -> Any:
    """The pandas module, or an ImportError saying how to install it."""
    try:
        import pandas as pd
    except ImportError as error:  # pragma: no cover - depends on the environment
        raise ImportError(f"to_pandas() needs pandas: {install_extra('pandas')}") from error
    return pd


@dataclass
class Ranking(_Members[AttributeScore]):
    """The ranking of a table's attributes by what they tell about the target.

    Iterating gives the attributes, best first; ``len()`` counts them; ``ranking[name]`` is
    the attribute of that name (KeyError when there is none)."""

    target: str
    table: str
    rows: int
    rows_excluded: int
    target_entropy: float
    classes: int
    attributes: list[AttributeScore]
    dialect: str = "duckdb"
    sort: str = "information_gain"
    statements: list[str] = field(default_factory=list)
    #: What the engine wants the user to know (e.g. "--timeout is not applied"), for stderr.
    notes: list[str] = field(default_factory=list)
    #: The segment this ranking covers (``--by``): column -> value (None for NULL). None when
    #: the ranking covers the whole table.
    segment: dict[str, Any] | None = None
    #: ``ok``, or why a segment has nothing to rank (see :data:`SEGMENT_STATUS`).
    status: str = "ok"
    #: The weight column (``--weight``); None when rows are counted.
    weight: str | None = None
    #: Weighted: the sum of the weights of the rows used, N in every formula.
    weight_total: float | None = None
    #: Weighted: rows with a target whose weight is NULL or 0, left out.
    rows_without_weight: int = 0
    #: The level of every attribute's interval (``--confidence``).
    confidence: float = 0.95
    #: ``--target-bins``: method, bins, cuts and labels of the target's classes; else None.
    target_binning: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """The JSON contract: target, table, rows, rows_excluded, target_entropy, classes,
        confidence, attributes (each with the keys of :data:`ATTRIBUTE_KEYS`). A binned target
        (``--target-bins``) adds ``target_binning`` after classes.

        Weighted rankings add ``weight`` (after table), ``rows_without_weight`` and
        ``weight_total`` (after rows_excluded); unweighted ones have exactly the keys above."""
        out: dict[str, Any] = {"target": self.target, "table": self.table}
        if self.weight is not None:
            out["weight"] = self.weight
        out["rows"] = self.rows
        out["rows_excluded"] = self.rows_excluded
        if self.weight is not None:
            out["rows_without_weight"] = self.rows_without_weight
            out["weight_total"] = self.weight_total
        out["target_entropy"] = self.target_entropy
        out["classes"] = self.classes
        if self.target_binning is not None:
            out["target_binning"] = self.target_binning
        out["confidence"] = self.confidence
        out["attributes"] = [a.to_dict() for a in self.attributes]
        return out

    def to_pandas(self) -> Any:
        """One DataFrame row per attribute (needs the ``pandas`` extra)."""
        return _pandas().DataFrame([a.to_dict() for a in self.attributes],
                                   columns=list(ATTRIBUTE_KEYS))

    def _members(self) -> list[AttributeScore]:
        return self.attributes

    def __getitem__(self, name: str) -> AttributeScore:
        return self._find(lambda a: a.attribute == name, name)

    def _repr_html_(self) -> str:
        """The ranking as an HTML table, for notebooks (every name escaped)."""
        return _html_summary(self) + _html_table(self.attributes)


#: Columns of the notebook table: (heading, cell of one attribute).
_HTML_COLUMNS: tuple[tuple[str, Any], ...] = (
    ("#", None),
    ("attribute", lambda a: a.attribute),
    ("kind", lambda a: a.kind),
    ("distinct", lambda a: f"{a.distinct:,}"),
    ("IG (bits)", lambda a: format_bits(a.information_gain)),
    ("gain ratio", lambda a: format_bits(a.gain_ratio)),
    ("SU", lambda a: format_bits(a.symmetric_uncertainty)),
    ("p-value", lambda a: "" if a.p_value is None else format_p_value(a.p_value)),
    ("flags", lambda a: ", ".join(a.flags)),
)


def _html_summary(ranking: Ranking) -> str:
    where = f", segment {segment_label(ranking.segment)}" if ranking.segment is not None else ""
    text = (f"{ranking.table}{where}: target {ranking.target!r}, {ranking.rows:,} rows, "
            f"{ranking.classes} classes, H(Y) = {format_bits(ranking.target_entropy)} bits")
    if ranking.status != "ok":
        text += f"; {SEGMENT_STATUS[ranking.status]}"
    return f"<p>{html.escape(text)}</p>"


def _html_table(scores: Sequence[AttributeScore]) -> str:
    head = "".join(f"<th>{html.escape(h)}</th>" for h, _ in _HTML_COLUMNS)
    rows = []
    for position, score in enumerate(scores, start=1):
        cells = [str(position)] + [cell(score) for _, cell in _HTML_COLUMNS[1:]]
        rows.append("<tr>" + "".join(f"<td>{html.escape(c)}</td>" for c in cells) + "</tr>")
    return (f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>")


def segment_columns(by: Sequence[str]) -> list[str]:
    """The names of the segment columns in CSV output and ``to_pandas()``: each column's own
    name, prefixed ``segment_`` (again, if need be) where it would clash with an attribute key
    (:data:`ATTRIBUTE_KEYS`) or an earlier segment column.

    >>> segment_columns(["region", "kind", "segment_kind"])
    ['region', 'segment_kind', 'segment_segment_kind']
    """
    taken = set(ATTRIBUTE_KEYS)
    names = []
    for column in by:
        name = column
        while name in taken:
            name = f"segment_{name}"
        taken.add(name)
        names.append(name)
    return names


#: Why a segment's ranking may be empty or trivial; ``ok`` otherwise.
SEGMENT_STATUS: dict[str, str] = {
    "ok": "ranked",
    "single_class": "one target class only: every gain is 0, nothing to rank",
    "no_rows": "no row with a target (and a weight): nothing to rank",
}


def segment_label(segment: dict[str, Any] | None) -> str:
    """A segment's values as text: ``region = 'north', tier = NULL``.

    >>> segment_label({"region": "north", "tier": None, "year": 2024})
    "region = 'north', tier = NULL, year = 2024"
    """
    if not segment:
        return "whole table"
    return ", ".join(f"{k} = {'NULL' if v is None else repr(v)}" for k, v in segment.items())


def _is_nan(value: Any) -> bool:
    return isinstance(value, float) and math.isnan(value)


def _same_segment(segment: dict[str, Any], values: dict[str, Any]) -> bool:
    """Equal segment values, NaN matching NaN (a float column's NaN segment)."""
    return segment.keys() == values.keys() and all(
        segment[k] == values[k] or (_is_nan(segment[k]) and _is_nan(values[k])) for k in values)


@dataclass
class SegmentedRanking(_Members[Ranking]):
    """One :class:`Ranking` per segment (``--by``), all computed by one statement.

    Segments are ordered by their values, NULL last; iterating gives them in that order,
    ``len()`` counts them. Each ranking carries its :attr:`Ranking.segment` and
    :attr:`Ranking.status`.
    """

    target: str
    table: str
    by: list[str]
    segments: list[Ranking]
    weight: str | None = None
    dialect: str = "duckdb"
    sort: str = "information_gain"
    statements: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    #: The level of every attribute's interval (``--confidence``), in every segment.
    confidence: float = 0.95

    def to_dict(self) -> dict[str, Any]:
        """``{"target", "table", "by", ["weight",] "confidence", "segments": [...]}``; each
        segment holds ``segment`` (column -> value), ``status``, then the keys of
        :meth:`Ranking.to_dict` other than target, table, weight and confidence."""
        out: dict[str, Any] = {"target": self.target, "table": self.table, "by": list(self.by)}
        if self.weight is not None:
            out["weight"] = self.weight
        out["confidence"] = self.confidence
        entries = []
        for ranking in self.segments:
            entry: dict[str, Any] = {"segment": dict(ranking.segment or {}),
                                     "status": ranking.status}
            entry.update({k: v for k, v in ranking.to_dict().items()
                          if k not in ("target", "table", "weight", "confidence")})
            entries.append(entry)
        out["segments"] = entries
        return out

    def to_pandas(self) -> Any:
        """One DataFrame row per segment and attribute: the segment columns, named as in CSV
        output (:func:`segment_columns`), then :data:`ATTRIBUTE_KEYS` (needs the ``pandas``
        extra)."""
        heads = segment_columns(self.by)
        rows = [[*((r.segment or {}).get(b) for b in self.by),
                 *(a.to_dict()[k] for k in ATTRIBUTE_KEYS)]
                for r in self.segments for a in r.attributes]
        return _pandas().DataFrame(rows, columns=[*heads, *ATTRIBUTE_KEYS])

    def segment(self, **values: Any) -> Ranking:
        """The ranking of the segment with these values (``None`` for NULL).

        Raises KeyError when no segment has them.
        """
        return self._find(lambda r: _same_segment(r.segment or {}, values), values)

    def _members(self) -> list[Ranking]:
        return self.segments

    def _repr_html_(self) -> str:
        """One HTML table per segment, for notebooks."""
        parts = [f"<p>{html.escape(f'{self.table}: target {self.target!r}, by ')}"
                 f"{html.escape(', '.join(self.by))}: {len(self.segments)} segments</p>"]
        for ranking in self.segments:
            parts.append(_html_summary(ranking) + _html_table(ranking.attributes))
        return "".join(parts)
