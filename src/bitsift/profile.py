"""Drill-down: why an attribute matters, value by value.

The database computes value x class counts (templates/profile.sql.j2); only those counts leave
it. From them this module reads, per value (or quantile bin) of an attribute, its share of the
rows, its class distribution, its own entropy H(Y | X = x) and its contribution
p(x) * H(Y | X = x) to the conditional entropy H(Y|X). Numeric attributes are binned with the
cut points of the ranking, so the drill-down shows the bins the ranking measured.
"""

from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from decimal import Decimal
from typing import Any, Literal

from bitsift.api import make_options, run_ranking, run_segmented
from bitsift.engines.base import Engine
from bitsift.errors import ColumnError, Option, Problem, SpecError, unknown_names_message
from bitsift.metrics import snap_total
from bitsift.names import resolve_name
from bitsift.numformat import cut_labels
from bitsift.result import SEGMENT_STATUS, AttributeScore, Ranking, segment_label
from bitsift.schema import Column, hashable_value
from bitsift.session import session_for
from bitsift.spec import RankSpec
from bitsift.sqlstatements import DEFAULT_MAX_VALUES, profile_statement, segment_predicate

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
            "cuts": list(self.cuts) if self.cuts is not None else None,
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
    #: (:class:`bitsift.selection.Selection`), when the report asks for it (``--select``).
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


def _number(value: Any) -> int:
    return int(value or 0)


def class_label(value: Any) -> str:
    """How a class or a value is shown: text as is, booleans lower case, dates in ISO form."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, _dt.date | _dt.datetime | _dt.time):
        return value.isoformat()
    if isinstance(value, Decimal):
        return format(value.normalize(), "f") if value == value.to_integral() else str(value)
    if isinstance(value, bytes | bytearray | memoryview):
        # Text grouped byte-exactly (MySQL/MariaDB BINARY) comes back as bytes.
        return bytes(value).decode("utf-8", errors="backslashreplace")
    return str(value)


def bin_label(index: int, cuts: Sequence[float]) -> tuple[str, float | None, float | None]:
    """Label and bounds of bin ``index``: bin j holds cuts[j-1] <= value < cuts[j].

    >>> bin_label(0, [1.5, 3.0])
    ('< 1.5', None, 1.5)
    >>> bin_label(1, [1.5, 3.0])
    ('[1.5, 3)', 1.5, 3.0)
    >>> bin_label(2, [1.5, 3.0])
    ('>= 3', 3.0, None)
    """
    if not cuts:
        return "all values", None, None
    labels = cut_labels([float(c) for c in cuts])
    if index <= 0:
        return f"< {labels[0]}", None, float(cuts[0])
    if index >= len(cuts):
        return f">= {labels[-1]}", float(cuts[-1]), None
    return f"[{labels[index - 1]}, {labels[index]})", float(cuts[index - 1]), float(cuts[index])


def _value_sort_key(kind: str, raw: Any, rows: int, rank: int) -> tuple[Any, ...]:
    # Bins in their numeric order, categorical values by rows (the database's rank breaks
    # ties); missing values after the others, the merged rest last.
    order = {"bin": 0, "value": 0, "missing": 1, "other": 2}[kind]
    if kind == "bin":
        return (order, int(raw), 0)
    return (order, -rows, rank)


def read_profiles(
    records: Sequence[Mapping[str, Any]],
    spec: RankSpec,
    cuts: Mapping[str, Sequence[float]],
) -> Profiles:
    """Turn the rows of :func:`profile_statement` into :class:`Profiles`."""
    class_totals: dict[Any, int] = {}
    # attribute index -> value rank (-1: the merged rest) -> (raw value, rows per class)
    cells: dict[int, dict[int, tuple[Any, dict[Any, int]]]] = {}
    rest: dict[int, tuple[int, float]] = {}
    for record in records:
        attr = _number(record["attribute_index"])
        # A list or struct class (DuckDB) is counted by its contents, shown as it came.
        y, n = hashable_value(record["y"]), _number(record["n"])
        if attr == 0:
            class_totals[y] = class_totals.get(y, 0) + n
            continue
        rank = _number(record["value_rank"])
        is_rest = _number(record["rest_values"]) > 0
        if is_rest:
            rank = -1
        raw, per_class = cells.setdefault(attr, {}).setdefault(
            rank, (None if is_rest else record[f"a{attr}"], {})
        )
        per_class[y] = per_class.get(y, 0) + n
        if is_rest:
            # Summed by the engine in any order: snapped so the same counts give the same floats.
            rest[attr] = (_number(record["rest_values"]), snap_total(record["rest_nats"] or 0.0))
    ordered = sorted(class_totals, key=lambda c: (-class_totals[c], class_label(c)))
    classes = tuple(class_label(c) for c in ordered)
    profiles: dict[str, AttributeProfile] = {}
    for index, attribute in enumerate(spec.attributes, start=1):
        found = cells.get(index, {})
        total = sum(sum(per_class.values()) for _, per_class in found.values())
        attribute_cuts = list(cuts.get(attribute.name, ())) if attribute.kind == "numeric" else None
        rows: list[tuple[tuple[Any, ...], ValueProfile]] = []
        for rank, (raw, per_class) in found.items():
            counts = tuple(per_class.get(c, 0) for c in ordered)
            n_x = sum(counts)
            share = n_x / total if total else 0.0
            low = high = None
            merged = 1
            kind: ValueKind
            if rank == -1:
                merged, nats = rest[index]
                kind, label = "other", f"(other {merged:,} values)"
                contribution = nats / total / math.log(2) if total else 0.0
                entropy = contribution / share if share else 0.0
            else:
                if raw is None:
                    kind, label = "missing", MISSING_LABEL
                elif attribute_cuts is not None:
                    kind = "bin"
                    label, low, high = bin_label(int(raw), attribute_cuts)
                else:
                    kind, label = "value", class_label(raw)
                entropy = entropy_bits(counts)
                contribution = share * entropy
            value = ValueProfile(label=label, kind=kind, rows=n_x, share=share, counts=counts,
                                 entropy=entropy, contribution=contribution,
                                 merged_values=merged, low=low, high=high)
            rows.append((_value_sort_key(kind, raw, n_x, rank), value))
        rows.sort(key=lambda pair: pair[0])
        profiles[attribute.name] = AttributeProfile(
            attribute=attribute.name,
            kind=attribute.kind,
            classes=classes,
            values=tuple(v for _, v in rows),
            cuts=tuple(attribute_cuts) if attribute_cuts is not None else None,
        )
    return Profiles(classes=classes, class_rows=tuple(class_totals[c] for c in ordered),
                    attributes=profiles)


def fetch_profiles(
    engine: Engine,
    spec: RankSpec,
    cuts: Mapping[str, Sequence[float]],
    *,
    max_values: int = DEFAULT_MAX_VALUES,
) -> Profiles:
    """Run :func:`profile_statement` on an open engine and read its rows."""
    statement = profile_statement(spec, engine.caps, cuts, max_values=max_values)
    return read_profiles(engine.fetch(statement.sql).records(), spec, cuts)


def resolve_sensitive(names: Iterable[str], columns: Sequence[Column]) -> tuple[str, ...]:
    """Catalog spellings of the ``--sensitive`` columns; every unknown name is reported."""
    catalog = [c.name for c in columns]
    found: list[str] = []
    unknown: list[str] = []
    for name in names:
        spelled = resolve_name(name, catalog)
        if spelled is None:
            unknown.append(name)
        else:
            found.append(spelled)
    if unknown:
        raise ColumnError(problems=[Problem("sensitive", (
            unknown_names_message("column", unknown, catalog) + " (", Option("sensitive"), ")"))])
    return tuple(dict.fromkeys(found))


def _names(value: str | Iterable[str] | None) -> tuple[str, ...]:
    if value is None:
        return ()
    if isinstance(value, str):
        return tuple(v.strip() for v in value.split(",") if v.strip())
    return tuple(value)


def rank_and_profile(
    source: Any,
    target: str,
    table: str | None = None,
    *,
    top: int | None = None,
    max_values: int = DEFAULT_MAX_VALUES,
    sensitive: str | Iterable[str] | None = None,
    progress: Progress | None = None,
    **options: Any,
) -> ProfiledRun:
    """Rank like :func:`bitsift.rank`, then drill into the ``top`` attributes (None: all).

    Both run on one connection: the ranking's statements, then one more statement for the
    value x class counts of the profiled attributes. ``progress`` gets a message per step.
    ``source``: as :func:`bitsift.rank` takes it, or an open :class:`~bitsift.session.Session`
    (left open, e.g. for :func:`bitsift.selection.select_for_runs` to go on with).

    >>> import duckdb
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE t AS SELECT i % 3 AS a, i % 2 = 0 AS y FROM range(60) r(i)")
    >>> run = rank_and_profile(con, target="y", table="t")
    >>> [(v.label, v.rows, v.counts) for v in run.profiles.attributes["a"].values]
    [('0', 20, (10, 10)), ('1', 20, (10, 10)), ('2', 20, (10, 10))]
    """
    if top is not None and top < 1:
        raise SpecError.option("top", f" must be at least 1, not {top}")
    _no_weight(options)
    say = progress or (lambda _message: None)
    spec_options = make_options(target, **options)
    with session_for(source, table) as session:
        engine, mark = session.engine, session.mark()
        say(f"reading the columns of {session.display}")
        marked = resolve_sensitive(_names(sensitive), session.columns)
        spec = session.prepare(spec_options)
        say(f"ranking {len(spec.attributes)} attribute(s) against {spec.target!r}")
        ranking = run_ranking(engine, spec)
        chosen = [s.attribute for s in ranking.attributes][: top or None]
        by_name = {a.name: a for a in spec.attributes}
        cuts = {s.attribute: list(s.cuts) for s in ranking.attributes if s.cuts is not None}
        profiles = Profiles(classes=(), class_rows=(), attributes={})
        if chosen:
            say(f"counting values x classes of {len(chosen)} attribute(s)")
            subset = replace(spec, attributes=tuple(by_name[n] for n in chosen))
            profiles = fetch_profiles(engine, subset, cuts, max_values=max_values)
        ranking.statements = session.statements_since(mark)
        notes = session.notes
    parameters = {
        "source": spec.source_name,
        "target": spec.target,
        "dialect": ranking.dialect,
        "attributes": len(spec.attributes),
        "missing": spec.options.missing,
        "bins": spec.options.bins,
        "binning": spec.options.binning,
        "binning_for": spec.options.binning_for,
        "where": spec.where.text if spec.where else None,
        "sort": spec.options.sort,
        "limit": spec.options.limit,
        "top": top,
        "max_values": max_values,
    }
    return ProfiledRun(ranking=ranking, profiles=profiles, parameters=parameters,
                       sensitive=marked, notes=notes)


def profile(
    source: Any,
    target: str,
    attributes: str | Iterable[str],
    table: str | None = None,
    *,
    max_values: int = DEFAULT_MAX_VALUES,
    sensitive: str | Iterable[str] | None = None,
    progress: Progress | None = None,
    **options: Any,
) -> ProfiledRun:
    """The drill-down of the named ``attributes``: ranked, then counted value by value.

    >>> import duckdb
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE t AS SELECT i % 2 AS a, i % 4 = 0 AS y FROM range(8) r(i)")
    >>> p = profile(con, target="y", attributes="a", table="t").profiles.attributes["a"]
    >>> [(v.label, v.counts, v.entropy, v.contribution) for v in p.values]
    [('0', (2, 2), 1.0, 0.5), ('1', (4, 0), 0.0, 0.0)]
    """
    names = _names(attributes)
    if not names:
        raise SpecError("name the attribute(s) to profile")
    if options.get("attributes"):
        raise SpecError("profile takes the attributes to drill into, not a separate list to rank")
    return rank_and_profile(source, target, table, max_values=max_values, sensitive=sensitive,
                            progress=progress, attributes=names, **options)


# --- segments (--by): one profiled run per segment ----------------------------------------------


def _no_weight(options: Mapping[str, Any]) -> None:
    if options.get("weight"):
        raise SpecError(problems=[Problem("weight", (
            "the drill-down counts rows: ", Option("weight"), " is not supported by report "
            "and profile (use `bitsift rank --weight`)"))])


def rank_and_profile_segments(
    source: Any,
    target: str,
    table: str | None = None,
    *,
    by: str | Iterable[str],
    top: int | None = None,
    max_values: int = DEFAULT_MAX_VALUES,
    sensitive: str | Iterable[str] | None = None,
    progress: Progress | None = None,
    **options: Any,
) -> list[ProfiledRun]:
    """Rank within each segment of ``by`` (one statement), then drill into each segment's
    ``top`` attributes: one :class:`ProfiledRun` per segment, for a report with one section
    per segment. Segments with nothing to rank keep an empty drill-down.

    >>> import duckdb
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE t AS SELECT i % 3 AS a, i % 2 AS s, i % 4 < 2 AS y "
    ...                 "FROM range(40) r(i)")
    >>> [(r.segment, r.ranking.rows) for r in rank_and_profile_segments(con, "y", "t", by="s")]
    [('s = 0', 20), ('s = 1', 20)]
    """
    if top is not None and top < 1:
        raise SpecError.option("top", f" must be at least 1, not {top}")
    _no_weight(options)
    say = progress or (lambda _message: None)
    spec_options = make_options(target, by=by, **options)
    if not spec_options.by:
        raise SpecError("name the segment column(s) with by")
    runs = []
    with session_for(source, table) as session:
        engine, mark = session.engine, session.mark()
        say(f"reading the columns of {session.display}")
        marked = resolve_sensitive(_names(sensitive), session.columns)
        spec = session.prepare(spec_options)
        say(f"ranking {len(spec.attributes)} attribute(s) in each segment of "
            f"{', '.join(s.name for s in spec.by)}")
        segmented = run_segmented(engine, spec)
        by_name = {a.name: a for a in spec.attributes}
        for ranking in segmented.segments:
            chosen = [s.attribute for s in ranking.attributes][: top or None]
            profiles = Profiles(classes=(), class_rows=(), attributes={})
            if chosen and ranking.status == "ok":
                label = segment_label(ranking.segment)
                say(f"counting values x classes of {len(chosen)} attribute(s) in {label}")
                cuts = {s.attribute: list(s.cuts) for s in ranking.attributes
                        if s.cuts is not None}
                subset = replace(spec, by=(), attributes=tuple(by_name[n] for n in chosen),
                                 where=segment_predicate(spec, ranking.segment or {}))
                profiles = fetch_profiles(engine, subset, cuts, max_values=max_values)
            runs.append((ranking, profiles))
        statements = session.statements_since(mark)
        notes = session.notes
    out = []
    for ranking, profiles in runs:
        ranking.statements = statements
        label = segment_label(ranking.segment)
        if ranking.status != "ok":
            label += f" ({SEGMENT_STATUS[ranking.status]})"
        parameters = {
            "source": spec.source_name, "target": spec.target, "dialect": ranking.dialect,
            "attributes": len(spec.attributes), "missing": spec.options.missing,
            "bins": spec.options.bins, "binning": spec.options.binning,
            "binning_for": spec.options.binning_for,
            "where": spec.where.text if spec.where else None,
            "sort": spec.options.sort, "limit": spec.options.limit, "top": top,
            "max_values": max_values, "segment": segment_label(ranking.segment),
        }
        out.append(ProfiledRun(ranking=ranking, profiles=profiles, parameters=parameters,
                               sensitive=marked, notes=notes, segment=label))
    return out
