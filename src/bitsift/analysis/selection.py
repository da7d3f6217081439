"""A small informative set of attributes: greedy minimum-redundancy maximum-relevance (mRMR).

Peng, Long & Ding, "Feature selection based on mutual information: criteria of
max-dependency, max-relevance, and min-redundancy", IEEE TPAMI 27(8):1226-1238, 2005. With
S the attributes chosen so far, the next attribute f maximises

- MID (mutual information difference):  I(f; Y) − mean_{s in S} I(f; s)
- MIQ (mutual information quotient):    I(f; Y) / mean_{s in S} I(f; s)

(MID is the paper's incremental mRMR rule; the names MID/MIQ and the quotient form are the
same authors', Ding & Peng, J. Bioinform. Comput. Biol. 3(2), 2005 - recalled from memory.)

where the relevance I(f; Y) is the ranking's information gain and the redundancy I(f; s) comes from
the pairs statement (:mod:`bitsift.analysis.redundancy`), both in bits, on the ranking's rows and
bins. The first attribute is the most relevant one. Ties go to the higher relevance, then to the
earlier attribute in the ranking.

Under MIQ a candidate that shares nothing with the chosen set would divide by zero: its mean
redundancy is floored at :data:`MIQ_FLOOR` bits, so such candidates come first, by relevance.

The database is asked only for what the greedy search reads: after each step, the pairs between
the attribute just chosen and the remaining candidates (K − 1, K − 2, ... pairs), not the whole
matrix.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any, Literal

from bitsift.analysis.profile_model import ProfiledRun, Progress
from bitsift.analysis.redundancy import (
    DEFAULT_BATCH_PAIRS,
    PairMeasurer,
    RedundancyMatrix,
    flagged_candidates_note,
    left_out_list,
    left_out_note,
    measure_matrix,
    rank_on_session,
    ranking_cuts,
    ranking_keys,
    screen_candidates,
)
from bitsift.engines.base import Engine
from bitsift.errors import DataError, SpecError
from bitsift.run.api import make_options
from bitsift.run.result import Ranking
from bitsift.run.session import session_for
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.sqlstatements import segment_predicate

Criterion = Literal["mid", "miq"]
CRITERIA: tuple[str, ...] = ("mid", "miq")

#: Smallest mean redundancy (bits) MIQ divides by.
MIQ_FLOOR = 1e-12

#: In a report, the selection chooses among this many of the most relevant attributes (or k,
#: if more), and the heatmap shows every pair of them.
REPORT_CANDIDATES = 20

#: Given the attribute just chosen and the remaining candidates: I(chosen; candidate) in bits.
RedundancyLookup = Callable[[str, Sequence[str]], Mapping[str, float]]

#: Keys of one step in the JSON and CSV outputs, in order.
STEP_KEYS: tuple[str, ...] = (
    "position",
    "attribute",
    "relevance",
    "redundancy",
    "score",
    "most_redundant_with",
    "max_redundancy",
)


@dataclass(frozen=True)
class SelectionStep:
    """One greedy step: the attribute chosen and the numbers that chose it (bits)."""

    position: int
    attribute: str
    #: I(attribute; target): the ranking's information gain.
    relevance: float
    #: Mean I(attribute; s) over the attributes chosen before it (0 for the first).
    redundancy: float
    #: The criterion's value: relevance − redundancy (MID) or relevance / redundancy (MIQ).
    score: float
    #: The earlier choice it shares most with, and that mutual information.
    most_redundant_with: str | None = None
    max_redundancy: float = 0.0

    def to_dict(self) -> dict[str, Any]:
        return {key: getattr(self, key) for key in STEP_KEYS}


def criterion_score(relevance: float, redundancy: float, criterion: str, first: bool) -> float:
    """The value a criterion gives a candidate; the first step is relevance alone.

    >>> criterion_score(0.5, 0.2, "mid", False), criterion_score(0.5, 0.25, "miq", False)
    (0.3, 2.0)
    """
    if first:
        return relevance
    if criterion == "mid":
        return relevance - redundancy
    if criterion == "miq":
        return relevance / max(redundancy, MIQ_FLOOR)
    raise _criterion_error(criterion)


def _criterion_error(criterion: str) -> SpecError:
    return SpecError.option("criterion",
                            f" must be one of {', '.join(CRITERIA)}, not {criterion!r}")


def greedy_mrmr(
    relevance: Mapping[str, float],
    k: int,
    redundancy_with: RedundancyLookup,
    *,
    criterion: str = "mid",
    order: Sequence[str] | None = None,
) -> list[SelectionStep]:
    """Choose up to ``k`` attributes of ``relevance`` greedily by ``criterion``.

    ``order`` (default: the mapping's order) breaks ties after relevance. ``redundancy_with``
    is asked once per step after the first, for the attribute just chosen against the
    remaining candidates.

    >>> rel = {"city": 0.50, "postcode": 0.48, "age": 0.20}
    >>> mi = {frozenset(("city", "postcode")): 0.45, frozenset(("city", "age")): 0.01,
    ...       frozenset(("postcode", "age")): 0.02}
    >>> lookup = lambda chosen, rest: {c: mi[frozenset((chosen, c))] for c in rest}
    >>> [s.attribute for s in greedy_mrmr(rel, 2, lookup)]
    ['city', 'age']
    """
    if criterion not in CRITERIA:
        raise _criterion_error(criterion)
    if k < 1:
        raise SpecError.option("k", f" must be at least 1, not {k}")
    candidates = list(order if order is not None else relevance)
    missing = [c for c in candidates if c not in relevance]
    if missing:
        raise SpecError("no relevance for: " + ", ".join(missing))
    position = {name: i for i, name in enumerate(candidates)}
    total: dict[str, float] = dict.fromkeys(candidates, 0.0)
    closest: dict[str, tuple[float, str | None]] = dict.fromkeys(candidates, (0.0, None))
    remaining = list(candidates)
    steps: list[SelectionStep] = []
    while remaining and len(steps) < k:
        chosen_count = len(steps)

        def key(name: str, chosen_count: int = chosen_count) -> tuple[float, float, int]:
            mean = total[name] / chosen_count if chosen_count else 0.0
            value = criterion_score(relevance[name], mean, criterion, chosen_count == 0)
            return (-value, -relevance[name], position[name])

        best = min(remaining, key=key)
        mean = total[best] / chosen_count if chosen_count else 0.0
        steps.append(SelectionStep(
            position=chosen_count + 1,
            attribute=best,
            relevance=relevance[best],
            redundancy=mean,
            score=criterion_score(relevance[best], mean, criterion, chosen_count == 0),
            most_redundant_with=closest[best][1],
            max_redundancy=closest[best][0],
        ))
        remaining.remove(best)
        if remaining and len(steps) < k:
            shared = redundancy_with(best, list(remaining))
            for name in remaining:
                value = float(shared[name])
                total[name] += value
                if closest[name][1] is None or value > closest[name][0]:
                    closest[name] = (value, best)
    return steps


def matrix_lookup(matrix: RedundancyMatrix) -> RedundancyLookup:
    """A :data:`RedundancyLookup` reading a measured matrix."""

    def lookup(chosen: str, rest: Sequence[str]) -> dict[str, float]:
        return {name: matrix.mutual_information(chosen, name) for name in rest}

    return lookup


@dataclass
class Selection:
    """The attributes chosen by greedy mRMR, in order, and the ranking they came from."""

    ranking: Ranking
    criterion: str
    k: int
    steps: list[SelectionStep]
    #: The attributes that could be chosen (the ranked ones, or the top --limit).
    candidates: tuple[str, ...]
    missing: str
    #: Every pair measured on the way (the full matrix when it was measured up front).
    matrix: RedundancyMatrix
    statements: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    #: Attributes left out of the candidates, with the reason (``include_flagged`` keeps them).
    left_out: dict[str, str] = field(default_factory=dict)

    @property
    def attributes(self) -> list[str]:
        """The chosen attributes, in the order they were chosen."""
        return [s.attribute for s in self.steps]

    def to_dict(self) -> dict[str, Any]:
        """One JSON-ready object: the request, then one entry per step."""
        return {
            **ranking_keys(self.ranking),
            "criterion": self.criterion,
            "k": self.k,
            "missing": self.missing,
            "candidates": list(self.candidates),
            "left_out": left_out_list(self.left_out),
            "selected": [s.to_dict() for s in self.steps],
        }


def select_on_engine(
    engine: Engine,
    spec: RankSpec,
    ranking: Ranking,
    k: int,
    *,
    criterion: str = "mid",
    candidates: Sequence[str] | None = None,
    matrix: RedundancyMatrix | None = None,
    batch_pairs: int = DEFAULT_BATCH_PAIRS,
    include_flagged: bool = False,
    left_out: Mapping[str, str] | None = None,
) -> Selection:
    """Greedy mRMR over ``candidates`` (default: the ranking's attributes, in its order),
    identifiers, constants and noise left out unless ``include_flagged``
    (:func:`~bitsift.analysis.redundancy.screen_candidates`); ``left_out``: those a caller
    already left out, for the note.

    With a measured ``matrix`` no statement is sent; otherwise each step measures the pairs
    between the attribute just chosen and the remaining candidates, in batches.
    """
    scores = {s.attribute: s for s in ranking.attributes}
    names = tuple(candidates if candidates is not None else scores)
    unknown = [n for n in names if n not in scores]
    if unknown:
        raise SpecError("not ranked: " + ", ".join(unknown))
    kept, screened = screen_candidates(ranking, names, include_flagged)
    names, left = tuple(kept), {**(left_out or {}), **screened}
    relevance = {n: scores[n].information_gain for n in names}
    measured = matrix if matrix is not None else RedundancyMatrix(attributes=names)
    measurer = PairMeasurer(engine, spec, ranking_cuts(ranking), batch_pairs, ranking)

    def lookup(chosen: str, rest: Sequence[str]) -> dict[str, float]:
        measurer.fill(measured, [(chosen, n) for n in rest])
        return {n: measured.mutual_information(chosen, n) for n in rest}

    steps = greedy_mrmr(relevance, k, lookup, criterion=criterion, order=names)
    notes = [n for n in (left_out_note(left), flagged_candidates_note(ranking, names)) if n]
    if k > len(names):
        notes.append(f"--k {k} is more than the {len(names)} candidate attribute(s): "
                     "every candidate is listed")
    return Selection(ranking=ranking, criterion=criterion, k=k, steps=steps, candidates=names,
                     missing=spec.options.missing, matrix=measured, notes=notes, left_out=left)


def select_attributes(source: Any, target: str, table: str | None = None, *, k: int,
                      criterion: str = "mid", batch_pairs: int = DEFAULT_BATCH_PAIRS,
                      include_flagged: bool = False, **options: Any) -> Selection:
    """Rank like :func:`bitsift.rank`, then choose ``k`` attributes by greedy mRMR.

    The candidates are the ranked attributes (with ``limit``: the top ``limit`` by ``sort``)
    but identifiers, constants and noise, unless ``include_flagged`` (see
    :func:`~bitsift.analysis.redundancy.screen_candidates`); :class:`DataError` when none is
    left. Takes the options of :func:`bitsift.rank`.

    >>> import duckdb
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE t AS SELECT i % 8 AS a, i % 4 AS a_copy, "
    ...                 "(i // 8) % 2 AS b, (i % 8) * 2 + (i // 8) % 2 AS y FROM range(64) r(i)")
    >>> s = select_attributes(con, target="y", table="t", k=2)
    >>> [(x.attribute, round(x.relevance, 3), round(x.redundancy, 3)) for x in s.steps]
    [('a', 3.0, 0.0), ('b', 1.0, 0.0)]
    """
    if criterion not in CRITERIA:
        raise _criterion_error(criterion)
    if k < 1:
        raise SpecError.option("k", f" must be at least 1, not {k}")
    with session_for(source, table) as session:
        spec, ranking = rank_on_session(session, target, options)
        kept, left = screen_candidates(ranking, [s.attribute for s in ranking.attributes],
                                       include_flagged)
        if not kept:
            raise DataError(f"no candidate attribute left to select from: {left_out_note(left)}")
        selection = select_on_engine(session.engine, spec, ranking, k, criterion=criterion,
                                     batch_pairs=batch_pairs, candidates=kept, left_out=left,
                                     include_flagged=include_flagged)
        record = session.record()
    return replace(record.stamp(selection), ranking=record.stamp(ranking))


def select_for_runs(
    source: Any,
    runs: Sequence[ProfiledRun],
    target: str,
    table: str | None = None,
    *,
    k: int,
    criterion: str = "mid",
    by: str | Iterable[str] = (),
    candidates: int = REPORT_CANDIDATES,
    batch_pairs: int = DEFAULT_BATCH_PAIRS,
    progress: Progress | None = None,
    include_flagged: bool = False,
    **options: Any,
) -> None:
    """Give each run of a report a :class:`Selection` with the full redundancy matrix of its
    top ``max(k, candidates)`` attributes (the report's heatmap), measured on the run's rows
    (its segment's, with ``by``) and bins.

    ``source``: the runs' own :class:`~bitsift.run.session.Session` where there is one (a report
    reuses it: no second open, no second resolve), else the source to open again.
    ``target``, ``table``, ``by`` and ``options`` are those the runs were ranked with; runs
    whose segment had nothing to rank keep ``selection = None``. The statements sent are
    appended to each run's ``ranking.statements``.
    """
    if criterion not in CRITERIA:
        raise _criterion_error(criterion)
    if k < 1:
        raise SpecError.option("k", f" must be at least 1, not {k}", flag="--select")
    if not runs:
        return
    say = progress or (lambda _message: None)
    spec_options = make_options(target, by=by, **options)
    with session_for(source, table) as session:
        engine = session.engine
        spec = session.prepare(spec_options)
        for run in runs:
            ranking = run.ranking
            if getattr(ranking, "status", "ok") != "ok" or not ranking.attributes:
                continue
            run_spec = spec
            if spec.by:  # the segment's rows: its values as a --where
                run_spec = replace(spec, by=(), where=segment_predicate(spec, ranking.segment
                                                                        or {}))
            kept, left = screen_candidates(ranking, [s.attribute for s in ranking.attributes],
                                           include_flagged)
            names = kept[: max(k, candidates)]
            pairs = len(names) * (len(names) - 1) // 2
            say(f"measuring {pairs} pair(s) of attributes"
                + (f" in {run.segment}" if run.segment else ""))
            matrix = measure_matrix(engine, run_spec, ranking, names, batch_pairs=batch_pairs)
            run.selection = select_on_engine(engine, run_spec, ranking, k, criterion=criterion,
                                             candidates=names, matrix=matrix, left_out=left,
                                             include_flagged=include_flagged)
        # Only this step's statements: a session shared with the ranking (report) has
        # already given the runs the ones before.
        statements = session.record().statements
    for run in runs:
        run.ranking = replace(run.ranking, statements=[*run.ranking.statements, *statements])
        if run.selection is not None:
            run.selection = replace(run.selection, ranking=run.ranking, statements=statements)
