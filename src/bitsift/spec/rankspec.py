"""The ranking request: options as the user gives them, and the spec resolved against a table."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Literal

from sqlglot import exp

from bitsift.errors import ColumnError, Option, Problem, SpecError
from bitsift.spec.named_columns import (
    NamedColumns,
    check_binnable,
    check_segments_and_weight,
    named_columns,
)
from bitsift.spec.predicate import Predicate, parse_predicate
from bitsift.spec.schema import (
    NUMERIC_FAMILIES,
    TEMPORAL_FAMILIES,
    Column,
    Kind,
    refuse_ungroupable,
)

Missing = Literal["category", "drop"]
SORT_METRICS: tuple[str, ...] = ("information_gain", "gain_ratio", "symmetric_uncertainty",
                                 "information_gain_corrected")
#: ``--confidence`` levels and their two-sided normal quantiles z = Φ⁻¹(1 - (1 - level) / 2),
#: the values of scipy.stats.norm.ppf(0.95 / 0.975 / 0.995) (tests/test_uncertainty.py).
CONFIDENCE_Z: dict[float, float] = {
    0.90: 1.6448536269514722,
    0.95: 1.959963984540054,
    0.99: 2.5758293035489004,
}
MISSING_MODES: tuple[str, ...] = ("category", "drop")
#: How numeric attributes are cut into bins (see DEVELOPERS.md, "Binning").
BINNING_METHODS: tuple[str, ...] = ("quantile", "equal-width", "best-split", "mdl")
#: Parts of a date or timestamp that ``--date-part`` turns into categories.
DATE_PARTS: tuple[str, ...] = ("year", "month", "dow", "hour")
#: ``--max-classes``' default: more target classes than this is refused.
DEFAULT_MAX_CLASSES = 100
#: One column's binning override: (column, method, bins or None for the run's --bins).
ColumnBinning = tuple[str, str, int | None]


def split_outside_quotes(text: str, separator: str = ",") -> list[str]:
    """``text`` cut at every ``separator`` that is not inside double quotes (quotes kept).

    >>> split_outside_quotes('"a,b"=mdl, c=quantile:4')
    ['"a,b"=mdl', ' c=quantile:4']
    """
    parts: list[str] = []
    current: list[str] = []
    quoted = False
    for ch in text:
        if ch == '"':
            quoted = not quoted  # a doubled quote toggles twice: still inside
        if ch == separator and not quoted:
            parts.append("".join(current))
            current = []
        else:
            current.append(ch)
    parts.append("".join(current))
    return parts


def _name_and_setting(item: str, what: str) -> tuple[str, str, bool]:
    """``COLUMN=VALUE`` -> (column, value, had '='). A column holding ``=`` (or ``,``) is written
    in double quotes, a quote in it doubled: ``"p=q"=mdl``. ``what``: the option's parameter
    name, for the error."""
    text = item.strip()
    if not text.startswith('"'):
        name, sep, setting = text.partition("=")
        return name.strip(), setting.strip(), bool(sep)
    pieces: list[str] = []
    position = 1
    while True:
        end = text.find('"', position)
        if end < 0:
            raise SpecError.option(what, f": a closing double quote is missing in {item!r}")
        pieces.append(text[position:end])
        if text[end + 1:end + 2] != '"':
            break
        pieces.append('"')  # "" inside quotes is one quote
        position = end + 2
    rest = text[end + 1:].strip()
    if rest and not rest.startswith("="):
        raise SpecError.option(what, f" takes COLUMN=VALUE or \"COLUMN\"=VALUE, not {item!r}")
    return "".join(pieces), rest[1:].strip(), bool(rest)


def _pairs(value: object, what: str) -> list[tuple[str, str]]:
    """``"a=x,b=y"``, a mapping, or an iterable of ``"a=x"`` strings / ``(a, x)`` pairs.
    Names holding ``=`` or ``,`` are double-quoted (see :func:`_name_and_setting`)."""
    if value is None:
        return []
    if isinstance(value, str):
        items: list[object] = [v for v in split_outside_quotes(value) if v.strip()]
    elif isinstance(value, dict):
        items = list(value.items())
    else:
        items = list(value)  # type: ignore[call-overload]
    pairs = []
    for item in items:
        if isinstance(item, str):
            name, setting, had_sep = _name_and_setting(item, what)
            if not had_sep and what == "date_part":
                name, setting = "", name  # a bare part applies to every date column
            elif not had_sep or not name.strip():
                raise SpecError.option(what, f" takes COLUMN=VALUE, not {item!r}")
            elif "=" in setting:
                raise SpecError.option(
                    what, f" {name}={setting}: a column name holding '=' is written in double "
                    f"quotes, e.g. \"{name}={setting.split('=')[0]}\"={setting.split('=', 1)[1]}")
            pairs.append((name, setting))
        else:
            name, setting, *_ = item  # type: ignore[misc]
            pairs.append((str(name), str(setting)))
    return pairs


def parse_binning_for(value: object) -> tuple[ColumnBinning, ...]:
    """Per-column binning overrides: ``"price=mdl,score=quantile:4"`` (METHOD[:BINS]).

    >>> parse_binning_for("price=mdl, score=equal-width:4")
    (('price', 'mdl', None), ('score', 'equal-width', 4))
    >>> parse_binning_for({"score": "best-split"})
    (('score', 'best-split', None),)
    """
    if isinstance(value, tuple) and all(isinstance(v, tuple) and len(v) == 3 for v in value):
        return value  # already parsed
    parsed = []
    for name, setting in _pairs(value, "binning_for"):
        method, sep, bins = setting.partition(":")
        try:
            count = int(bins) if sep else None
        except ValueError:
            raise SpecError.option("binning_for", f" {name}: bins must be a whole number, "
                                   f"not {bins!r}") from None
        parsed.append((name, method.strip().lower(), count))
    return tuple(parsed)


def parse_date_parts(value: object) -> tuple[tuple[str, str], ...]:
    """Date parts to rank as categories: ``"sown_on=month"``; a bare ``"month"`` applies to
    every date/timestamp attribute not named otherwise (column ``""``).

    >>> parse_date_parts("sown_on=month,dow")
    (('sown_on', 'month'), ('', 'dow'))
    """
    return tuple((name, part.lower()) for name, part in _pairs(value, "date_part"))


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


def timeout_seconds(value: object) -> float | None:
    """``--timeout`` checked: a finite, positive number of seconds, or None for no limit
    (``inf`` too). Each engine checks its own upper limit (its run policy's ``timeout.longest``).

    >>> timeout_seconds(2), timeout_seconds(float("inf"))
    (2.0, None)
    >>> timeout_seconds(float("nan"))
    Traceback (most recent call last):
    bitsift.errors.SpecError: timeout must be a positive number of seconds, not nan
    """
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise SpecError.option("timeout", f" must be a number of seconds, not {value!r}")
    if value == math.inf:
        return None
    if math.isnan(value) or value <= 0:
        raise SpecError.option("timeout",
                               f" must be a positive number of seconds, not {value:.15g}")
    return float(value)


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
    #: Default binning method of numeric attributes, one of :data:`BINNING_METHODS`.
    binning: str = "quantile"
    #: Per-column overrides of the method and bin count (see :func:`parse_binning_for`).
    binning_for: tuple[ColumnBinning, ...] = ()
    #: Dates ranked as categories of one part (see :func:`parse_date_parts`).
    date_part: tuple[tuple[str, str], ...] = ()
    where: str | None = None
    sort: str = "information_gain"
    limit: int | None = None
    timeout: float | None = None
    thresholds: Thresholds = field(default_factory=Thresholds)
    #: Segment columns (``--by``): the ranking is computed within each combination of values.
    by: tuple[str, ...] = ()
    #: A non-negative weight column (``--weight``): sums of weights instead of row counts.
    weight: str | None = None
    #: A target with more classes than this is refused (it looks continuous or an identifier).
    max_classes: int = DEFAULT_MAX_CLASSES
    #: Rank against this many quantile bins of a numeric target (cut in the database).
    target_bins: int | None = None
    #: The level of each gain's interval (``--confidence``), one of :data:`CONFIDENCE_Z`.
    confidence: float = 0.95

    @property
    def z(self) -> float:
        """The normal quantile of :attr:`confidence`: the interval is corrected ± z·se."""
        return CONFIDENCE_Z[self.confidence]

    def __post_init__(self) -> None:
        try:
            object.__setattr__(self, "timeout", timeout_seconds(self.timeout))
            timeout_problems: list[Problem] = []
        except SpecError as error:
            timeout_problems = error.problems
        problems = [*self._value_problems(), *timeout_problems, *self._conflict_problems()]
        if problems:
            raise SpecError(problems=problems)

    def _value_problems(self) -> list[Problem]:
        """Option values out of their range or list (every one, in the order of the options)."""
        problems = []
        if self.missing not in MISSING_MODES:
            modes = ", ".join(MISSING_MODES)
            problems.append(Problem.option("missing",
                                           f" must be one of {modes}, not {self.missing!r}"))
        if self.sort not in SORT_METRICS:
            problems.append(Problem.option(
                "sort", f" must be one of {', '.join(SORT_METRICS)}, not {self.sort!r}"))
        if self.confidence not in CONFIDENCE_Z:
            levels = ", ".join(f"{c:.2f}" for c in CONFIDENCE_Z)
            problems.append(Problem.option(
                "confidence", f" must be one of {levels}, not {self.confidence!r}"))
        if not 2 <= self.bins <= 1000:
            problems.append(Problem.option("bins",
                                           f" must be between 2 and 1000, not {self.bins}"))
        methods = ", ".join(BINNING_METHODS)
        if self.binning not in BINNING_METHODS:
            problems.append(Problem.option("binning",
                                           f" must be one of {methods}, not {self.binning!r}"))
        for name, method, bins in self.binning_for:
            if method not in BINNING_METHODS:
                problems.append(Problem.option(
                    "binning_for", f" {name}: the method must be one of {methods}, "
                    f"not {method!r}"))
            if bins is not None and not 2 <= bins <= 1000:
                problems.append(Problem.option(
                    "binning_for", f" {name}: bins must be between 2 and 1000, not {bins}"))
        for name, part in self.date_part:
            if part not in DATE_PARTS:
                problems.append(Problem.option(
                    "date_part", f" {name or '(all dates)'}: the part must be one of "
                    f"{', '.join(DATE_PARTS)}, not {part!r}"))
        date_numeric = sorted({n for n, _ in self.date_part if n} & set(self.numeric))
        if date_numeric:
            problems.append(_named_both("date_part", "numeric", date_numeric))
        if isinstance(self.max_classes, bool) or not isinstance(self.max_classes, int) \
                or self.max_classes < 2:
            problems.append(Problem.option(
                "max_classes", f" must be a whole number of at least 2, not {self.max_classes!r}"))
        if self.target_bins is not None and (
                isinstance(self.target_bins, bool) or not isinstance(self.target_bins, int)
                or not 2 <= self.target_bins <= 1000):
            problems.append(Problem.option(
                "target_bins", f" must be a whole number between 2 and 1000, "
                f"not {self.target_bins!r}"))
        if self.limit is not None and self.limit < 1:
            problems.append(Problem.option("limit", f" must be at least 1, not {self.limit}"))
        return problems

    def _conflict_problems(self) -> list[Problem]:
        """Options that contradict each other, or name a column twice."""
        problems = []
        both = sorted(set(self.categorical) & set(self.numeric))
        if both:
            problems.append(_named_both("categorical", "numeric", both))
        if len(set(self.by)) != len(self.by):
            problems.append(Problem.option("by", " names a column twice: " + ", ".join(self.by)))
        if self.weight is not None and not self.weight.strip():
            problems.append(Problem.option("weight", " needs a column name"))
        return problems


def _named_both(first: str, second: str, names: Sequence[str]) -> Problem:
    """Columns named in two options that exclude each other; about the first option."""
    return Problem(first, ("columns named both ", Option(first), " and ", Option(second), ": "
                           + ", ".join(names)))


@dataclass(frozen=True)
class AttributeSpec:
    """One attribute to rank: its catalog name, its kind, and its position in the SQL (1-based)."""

    name: str
    kind: Kind
    family: str
    #: Numeric attributes: the binning method (:data:`BINNING_METHODS`) and the bins asked
    #: for (quantile, equal-width; best-split always cuts once, mdl decides).
    binning: str | None = None
    bins: int | None = None
    #: Date/timestamp attributes ranked as categories of this part (:data:`DATE_PARTS`).
    date_part: str | None = None

    @property
    def epoch(self) -> bool:
        """A date or timestamp binned as a number: its epoch seconds."""
        return self.kind == "numeric" and self.family in TEMPORAL_FAMILIES


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
    #: Segment columns (``--by``), catalog spelling; their kind is unused (values are grouped).
    by: tuple[AttributeSpec, ...] = ()
    #: The weight column (``--weight``), catalog spelling.
    weight: str | None = None
    #: ``--target-bins``: the cut points the target was binned at (run mode); ``source`` then
    #: reads the target as its bin labels (see :mod:`bitsift.run.target_bins`).
    target_cuts: tuple[float, ...] | None = None

    @property
    def numeric(self) -> tuple[AttributeSpec, ...]:
        return tuple(a for a in self.attributes if a.kind == "numeric")


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
    named = named_columns({
        "target": [options.target],
        "picked": list(options.attributes or ()),
        "excluded": list(options.exclude),
        "categorical": list(options.categorical),
        "numeric": list(options.numeric),
        "by": list(options.by),
        "weight": [options.weight] if options.weight else [],
        "binned": [name for name, _, _ in options.binning_for],
        "dated": [name for name, _ in options.date_part if name],
    }, by_name, source_name)
    _check_target_type(options, by_name[named.target])
    check_segments_and_weight(named.target, named.by, named.weight, named.picked, by_name)
    refuse_ungroupable(by_name, {"target": [named.target], "attributes": named.picked,
                                 "by": named.by,
                                 "weight": [named.weight] if named.weight else []})
    names = _ranked_names(options, columns, named, source_name)
    check_binnable(named, by_name)
    attributes = _attribute_specs(names, options, named, by_name)
    where = parse_predicate(options.where, by_name, dialect) if options.where else None
    return RankSpec(
        source=source,
        source_name=source_name,
        target=named.target,
        attributes=tuple(attributes),
        options=options,
        where=where,
        target_family=by_name[named.target].family,
        by=tuple(AttributeSpec(name=n, kind="categorical", family=by_name[n].family)
                 for n in dict.fromkeys(named.by)),
        weight=named.weight,
    )


def _ranked_names(options: RankOptions, columns: Sequence[Column], named: NamedColumns,
                  source_name: str) -> list[str]:
    """The attributes to rank: those named (or every groupable column), without the target,
    the excluded columns, the segments and the weight."""
    # Segment and weight columns are never ranked: within a segment, its columns are constant.
    left_out = {named.target, *named.excluded, *named.by, *([named.weight] if named.weight else [])}
    if options.attributes:
        names = [n for n in dict.fromkeys(named.picked) if n not in left_out]
    else:
        # An ungroupable column is left out (the engine's note names it and its type).
        names = [c.name for c in columns if c.groupable and c.name not in left_out]
    if not names:
        raise SpecError(f"no attributes left to rank in {source_name} (only the target remains)")
    return names


def _attribute_specs(names: Sequence[str], options: RankOptions, named: NamedColumns,
                     by_name: dict[str, Column]) -> list[AttributeSpec]:
    """Each attribute's kind (forced by ``numeric``/``categorical``, else its type's), with its
    binning (numeric) or date part (categorical dates)."""
    part_of = dict(zip(named.dated, [p for n, p in options.date_part if n], strict=True))
    every_date_part = next((p for n, p in options.date_part if not n), None)
    binning_of = {found: (method, bins) for found, (_, method, bins)
                  in zip(named.binned, options.binning_for, strict=True)}
    attributes = []
    for n in names:
        col = by_name[n]
        kind: Kind
        part = part_of.get(n)
        if (part is None and n not in named.categorical and n not in named.numeric
                and col.family in TEMPORAL_FAMILIES):
            part = every_date_part  # a bare --date-part PART: every date column not named
        if n in named.numeric:
            kind = "numeric"
        elif n in named.categorical or part is not None:
            kind = "categorical"
        else:
            kind = col.default_kind
        if kind == "numeric":
            method, bins = binning_of.get(n, (options.binning, None))
            attributes.append(AttributeSpec(name=n, kind=kind, family=col.family,
                                            binning=method, bins=bins or options.bins))
            continue
        attributes.append(AttributeSpec(name=n, kind=kind, family=col.family, date_part=part))
    _refuse_impossible_parts(attributes, part_of, by_name)
    unbinned = [a.name for a in attributes if a.name in binning_of and a.kind != "numeric"]
    if unbinned:
        raise SpecError(problems=[Problem("binning_for", (
            Option("binning_for"), " names columns that are not binned (integers, dates and ",
            Option("categorical"), " columns are categories unless named in ", Option("numeric"),
            "): " + ", ".join(unbinned)))])
    return attributes


#: Date parts a column of each family cannot have (a DATE has no hour: it would be constant).
IMPOSSIBLE_PARTS: dict[str, frozenset[str]] = {"date": frozenset({"hour"})}


def _refuse_impossible_parts(attributes: Sequence[AttributeSpec], named: dict[str, str],
                             by_name: dict[str, Column]) -> None:
    """Refuse a ``date_part`` the column's type cannot have, naming each column and type (a
    bare part too: ``--date-part hour`` would make every DATE column a constant)."""
    wrong = [a for a in attributes
             if a.date_part and a.date_part in IMPOSSIBLE_PARTS.get(a.family, frozenset())]
    if not wrong:
        return
    how = ("" if all(a.name in named for a in wrong)
           else "; name the columns that have it instead (COLUMN=PART)")
    raise ColumnError(problems=[Problem("date_part", (
        Option("date_part"), " asks for a part these columns cannot have: " + ", ".join(
            f"{a.date_part} of {a.name!r} ({by_name[a.name].type_name or a.family})"
            for a in wrong) + how))])


def _check_target_type(options: RankOptions, column: Column) -> None:
    """A float or decimal target is refused (every value would be a class of its own) unless
    ``target_bins`` cuts it; ``target_bins`` needs a number column."""
    typed = f"{column.name!r} ({column.type_name or column.family})"
    if options.target_bins is None and column.family in ("float", "decimal"):
        raise SpecError(problems=[Problem("target", (
            f"the target {typed} holds continuous numbers, not classes: rank against "
            "quantile bins of it with ", Option("target_bins"), " N (e.g. 5), or choose a "
            "categorical target"))])
    # "other": a column described without a connection (paste mode) is not refused here.
    if options.target_bins is not None and column.family not in NUMERIC_FAMILIES | {"other"}:
        raise SpecError(problems=[Problem("target_bins", (
            Option("target_bins"), f" needs a number target; {typed} is not one"))])
