"""``bitsift counts``: count the new partitions of a table in its database, and append their
(partition, attribute, value, class, n) rows to a counts table (docs/stored-counts.md)."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from functools import partial
from typing import Any

from bitsift.engines.base import Engine
from bitsift.engines.sources import parse_table_name
from bitsift.errors import SpecError
from bitsift.jobs.counts_rows import CountedPart, CountsRows, counts_rows
from bitsift.jobs.counts_store import CountsConflict, CountsStore, Write, open_counts_store
from bitsift.jobs.history import Destination
from bitsift.names import one_line, resolve_name, split_names
from bitsift.run.api import make_options
from bitsift.run.concurrent import run_on_sessions, sessions_for, split
from bitsift.run.counts_meta import DEFAULT_COUNTS_TABLE, CountsMeta
from bitsift.run.counts_values import parse_partition
from bitsift.run.cuts import fetch_cuts
from bitsift.run.session import Session, session_for
from bitsift.spec.rankspec import RankOptions, RankSpec
from bitsift.sql.counts_paste import create_statement, insert_statement, window_rank_statement
from bitsift.sql.counts_sql import (
    GRAINS,
    PARTITION_ALIAS,
    Partitioning,
    counting_statement,
    partition_kind_problem,
)
from bitsift.sql.dialects import capabilities
from bitsift.version import __version__

#: The options that decide what is counted: a later run must ask for the same ones.
COUNTED_OPTIONS = ("attributes", "exclude", "categorical", "numeric", "bins", "binning",
                   "binning_for", "date_part", "where")


@dataclass
class CountsReport:
    """What one ``counts`` run did."""

    destination: str
    partitions: list[str | int]
    rows: int
    attributes: list[str]
    notes: list[str] = field(default_factory=list)
    statements: list[str] = field(default_factory=list)
    #: The source's dialect (the statements' language).
    dialect: str = ""
    counts_table: str = DEFAULT_COUNTS_TABLE

    def summary(self) -> str:
        """One line saying what was counted and written."""
        added = (f"{len(self.partitions)} partition(s), {self.partitions[0]} to "
                 f"{self.partitions[-1]}" if self.partitions else "no new partitions")
        return one_line(f"counted {added}: {self.rows} rows written to {self.counts_table} "
                        f"in {self.destination} ({len(self.attributes)} attributes)")


@dataclass
class CountsPlan:
    """What a ``counts`` run will do, checked against the source and the destination before
    anything is counted: the counted attributes, the stored state, which partitions."""

    store: CountsStore
    #: The stored metadata (None: nothing stored yet, or a refit) and newest partition.
    stored: CountsMeta | None
    newest: str | int | None
    spec: RankSpec
    partitioning: Partitioning
    rank_options: RankOptions
    asked: CountsMeta
    #: ``recount_from``, checked against the partition kind.
    start: str | int | None
    refit: bool
    counts_table: str

    @property
    def after(self) -> str | int | None:
        """Only partitions newer than this one are counted (None: no such limit)."""
        return self.newest if self.stored is not None and self.start is None else None

    def describe(self) -> str:
        """What the run would do, in one line (``bitsift run --dry-run``)."""
        where = f"{self.counts_table} in {self.store.destination.display}"
        column = f"{self.partitioning.column} ({self.partitioning.grain})"
        if self.refit or self.stored is None:
            what = f"every partition of {column} would be counted into {where}"
        elif self.start is not None:
            what = (f"the partitions of {column} from {self.start} on would be counted again "
                    f"into {where}")
        elif self.newest is None:
            what = f"every partition of {column} would be counted into {where}"
        else:
            what = (f"the partitions of {column} after {self.newest} would be added to {where}")
        return f"{what} ({len(self.spec.attributes)} attributes, target {self.spec.target})"


def plan_counts(session: Session, *, target: str, partition: str, into: str,
                grain: str = "day", counts_table: str = DEFAULT_COUNTS_TABLE,
                refit: bool = False, recount_from: str | int | None = None,
                **options: Any) -> CountsPlan:
    """Check a ``counts`` request against the open source and the destination's stored
    counts (same target, partitioning and options unless ``refit``); nothing is counted."""
    for unsupported in ("by", "weight"):
        if options.get(unsupported):
            raise SpecError.option(unsupported, " is not available for stored counts")
    if refit and recount_from is not None:
        raise SpecError("--refit recounts every partition: leave out --recount-from")
    store = open_counts_store(Destination(into, counts_table))
    spec, partitioning, rank_options = _resolved(session, target, partition, grain, options)
    stored, newest = (None, None) if refit else store.state()
    # From the checked options: a comma string and a list of the same names agree.
    requested = {k: _plain(getattr(rank_options, k)) for k in COUNTED_OPTIONS}
    asked = CountsMeta(source=session.display, target=spec.target, partition=partitioning.column,
                       grain=grain, partition_kind=partitioning.kind, attributes=(),
                       options=requested)
    if stored is not None:
        mismatch = stored.mismatch(asked)
        if mismatch:
            raise CountsConflict(
                f"counts table {counts_table} in {store.destination.display} was built "
                f"otherwise ({mismatch}): ask for the same counts, or rebuild them with "
                "--refit")
        spec = _stored_order(spec, stored, f"counts table {counts_table} in "
                             f"{store.destination.display}")
    start = (None if recount_from is None
             else parse_partition(recount_from, partitioning.kind, "recount-from"))
    return CountsPlan(store=store, stored=stored, newest=newest, spec=spec,
                      partitioning=partitioning, rank_options=rank_options, asked=asked,
                      start=start, refit=refit, counts_table=counts_table)


@dataclass
class Counted:
    """The counts of one run, read from the source, not yet stored."""

    plan: CountsPlan
    spec: RankSpec
    cuts: dict[str, list[float]]
    rows: CountsRows
    partitions: list[str | int]
    notes: list[str]
    statements: list[str]
    dialect: str


def count_partitions(session: Session, plan: CountsPlan) -> Counted:
    """Count the plan's partitions in the source; nothing is written. Where the run policy
    spreads a ranking over sessions, the attributes are cut into as many parts, each
    counted by its own statement on its own session, at once (the counts are the same)."""
    spec, partitioning = plan.spec, plan.partitioning
    engine = session.engine
    cuts = plan.stored.cuts if plan.stored is not None else fetch_cuts(engine, spec)
    groups = split(spec.attributes, sessions_for(engine, spec)) if spec.attributes else [[]]

    def count(positions: list[int], on: Engine) -> CountedPart:
        part = dataclasses.replace(spec, attributes=tuple(spec.attributes[i]
                                                          for i in positions))
        statement = counting_statement(part, on.caps, cuts, partitioning, after=plan.after,
                                       from_=plan.start)
        return CountedPart(positions, on.fetch(statement.sql))

    parts = run_on_sessions(engine, [partial(count, g) for g in groups], len(groups),
                            spec.options.timeout)
    rows, partitions = counts_rows(parts, spec, partitioning.kind)
    return Counted(plan=plan, spec=spec, cuts={k: list(v) for k, v in cuts.items()}, rows=rows,
                   partitions=partitions, notes=list(session.notes),
                   statements=session.record().statements, dialect=session.engine.caps.name)


def store_counts(counted: Counted) -> CountsReport:
    """Write counted partitions to the plan's destination, in one transaction."""
    plan, spec, rows, cuts = counted.plan, counted.spec, counted.rows, counted.cuts
    notes = list(counted.notes)
    cap = plan.rank_options.thresholds.high_cardinality
    if plan.stored is None:
        spec, kept, dropped = _capped(spec, rows.as_lists(), cap)
        if dropped:
            rows = CountsRows.from_lists(kept, plan.partitioning.kind)
            notes.append(f"not stored, more than {cap} distinct values in a partition "
                         "(--high-cardinality): " + ", ".join(dropped))
    meta = dataclasses.replace(plan.asked, attributes=tuple(
        {"name": a.name, "kind": a.kind, "family": a.family, "binning": a.binning,
         "bins": a.bins, "cuts": list(cuts.get(a.name, ())) if a.kind == "numeric" else None}
        for a in spec.attributes)) if plan.stored is None else plan.stored
    written = plan.store.write(Write(meta=meta, rows=rows, partitions=counted.partitions,
                                     recount_from=plan.start, refit=plan.refit))
    return CountsReport(destination=plan.store.destination.display,
                        partitions=counted.partitions, rows=written,
                        attributes=[a.name for a in spec.attributes], notes=notes,
                        statements=counted.statements, dialect=counted.dialect,
                        counts_table=plan.counts_table)


def build_counts(source: Any, *, target: str, partition: str, into: str,
                 table: str | None = None, grain: str = "day",
                 counts_table: str = DEFAULT_COUNTS_TABLE, refit: bool = False,
                 recount_from: str | int | None = None, **options: Any) -> CountsReport:
    """Count the partitions of ``partition`` not yet stored (from ``recount_from`` on, or all
    of them with ``refit``) in the source, and store them in ``into`` (after the source is
    closed, when this call opened it). ``source``: as :func:`bitsift.rank` takes it, or an
    open session (left open)."""
    with session_for(source, table) as session:
        plan = plan_counts(session, target=target, partition=partition, into=into,
                           grain=grain, counts_table=counts_table, refit=refit,
                           recount_from=recount_from, **options)
        counted = count_partitions(session, plan)
    return store_counts(counted)


def _resolved(session: Session, target: str, partition: str, grain: str,
              options: dict[str, Any]) -> tuple[RankSpec, Partitioning, RankOptions]:
    """The spec of the counted attributes (the partition column left out) and the
    partitioning, checked against the table."""
    if grain not in GRAINS:
        raise SpecError.option("grain", f" must be one of {', '.join(GRAINS)}, not {grain!r}")
    names = [c.name for c in session.columns]
    column = resolve_name(partition, names)
    if column is None:
        raise SpecError.option("partition", f": no column {partition!r} in {session.display}")
    if any(n.lower() == PARTITION_ALIAS for n in names):
        raise SpecError(f"the table has a column named {PARTITION_ALIAS!r}, which the "
                        "counting statement needs for itself")
    family = next(c.family for c in session.columns if c.name == column)
    partitioning = Partitioning(column, family, grain)  # type: ignore[arg-type]
    problem = partition_kind_problem(partitioning)
    if problem:
        raise SpecError(problem)
    exclude = (*split_names(options.pop("exclude", None)), column)
    rank_options = make_options(target, exclude=exclude, **options)
    if column in (rank_options.attributes or ()):
        raise SpecError.option("attributes", f": the partition column {column!r} is not "
                               "ranked")
    spec = session.prepare(rank_options)
    if column == spec.target:
        raise SpecError.option("partition", " must not be the target")
    return spec, partitioning, rank_options


def paste_counts(source: Any, *, target: str, partition: str, table: str | None = None,
                 grain: str = "day", counts_table: str = DEFAULT_COUNTS_TABLE,
                 since: str | None = None, until: str | None = None,
                 dialect: str | None = None, **options: Any) -> str:
    """The paste-ready statements keeping the counts inside the source's warehouse
    (``bitsift sql --counts``): create the counts table if missing, insert the partitions
    newer than the newest stored one, rank the window ``[since, until)``. Numeric cut points
    are computed now, from the table, and written into the insert as literals."""
    for unsupported in ("by", "weight"):
        if options.get(unsupported):
            raise SpecError.option(unsupported, " is not available for stored counts")
    options.pop("limit", None)
    with session_for(source, table) as session:
        spec, partitioning, _ = _resolved(session, target, partition, grain, options)
        caps = capabilities(dialect) if dialect else session.engine.caps
        cuts = fetch_cuts(session.engine, spec)
        notes = list(session.notes)
        display = session.display
    low = None if since is None else parse_partition(since, partitioning.kind, "since")
    high = None if until is None else parse_partition(until, partitioning.kind, "until")
    counts = parse_table_name(counts_table, caps.sqlglot_dialect)
    binning = "; ".join(f"{name}: {', '.join(f'{c:.12g}' for c in values) or 'one bin'}"
                        for name, values in sorted(cuts.items())) or "none"
    header = [
        f"bitsift {__version__} - stored counts in the warehouse, dialect {caps.name}",
        f"table: {display}; target: {spec.target}; partition: {partitioning.column} "
        f"({partitioning.grain}); counts table: {counts_table}",
        f"numeric cut points, fixed when these statements were written: {binning}",
        "1. create the counts table (once); 2. every night: add the partitions newer than "
        "the newest stored one; 3. rank a window of partitions",
        *(f"note: {n}" for n in notes),
    ]
    statements = [
        create_statement(counts, caps, partitioning.kind),
        insert_statement(spec, caps, cuts, partitioning, counts),
        window_rank_statement(spec, caps, counts, partitioning, low, high),
    ]
    lines = "\n".join(f"-- {' '.join(h.split())}" for h in header)
    return lines + "\n" + "".join(f"{s};\n\n" for s in statements).rstrip("\n") + "\n"


def _stored_order(spec: RankSpec, stored: CountsMeta, where: str) -> RankSpec:
    """The spec's attributes as the counts store them (same order, same kinds); an attribute
    stored but no longer in the table, or of another kind now, is an error."""
    resolved = {a.name: a for a in spec.attributes}
    missing = [a["name"] for a in stored.attributes if a["name"] not in resolved]
    if missing:
        raise CountsConflict(f"{where} holds attribute(s) the table no longer has: "
                             + ", ".join(missing) + "; rebuild the counts with --refit")
    changed = [a["name"] for a in stored.attributes if resolved[a["name"]].kind != a["kind"]]
    if changed:
        raise CountsConflict(f"{where}: attribute(s) of another kind now (their column type "
                             "changed): " + ", ".join(changed) + "; rebuild with --refit")
    return dataclasses.replace(spec, attributes=tuple(resolved[a["name"]]
                                                      for a in stored.attributes))


def _plain(value: Any) -> Any:
    """An option as JSON keeps it (tuples as lists), for comparing with stored options."""
    if isinstance(value, tuple | list):
        return [_plain(v) for v in value]
    return value


def _capped(spec: RankSpec, rows: list[list[Any]], cap: int,
            ) -> tuple[RankSpec, list[list[Any]], list[str]]:
    """Attributes with more than ``cap`` distinct values in some partition left out (their
    counts would be as big as the data), the others renumbered."""
    distinct: dict[tuple[Any, int], set[Any]] = {}
    for row in rows:
        distinct.setdefault((row[0], row[1]), set()).add(row[3])
    over = {index for (_, index), values in distinct.items() if index and len(values) > cap}
    if not over:
        return spec, rows, []
    kept = [(i, a) for i, a in enumerate(spec.attributes, start=1) if i not in over]
    renumber = {old: new for new, (old, _) in enumerate(kept, start=1)} | {0: 0}
    kept_rows = [[r[0], renumber[r[1]], *r[2:]] for r in rows if r[1] not in over]
    dropped = [a.name for i, a in enumerate(spec.attributes, start=1) if i in over]
    return dataclasses.replace(spec, attributes=tuple(a for _, a in kept)), kept_rows, dropped
