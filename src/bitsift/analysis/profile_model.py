"""What a drill-down holds: per attribute, its values (or quantile bins) with their rows, class
distribution and entropy; the profiles of one ranking, and a profiled run."""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

from bitsift.numformat import cut_texts
from bitsift.run.result import AttributeScore, Ranking

MISSING_LABEL = "(missing)"

ValueKind = Literal["value", "missing", "bin", "other"]

#: A progress callback: receives one short status message per step.
Progress = Callable[[str], None]


@dataclass(frozen=True)
class ValueProfile:
    """One value (or bin, or the merged rest) of an attribute. Entropies in bits."""

    label: str
    kind: ValueKind
    rows: int
    #: Share of the attribute's rows.
    share: float
    #: Rows per class, in the order of :attr:`AttributeProfile.classes`.
    counts: tuple[int, ...]
    #: H(Y | X = x); for the merged rest, the row-weighted mean over the merged values.
    entropy: float
    #: share * entropy: this row's part of H(Y|X). The contributions add up to H(Y|X).
    contribution: float
    #: How many distinct values this row stands for (more than 1 only for the merged rest).
    merged_values: int = 1
    #: Bin bounds of a numeric attribute: low <= value < high (None: unbounded).
    low: float | None = None
    high: float | None = None

    def to_dict(self, classes: Sequence[str]) -> dict[str, Any]:
        return {
            "label": self.label,
            "kind": self.kind,
            "rows": self.rows,
            "share": self.share,
            "counts": dict(zip(classes, self.counts, strict=True)),
            "entropy": self.entropy,
            "contribution": self.contribution,
            "merged_values": self.merged_values,
            "low": self.low,
            "high": self.high,
        }


@dataclass(frozen=True)
class AttributeProfile:
    """The drill-down of one attribute: its values in display order, the merged rest last."""

    attribute: str
    kind: str
    classes: tuple[str, ...]
    values: tuple[ValueProfile, ...]
    cuts: tuple[float, ...] | None = None
    #: "date" or "timestamp" when the cuts are epoch seconds of a dated attribute.
    temporal: str | None = None

    @property
    def rows(self) -> int:
        return sum(v.rows for v in self.values)

    @property
    def distinct(self) -> int:
        """Distinct values (or non-empty bins, plus missing) counted in the database."""
        return sum(v.merged_values for v in self.values)

    @property
    def class_counts(self) -> tuple[int, ...]:
        if not self.values:  # --missing drop on an attribute that is NULL on every row
            return (0,) * len(self.classes)
        return tuple(sum(column) for column in zip(*(v.counts for v in self.values), strict=True))

    @property
    def target_entropy(self) -> float:
        """H(Y) over this attribute's rows (all rows, unless --missing drop)."""
        return entropy_bits(self.class_counts)

    @property
    def conditional_entropy(self) -> float:
        """H(Y|X): the sum of the values' contributions."""
        return math.fsum(v.contribution for v in self.values)

    @property
    def information_gain(self) -> float:
        return max(self.target_entropy - self.conditional_entropy, 0.0)

    def to_dict(self) -> dict[str, Any]:
        return {
            "attribute": self.attribute,
            "kind": self.kind,
            "rows": self.rows,
            "distinct": self.distinct,
            "target_entropy": self.target_entropy,
            "conditional_entropy": self.conditional_entropy,
            "information_gain": self.information_gain,
            "cuts": (None if self.cuts is None else cut_texts(self.cuts, self.temporal)
                     if self.temporal else list(self.cuts)),
            "values": [v.to_dict(self.classes) for v in self.values],
        }


@dataclass(frozen=True)
class Profiles:
    """The drill-downs of several attributes, and the target's class totals."""

    #: Class labels, most rows first (the order of every ``counts`` tuple).
    classes: tuple[str, ...]
    class_rows: tuple[int, ...]
    attributes: dict[str, AttributeProfile]


@dataclass
class ProfiledRun:
    """A ranking, the drill-downs of (some of) its attributes, and how it was asked for.

    A report renders a list of these: one per segment once segmented runs exist.
    """

    ranking: Ranking
    profiles: Profiles
    #: The request: source, target, dialect, missing, bins, where, sort, limit, top...
    parameters: dict[str, Any]
    #: Columns the user marked as describing people (``--sensitive``), catalog spelling.
    sensitive: tuple[str, ...] = ()
    #: Notes from the engine (e.g. "no statement timeout"), for stderr.
    notes: list[str] = field(default_factory=list)
    #: The segment's label, or None for a run over the whole table.
    segment: str | None = None
    #: Greedy mRMR over the top attributes, with their pairwise redundancy
    #: (:class:`bitsift.analysis.selection.Selection`), when the report asks for it (``--select``).
    selection: Any = None

    def profiled(self) -> list[tuple[AttributeScore, AttributeProfile]]:
        """The ranked attributes that have a drill-down, in ranking order."""
        found = self.profiles.attributes
        return [(s, found[s.attribute]) for s in self.ranking.attributes if s.attribute in found]


def entropy_bits(counts: Iterable[int]) -> float:
    """Shannon entropy in bits of a list of counts (the p log p form; zero counts add nothing).

    >>> entropy_bits([5, 5])
    1.0
    >>> entropy_bits([7, 0])
    0.0
    """
    values = [c for c in counts if c > 0]
    total = sum(values)
    if total == 0:
        return 0.0
    bits = -math.fsum((c / total) * math.log2(c / total) for c in values)
    return bits if bits > 0 else 0.0  # never -0.0 nor a rounding-sized negative
