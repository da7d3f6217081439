"""The library entry points: :func:`rank`, :func:`statement` and :func:`check`.

The CLI is a thin shell over these functions; they never print and never exit.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import sqlglot
from sqlglot import exp

from bitsift.engines.base import Engine
from bitsift.engines.duckdb_engine import file_reader, is_frame
from bitsift.engines.sources import parse_table_name
from bitsift.errors import Option, Problem, SpecError
from bitsift.names import split_names
from bitsift.run import concurrent
from bitsift.run.cuts import fetch_cuts, fetch_mdl_cuts  # noqa: F401 - re-exported for callers
from bitsift.run.readout import read_ranking, read_segments
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.run.session import session_for
from bitsift.spec.rankspec import (
    RankOptions,
    RankSpec,
    Thresholds,
    parse_binning_for,
    parse_date_parts,
    resolve,
)
from bitsift.spec.schema import Column, hashable_value
from bitsift.sql.dialects import Capabilities, capabilities
from bitsift.sql.paste import paste_statement
from bitsift.sql.sqlstatements import rows_statement


def make_options(target: str, **options: Any) -> RankOptions:
    """:class:`RankOptions` from keyword arguments as :func:`rank` takes them."""
    attributes = options.pop("attributes", None)
    thresholds = options.pop("thresholds", None) or Thresholds()
    unknown = sorted(set(options) - set(RankOptions.__dataclass_fields__))
    if unknown:
        raise SpecError("unknown option(s): " + ", ".join(unknown))
    for key in ("exclude", "categorical", "numeric", "by"):
        options[key] = split_names(options.get(key))
    options["binning_for"] = parse_binning_for(options.get("binning_for"))
    options["date_part"] = parse_date_parts(options.get("date_part"))
    return RankOptions(
        target=target,
        attributes=split_names(attributes) or None,
        thresholds=thresholds,
        **options,
    )


def rank(source: Any, target: str, table: str | None = None, **options: Any,
         ) -> Ranking | SegmentedRanking:
    """Rank the attributes of a table by information gain about ``target``, in the database.

    ``source``: a DuckDB database file (with ``table``), a Parquet/CSV file, a SQLAlchemy URL
    (with ``table``), an open DuckDB connection, a SQLAlchemy Engine or Connection, or an open
    :class:`~bitsift.run.session.Session` (its own table; left open).
    ``options``: ``attributes``, ``exclude``, ``categorical``, ``numeric`` (lists or
    comma-separated strings), ``missing`` ("category" or "drop"), ``bins``, ``where``, ``sort``,
    ``limit``, ``timeout`` (seconds), ``thresholds`` (:class:`~bitsift.spec.rankspec.Thresholds`),
    ``by`` (segment columns: the result is then a :class:`~bitsift.run.result.SegmentedRanking`,
    one ranking per segment) and ``weight`` (a column of non-negative weights summed instead
    of counting rows).

    >>> import duckdb
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE t AS SELECT i % 2 AS a, i % 4 AS b, i % 2 = 0 AS y "
    ...                 "FROM range(100) r(i)")
    >>> r = rank(con, target="y", table="t")
    >>> [(s.attribute, round(s.information_gain, 3)) for s in r.attributes]
    [('a', 1.0), ('b', 1.0)]
    >>> round(r["b"].gain_ratio, 12)
    0.5
    """
    spec_options = make_options(target, **options)
    with session_for(source, table) as session:
        spec = session.prepare(spec_options)
        result: Ranking | SegmentedRanking = (
            run_segmented(session.engine, spec) if spec.by else run_ranking(session.engine, spec))
        return session.record().stamp(result)


#: Attributes per ranking statement in run mode; wider tables are ranked in batches, one
#: statement (and one scan) each. Engines plan a statement superlinearly in its attributes,
#: and the union_all strategy's text grows with their square (every branch lists them all).
#: Measured 2026-12-02 (2-core machine, shared, so +-50 %), 2,000 rows of integer attributes
#: in one statement: 50/100/200/500 attributes took PostgreSQL 0.2/0.2/1.0/36 s, MariaDB
#: 0.9/1.2/4.3 s (500 not tried), SQLite 0.5/1.1/3.7 s and "too many terms in compound
#: SELECT" at 500, DuckDB 0.1/0.5/0.9 s (150)/5.4 s (500); building the SQLite/MariaDB
#: statement (sqlglot) costs 0.3/1.0 s of CPU at 50/100. 500 attributes in batches of
#: 25/50/100 on DuckDB: 2.2/2.2/2.9 s of CPU. Paste mode (`bitsift sql`) stays one statement.
MAX_ATTRIBUTES_PER_STATEMENT = 50


def fetch_records(engine: Engine, spec: RankSpec) -> tuple[list[dict[str, Any]],
                                                           dict[str, list[float]]]:
    """Cut points and result rows of the ranking, in parts of at most
    :data:`MAX_ATTRIBUTES_PER_STATEMENT` attributes, renumbered as if from one statement
    (:func:`bitsift.run.parts.merge_parts`). Serial batches are the one-session case of
    :func:`bitsift.run.concurrent.fetch_records_in_parts`.
    """
    # The engine's run_sessions (its run policy): parts of the attributes at once
    # (benchmarks/RESULTS.md); one session runs the same parts one after another.
    return concurrent.fetch_records_in_parts(engine, spec, concurrent.sessions_for(engine, spec),
                                             MAX_ATTRIBUTES_PER_STATEMENT)


def run_ranking(engine: Engine, spec: RankSpec) -> Ranking:
    """Compute a :class:`Ranking` for a resolved, unsegmented spec on an open engine. The
    statements and the engine's notes are the session's to add (:meth:`Session.record`)."""
    if spec.by:
        raise SpecError(problems=[Problem("by", (
            "a segmented spec (", Option("by"), ") gives one ranking per segment: "
            "use run_segmented()"))])
    records, cuts = fetch_records(engine, spec)
    return read_ranking(records, spec, cuts, dialect=engine.caps.name)


def run_segmented(engine: Engine, spec: RankSpec) -> SegmentedRanking:
    """Compute one ranking per segment of a spec with segment columns (``--by``), in one
    statement. Numeric attributes are binned with cut points computed over the whole table."""
    records, cuts = fetch_records(engine, spec)
    return read_segments(records, spec, cuts, dialect=engine.caps.name)


def statement(
    source: Any = None,
    target: str = "",
    table: str | None = None,
    *,
    dialect: str | None = None,
    **options: Any,
) -> str:
    """The paste-ready, self-contained ranking statement for ``dialect``.

    With a ``source``, column types are introspected; without one, ``table`` plus
    ``attributes`` and ``numeric`` describe the columns (``numeric`` columns are binned).
    A data file (Parquet, CSV, JSON) as ``source`` with ``table``: the file gives the columns
    and the statement reads ``table``, e.g. the warehouse table the file was exported from;
    without ``table`` the statement reads the file, which only DuckDB can. A data frame
    likewise gives the columns, and needs ``table``.
    ``timeout`` applies to the statements run on ``source`` (catalog, MDL cut points); the
    printed statement carries none, and ``limit`` is refused: it returns every attribute.

    >>> print(statement(table="sales.orders", target="late", attributes="region",
    ...                 numeric="amount", dialect="postgres").splitlines()[1])
    -- table: sales.orders
    """
    spec_options = make_options(target, **options)
    _refuse_unprinted(spec_options, has_source=source is not None)
    if source is not None:
        frame = is_frame(source)
        schema_file = frame or (isinstance(source, str | Path)
                                and file_reader(str(source)) is not None)
        if frame and not table:
            # The frame's view exists only in bitsift's own session: nothing to paste it into.
            raise SpecError(problems=[Problem("table", (
                "a statement from a data frame needs ", Option("table"), " naming the table "
                "it should read (the frame then only gives the columns)"))])
        with session_for(source, None if schema_file else table) as session:
            caps = capabilities(dialect) if dialect else session.engine.caps
            if schema_file and not table and not caps.reads_files:
                raise SpecError(problems=[Problem("table", (
                    f"a {caps.name} statement cannot read the file {source} in place: name the "
                    f"{caps.name} table it should read with ", Option("table"),
                    " (the file then only gives the columns)"))])
            session.set_timeout(spec_options.timeout)
            spec = session.resolve(spec_options)
            # MDL's cut points need a Python step: computed here and inlined as literals.
            cuts = fetch_mdl_cuts(session.engine, spec)
            if schema_file and table:
                spec = replace(spec, source=parse_table_name(table, caps.sqlglot_dialect),
                               source_name=table)
            text = _unshadowed(paste_statement(spec, caps, cuts=cuts), spec, caps)
            return _with_notes(text, session.notes)
    if not table:
        raise SpecError.option("table", " is required without a SOURCE")
    if spec_options.target_bins is not None:
        raise SpecError(problems=[Problem("target_bins", (
            Option("target_bins"), " needs a SOURCE: the target's cut points are computed from "
            "the table and inlined"))])
    if not spec_options.attributes and not spec_options.numeric:
        raise SpecError(problems=[Problem(None, (
            "without a SOURCE, name the columns with ", Option("attributes"), " and/or ",
            Option("numeric")))])
    caps = capabilities(dialect or "duckdb")
    columns = _declared_columns(spec_options)
    attribute_names = tuple(dict.fromkeys((spec_options.attributes or ()) + spec_options.numeric))
    spec_options = make_options(
        target,
        **{**_options_dict(spec_options), "attributes": attribute_names},
    )
    source_table = parse_table_name(table, caps.sqlglot_dialect)
    spec = resolve(spec_options, columns, source_table, table, caps.sqlglot_dialect)
    return _unshadowed(paste_statement(spec, caps), spec, caps)


def _refuse_unprinted(options: RankOptions, *, has_source: bool) -> None:
    """``limit`` and a ``timeout`` with nothing to run: refused, never silently ignored."""
    problems = []
    if options.limit is not None:
        problems.append(Problem("limit", (
            Option("limit"), " is not used for a printed statement: it returns every attribute, "
            "ordered by ", Option("sort"), " (add a LIMIT when you paste it)")))
    if options.timeout is not None and not has_source:
        problems.append(Problem("timeout", (
            Option("timeout"), " applies to the statements bitsift runs, and without a SOURCE "
            "it runs none: set a timeout in the console that runs the printed statement")))
    if problems:
        raise SpecError(problems=problems)


def _with_notes(text: str, notes: Sequence[str]) -> str:
    """The statement with the engine's notes (columns left out...) as comments after its first
    line, where whoever pastes it reads them."""
    if not notes:
        return text
    first, _, rest = text.partition("\n")
    return "\n".join([first, *(f"-- note: {n}" for n in notes), rest])


def _unshadowed(text: str, spec: RankSpec, caps: Capabilities) -> str:
    """``text``, unless its table is unqualified and named like one of its CTEs (``bounds``,
    ``counts``...): the database would read that CTE instead of the table."""
    table = spec.source
    if not isinstance(table, exp.Table) or table.db or not isinstance(table.this,
                                                                      exp.Identifier):
        return text
    try:
        tree = sqlglot.parse_one(text, read=caps.sqlglot_dialect)
    except sqlglot.errors.SqlglotError:  # pragma: no cover - bitsift's own SQL parses
        return text
    steps = {cte.alias.lower() for cte in tree.find_all(exp.CTE)}
    if table.name.lower() in steps:
        raise SpecError(problems=[Problem("table", (
            f"table {table.name!r} has the name of a step of the ranking statement, which would "
            "be read instead: write it with its schema, e.g. ", Option("table"),
            f" public.{table.name}"))])
    return text


def _options_dict(options: RankOptions) -> dict[str, Any]:
    return {k: getattr(options, k) for k in RankOptions.__dataclass_fields__ if k != "target"}


def _declared_columns(options: RankOptions) -> list[Column]:
    names = [options.target, *(options.attributes or ()), *options.numeric, *options.by,
             *([options.weight] if options.weight else [])]
    return [
        Column(name=n, family="float" if n in options.numeric else "other")
        for n in dict.fromkeys(names)
    ]


METRICS_CHECKED: tuple[str, ...] = (
    "information_gain",
    "gain_ratio",
    "symmetric_uncertainty",
    "conditional_entropy",
    "attribute_entropy",
    "target_entropy",
    "g_statistic",
    "p_value",
    "information_gain_se",
    "information_gain_corrected",
    "information_gain_low",
    "information_gain_high",
)


@dataclass
class CheckReport:
    """Largest absolute difference per metric between the database and the NumPy reference."""

    ranking: Ranking
    sample_rows: int
    whole_table: bool
    differences: dict[str, float] = field(default_factory=dict)
    tolerance: float = 1e-9

    @property
    def ok(self) -> bool:
        """True unless the whole table was compared and some metric differs beyond tolerance."""
        return not self.whole_table or all(
            d <= self.tolerance for d in self.relative_differences.values()
        )

    relative_differences: dict[str, float] = field(default_factory=dict)


def check(source: Any, target: str, table: str | None = None, *, sample_rows: int = 100_000,
          **options: Any) -> CheckReport:
    """Rank in the database, then recompute on rows pulled into NumPy, and compare.

    When the table has at most ``sample_rows`` rows the whole table is compared and the
    numbers must agree to 1e-9 (relative for the G statistic); otherwise a sample is pulled
    and the differences are reported for information only.

    The p-values are compared as the other numbers of at most 1 are: absolutely, to 1e-9.
    bitsift computes its chi-square tail itself (:mod:`bitsift.run.chisquare`, within 1e-12
    relative of SciPy's), the reference with SciPy from its own G, so the check still sees
    the p-value's formula and its input; a relative test of tails of 1e-100 would only
    magnify G's last-bit differences (a tail moves by about G/2 times G's relative change).
    """
    if sample_rows < 1:
        raise SpecError.option("sample_rows", f" must be at least 1, not {sample_rows}")
    spec_options = make_options(target, **options)
    if spec_options.by or spec_options.weight:
        raise SpecError(problems=[Problem(None, (
            "check compares an unsegmented, unweighted ranking with the reference: check one "
            "segment with ", Option("where"), " instead of by, and leave out weight"))])
    with session_for(source, table) as session:
        spec = session.prepare(spec_options)
        ranking = session.record().stamp(run_ranking(session.engine, spec))
        total = ranking.rows + ranking.rows_excluded
        whole = total <= sample_rows
        data = _pull_rows(session.engine, spec, None if whole else sample_rows)
    return _compare(ranking, spec, data, whole)


def _pull_rows(engine: Engine, spec: RankSpec, limit: int | None) -> dict[str, list[Any]]:
    names = [spec.target, *(a.name for a in spec.attributes)]
    result = engine.fetch(rows_statement(spec, engine.caps, limit).sql)
    columns = list(zip(*result.rows, strict=True)) if result.rows else [() for _ in names]
    return {n: [hashable_value(v) for v in c] for n, c in zip(names, columns, strict=True)}



def _compare(ranking: Ranking, spec: RankSpec, data: Mapping[str, Sequence[Any]],
             whole: bool) -> CheckReport:
    from bitsift.run import reference  # NumPy and SciPy: only check needs them

    absolute: dict[str, float] = dict.fromkeys(METRICS_CHECKED, 0.0)
    relative: dict[str, float] = dict.fromkeys(METRICS_CHECKED, 0.0)
    y = data[spec.target]
    kinds = {a.name: a for a in spec.attributes}
    for scored in ranking.attributes:
        values = list(data[scored.attribute])
        if kinds[scored.attribute].kind == "numeric":
            values = reference.bin_values(values, scored.cuts or [])
        table = reference.contingency(values, y, spec.options.missing)
        if table.sum() == 0:
            continue
        expected = reference.metrics(table, spec.options.confidence)
        for metric in METRICS_CHECKED:
            got = getattr(scored, metric)
            diff = abs(got - expected[metric])
            absolute[metric] = max(absolute[metric], diff)
            relative[metric] = max(relative[metric], diff / max(1.0, abs(expected[metric])))
    return CheckReport(
        ranking=ranking,
        sample_rows=len(y),
        whole_table=whole,
        differences=absolute,
        relative_differences=relative,
    )
