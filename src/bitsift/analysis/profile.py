"""Drill-down: why an attribute matters, value by value.

The database computes value x class counts (templates/profile.sql.j2); only those counts leave
it. From them this module reads, per value (or quantile bin) of an attribute, its share of the
rows, its class distribution, its own entropy H(Y | X = x) and its contribution
p(x) * H(Y | X = x) to the conditional entropy H(Y|X). Numeric attributes are binned with the
cut points of the ranking, so the drill-down shows the bins the ranking measured.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import replace
from typing import Any

from bitsift.analysis.profile_model import (
    ProfiledRun,
    Profiles,
    Progress,
)
from bitsift.analysis.profile_read import fetch_profiles
from bitsift.errors import ColumnError, Option, Problem, SpecError, unknown_names_message
from bitsift.names import resolve_names, split_names
from bitsift.run.api import make_options, run_ranking, run_segmented
from bitsift.run.result import SEGMENT_STATUS, segment_label
from bitsift.run.session import session_for
from bitsift.spec.schema import Column
from bitsift.sql.sqlstatements import DEFAULT_MAX_VALUES, segment_predicate


def resolve_sensitive(names: Iterable[str], columns: Sequence[Column]) -> tuple[str, ...]:
    """Catalog spellings of the ``--sensitive`` columns; every unknown name is reported."""
    catalog = [c.name for c in columns]
    found, unknown = resolve_names(names, catalog)
    if unknown:
        raise ColumnError(problems=[Problem("sensitive", (
            unknown_names_message("column", unknown, catalog) + " (", Option("sensitive"), ")"))])
    return tuple(dict.fromkeys(found))


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
    ``source``: as :func:`bitsift.rank` takes it, or an open :class:`~bitsift.run.session.Session`
    (left open, e.g. for :func:`bitsift.analysis.selection.select_for_runs` to go on with).

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
        engine = session.engine
        say(f"reading the columns of {session.display}")
        marked = resolve_sensitive(split_names(sensitive), session.columns)
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
        record = session.record()
    ranking, notes = record.stamp(ranking), record.notes
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
    names = split_names(attributes)
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
        engine = session.engine
        say(f"reading the columns of {session.display}")
        marked = resolve_sensitive(split_names(sensitive), session.columns)
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
        record = session.record()
    out = []
    for ranking, profiles in runs:
        # Every segment lists the statements of them all: they share one statement.
        ranking = replace(ranking, statements=record.statements)
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
                               sensitive=marked, notes=record.notes, segment=label))
    return out
