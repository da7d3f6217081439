"""The ranking request: options as the user gives them, and the spec resolved against a table."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Literal

from sqlglot import exp

from bitsift.errors import ColumnError, SpecError, unknown_names_message
from bitsift.predicate import Predicate, parse_predicate
from bitsift.schema import NUMERIC_FAMILIES, Column, Kind

Missing = Literal["category", "drop"]
SORT_METRICS: tuple[str, ...] = ("information_gain", "gain_ratio", "symmetric_uncertainty")
MISSING_MODES: tuple[str, ...] = ("category", "drop")


@dataclass(frozen=True)
class Thresholds:
    """Where the trust flags switch on. Documented in the README's "Flags" section."""

    #: ``id_like`` when distinct values >= this share of the rows (and more than ``id_min_values``).
    id_like_ratio: float = 0.9
    id_min_values: int = 10
    #: ``near_perfect`` when IG >= this share of H(Y): a possible target leak.
    near_perfect_ratio: float = 0.95
    #: ``high_cardinality`` when distinct values exceed this cap.
    high_cardinality: int = 1000


@dataclass(frozen=True)
class RankOptions:
    """What the user asked for, before it is checked against the table's columns."""

    target: str
    attributes: tuple[str, ...] | None = None
    exclude: tuple[str, ...] = ()
    categorical: tuple[str, ...] = ()
    numeric: tuple[str, ...] = ()
    missing: Missing = "category"
    bins: int = 10
    where: str | None = None
    sort: str = "information_gain"
    limit: int | None = None
    timeout: float | None = None
    thresholds: Thresholds = field(default_factory=Thresholds)

    def __post_init__(self) -> None:
        problems = []
        if self.missing not in MISSING_MODES:
            modes = ", ".join(MISSING_MODES)
            problems.append(f"--missing must be one of {modes}, not {self.missing!r}")
        if self.sort not in SORT_METRICS:
            problems.append(f"--sort must be one of {', '.join(SORT_METRICS)}, not {self.sort!r}")
        if not 2 <= self.bins <= 1000:
            problems.append(f"--bins must be between 2 and 1000, not {self.bins}")
        if self.limit is not None and self.limit < 1:
            problems.append(f"--limit must be at least 1, not {self.limit}")
        if self.timeout is not None and self.timeout <= 0:
            problems.append(f"--timeout must be positive, not {self.timeout}")
        both = sorted(set(self.categorical) & set(self.numeric))
        if both:
            problems.append("columns named both --categorical and --numeric: " + ", ".join(both))
        if problems:
            raise SpecError("; ".join(problems))


@dataclass(frozen=True)
class AttributeSpec:
    """One attribute to rank: its catalog name, its kind, and its position in the SQL (1-based)."""

    name: str
    kind: Kind
    family: str


@dataclass(frozen=True)
class RankSpec:
    """A request checked against the table: every name exists, every kind is decided."""

    source: exp.Expression
    source_name: str
    target: str
    attributes: tuple[AttributeSpec, ...]
    options: RankOptions
    where: Predicate | None = None
    #: Type family of the target column (decides byte-exact grouping, see dialects.py).
    target_family: str = "other"

    @property
    def numeric(self) -> tuple[AttributeSpec, ...]:
        return tuple(a for a in self.attributes if a.kind == "numeric")


def _match(names: Sequence[str], columns: dict[str, Column]) -> tuple[list[str], list[str]]:
    """Resolve user spellings to catalog spellings (exact, else a unique case-insensitive match)."""
    lowered: dict[str, list[str]] = {}
    for c in columns:
        lowered.setdefault(c.lower(), []).append(c)
    found, unknown = [], []
    for n in names:
        if n in columns:
            found.append(n)
        elif len(lowered.get(n.lower(), [])) == 1:
            found.append(lowered[n.lower()][0])
        else:
            unknown.append(n)
    return found, unknown


def resolve(
    options: RankOptions,
    columns: Sequence[Column],
    source: exp.Expression,
    source_name: str,
    dialect: str,
) -> RankSpec:
    """Check ``options`` against the table's ``columns`` and decide each attribute's kind.

    Every unknown name is reported at once, each with a close match when there is one.
    """
    by_name = {c.name: c for c in columns}
    unknown: list[str] = []
    target_found, target_unknown = _match([options.target], by_name)
    unknown += target_unknown
    picked, bad = _match(options.attributes or (), by_name)
    unknown += bad
    excluded, bad = _match(options.exclude, by_name)
    unknown += bad
    forced_cat, bad = _match(options.categorical, by_name)
    unknown += bad
    forced_num, bad = _match(options.numeric, by_name)
    unknown += bad
    if unknown:
        raise ColumnError(
            unknown_names_message("column", unknown, by_name) + f" in {source_name}"
        )
    target = target_found[0]
    if options.attributes:
        names = [n for n in dict.fromkeys(picked) if n != target and n not in excluded]
    else:
        names = [c.name for c in columns if c.name != target and c.name not in excluded]
    if not names:
        raise SpecError(f"no attributes left to rank in {source_name} (only the target remains)")
    not_numeric = [n for n in forced_num if by_name[n].family not in NUMERIC_FAMILIES]
    if not_numeric:
        raise ColumnError(
            "--numeric needs number columns; not numbers: "
            + ", ".join(f"{n!r} ({by_name[n].type_name or by_name[n].family})" for n in not_numeric)
        )
    attributes = []
    for n in names:
        col = by_name[n]
        kind: Kind
        if n in forced_num:
            kind = "numeric"
        elif n in forced_cat:
            kind = "categorical"
        else:
            kind = col.default_kind
        attributes.append(AttributeSpec(name=n, kind=kind, family=col.family))
    where = parse_predicate(options.where, by_name, dialect) if options.where else None
    return RankSpec(
        source=source,
        source_name=source_name,
        target=target,
        attributes=tuple(attributes),
        options=options,
        where=where,
        target_family=by_name[target].family,
    )
