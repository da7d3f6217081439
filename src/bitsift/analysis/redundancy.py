"""Redundancy between attributes: pairwise mutual information, computed in the database.

Two attributes that tell the same thing about the target (a city and its postcode, an amount and
its band) are redundant. For each pair (Xi, Xj) the database counts the joint table n(xi, xj)
(templates/pairs.sql.j2) and returns I(Xi; Xj) in bits and the symmetric uncertainty
2·I / (H(Xi) + H(Xj)); only one row per pair leaves it.

The pairs are measured on the rows the ranking used (the target present, ``--where`` true),
with the ranking's binning: numeric attributes are cut at the ranking's literal cut points.
Missing values follow ``--missing``: with ``category`` NULL is one more value of each attribute;
with ``drop`` a pair is measured on the rows where both attributes are present (so H(Xi) in the
pair may differ from the ranking's H(Xi), which used the rows where Xi alone is present).

Many pairs are split into batches of at most :data:`DEFAULT_BATCH_PAIRS` (one statement each):
with grouping sets a batch is one scan with one set per pair. A batch also holds at most
:data:`MAX_BATCH_CELLS` joint cells, estimated from the ranking (min(rows, distinct values of
one x of the other) per pair): high-cardinality pairs go in batches of their own, so the
engine's grouping memory is bounded by about that many cells, or one pair's rows.

Identifiers and constants (flags ``id_like``, ``constant``) and attributes whose relevance is at
or below noise (information gain 0 after snapping, or a G-test of independence not significant
at :data:`NOISE_P_VALUE`) are left out of redundancy and selection unless ``include_flagged``
(:func:`screen_candidates`): an identifier shares all of every other attribute's entropy and
would be chosen first, a constant and a noise column carry nothing to select.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from bitsift.engines.base import Engine
from bitsift.errors import SpecError
from bitsift.numformat import format_p_value
from bitsift.run.api import make_options, run_ranking
from bitsift.run.metrics import snap
from bitsift.run.result import AttributeScore, Ranking
from bitsift.run.session import Session, session_for
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.sqlstatements import pairs_statement, refuse_segments_and_weights

#: Pairs per statement: one grouping set each. Engines cap the number of grouping sets
#: (PostgreSQL at 4096) and a wide GROUP BY costs memory, so large matrices go in batches.
DEFAULT_BATCH_PAIRS = 64
#: Estimated joint cells per pairs statement (see the module docstring).
MAX_BATCH_CELLS = 2_000_000
#: Relevance at or below noise: a G-test p-value above this (or an IG of exactly 0).
NOISE_P_VALUE = 0.05
#: Flags that leave an attribute out of redundancy and selection unless ``include_flagged``.
LEFT_OUT_FLAGS: tuple[str, ...] = ("id_like", "constant")

#: The metrics a pair can be ordered by.
PAIR_METRICS: tuple[str, ...] = ("mutual_information", "symmetric_uncertainty")

#: Keys of one pair in the JSON and CSV outputs, in order.
PAIR_KEYS: tuple[str, ...] = (
    "first",
    "second",
    "mutual_information",
    "symmetric_uncertainty",
    "first_entropy",
    "second_entropy",
    "rows",
)


@dataclass(frozen=True)
class PairScore:
    """What two attributes share, on the rows where the pair was measured. Entropies in bits."""

    first: str
    second: str
    #: I(first; second) in bits: 0 for independent attributes, at most min(H(first), H(second)).
    mutual_information: float
    #: 2·I / (H(first) + H(second)): 0 (independent) to 1 (each determines the other).
    symmetric_uncertainty: float
    #: H(first) and H(second) over the pair's rows.
    first_entropy: float
    second_entropy: float
    #: Rows counted for the pair (fewer than the ranking's with --missing drop).
    rows: int

    def to_dict(self) -> dict[str, Any]:
        return {key: getattr(self, key) for key in PAIR_KEYS}


def all_pairs(names: Sequence[str]) -> list[tuple[str, str]]:
    """Every unordered pair of ``names``, in the order of ``names``.

    >>> all_pairs(["a", "b", "c"])
    [('a', 'b'), ('a', 'c'), ('b', 'c')]
    """
    return [(a, b) for i, a in enumerate(names) for b in names[i + 1:]]


def batches(pairs: Sequence[tuple[str, str]], size: int) -> Iterator[list[tuple[str, str]]]:
    """``pairs`` in consecutive chunks of at most ``size``.

    >>> [len(b) for b in batches(all_pairs("abcdefg"), 8)]
    [8, 8, 5]
    """
    if size < 1:
        raise SpecError.option("batch_pairs", f" must be at least 1, not {size}")
    for start in range(0, len(pairs), size):
        yield list(pairs[start:start + size])


def batches_within(pairs: Sequence[tuple[str, str]], size: int, cells: Mapping[str, int],
                   rows: int, budget: int | None = None) -> Iterator[list[tuple[str, str]]]:
    """``pairs`` in consecutive batches of at most ``size`` pairs and about ``budget`` joint
    cells, a pair's cells estimated as min(rows, cells[a] * cells[b]); a pair over the budget
    goes alone. ``budget``: default :data:`MAX_BATCH_CELLS`.

    >>> values = {"id": 10_000, "a": 3, "b": 4, "c": 5}
    >>> [len(b) for b in batches_within(all_pairs(["id", "a", "b", "c"]), 64, values,
    ...                                 rows=10_000, budget=15_000)]
    [1, 1, 4]
    """
    if size < 1:
        raise SpecError.option("batch_pairs", f" must be at least 1, not {size}")
    cap = MAX_BATCH_CELLS if budget is None else budget
    batch: list[tuple[str, str]] = []
    used = 0
    for pair in pairs:
        estimate = min(max(rows, 1), max(cells.get(pair[0], 1), 1) * max(cells.get(pair[1], 1), 1))
        if batch and (len(batch) >= size or used + estimate > cap):
            yield batch
            batch, used = [], 0
        batch.append(pair)
        used += estimate
    if batch:
        yield batch


def left_out_reason(score: AttributeScore) -> str | None:
    """Why an attribute is left out of redundancy and selection (None: it is a candidate)."""
    for flag in LEFT_OUT_FLAGS:
        if flag in score.flags:
            return flag
    if score.information_gain == 0:
        return "no information"
    if score.p_value is not None and score.p_value > NOISE_P_VALUE:
        return f"not significant, p = {format_p_value(score.p_value)}"
    return None


def screen_candidates(ranking: Ranking, names: Sequence[str], include_flagged: bool,
                      ) -> tuple[list[str], dict[str, str]]:
    """``names`` without the identifiers, constants and noise (see the module docstring), and
    the reason each one left out was; everything kept with ``include_flagged``."""
    if include_flagged:
        return list(names), {}
    scores = {s.attribute: s for s in ranking.attributes}
    reasons = {n: scores[n] for n in names if n in scores}
    left = {n: why for n, s in reasons.items() if (why := left_out_reason(s)) is not None}
    return [n for n in names if n not in left], left


def left_out_note(left: Mapping[str, str]) -> str | None:
    """The one line saying which attributes were left out and how to keep them."""
    if not left:
        return None
    listed = ", ".join(f"{name} ({why})" for name, why in left.items())
    return (f"left out {len(left)} attribute(s) flagged id_like or constant, or at noise level "
            f"(G-test p > {NOISE_P_VALUE} or no information): {listed}; "
            "--include-flagged keeps them")


def left_out_list(left: Mapping[str, str]) -> list[dict[str, str]]:
    """``left_out`` in JSON: one ``{"attribute", "reason"}`` per attribute left out."""
    return [{"attribute": name, "reason": why} for name, why in left.items()]


@dataclass
class RedundancyMatrix:
    """Pairwise mutual information among ``attributes`` (every pair, or those measured)."""

    attributes: tuple[str, ...]
    pairs: dict[frozenset[str], PairScore] = field(default_factory=dict)

    def pair(self, first: str, second: str) -> PairScore:
        """The score of a pair, in either order; KeyError when it was not measured."""
        return self.pairs[frozenset((first, second))]

    def mutual_information(self, first: str, second: str) -> float:
        """I(first; second) in bits."""
        return self.pair(first, second).mutual_information

    def matrix(self, metric: str = "mutual_information") -> list[list[float | None]]:
        """A square, symmetric table in the order of :attr:`attributes`; None on the diagonal
        and for pairs not measured."""
        if metric not in PAIR_METRICS:
            raise SpecError(f"unknown pair metric {metric!r}; one of {', '.join(PAIR_METRICS)}")
        rows: list[list[float | None]] = []
        for a in self.attributes:
            row: list[float | None] = []
            for b in self.attributes:
                found = self.pairs.get(frozenset((a, b))) if a != b else None
                row.append(getattr(found, metric) if found is not None else None)
            rows.append(row)
        return rows

    def ordered(self, by: str = "mutual_information") -> list[PairScore]:
        """Every measured pair, most redundant first (ties by the attributes' order)."""
        if by not in PAIR_METRICS:
            raise SpecError(f"unknown pair metric {by!r}; one of {', '.join(PAIR_METRICS)}")
        position = {name: i for i, name in enumerate(self.attributes)}
        return sorted(self.pairs.values(),
                      key=lambda p: (-getattr(p, by), position[p.first], position[p.second]))

    def add(self, scores: Iterable[PairScore]) -> None:
        for score in scores:
            self.pairs[frozenset((score.first, score.second))] = score


def _float(value: Any) -> float:
    number = float(value or 0.0)
    return number if math.isfinite(number) else 0.0


def read_pairs(records: Sequence[Mapping[str, Any]],
               pairs: Sequence[tuple[str, str]]) -> list[PairScore]:
    """Turn the rows of :func:`pairs_statement` into one :class:`PairScore` per pair.

    A pair without rows (no row has both values under --missing drop) shares nothing.
    """
    by_index = {int(r["pair_index"]): r for r in records}
    scores = []
    for index, (first, second) in enumerate(pairs, start=1):
        row = by_index.get(index)
        if row is None:
            scores.append(PairScore(first, second, 0.0, 0.0, 0.0, 0.0, 0))
            continue
        # Snapped as the ranking's metrics are (metrics.snap): residue of a pair sharing
        # nothing is 0 in both fields, and ties between pairs are exact.
        mutual = snap(_float(row["mutual_information"]))
        scores.append(PairScore(
            first=first,
            second=second,
            mutual_information=mutual,
            symmetric_uncertainty=snap(_float(row["symmetric_uncertainty"])) if mutual else 0.0,
            first_entropy=snap(_float(row["left_entropy"])),
            second_entropy=snap(_float(row["right_entropy"])),
            rows=int(row["rows_used"] or 0),
        ))
    return scores


#: Flags that make an attribute a poor candidate for pairing and selection, and why.
_CANDIDATE_FLAGS: dict[str, str] = {
    "id_like": "an identifier shares all of every other attribute's entropy",
    "constant": "a constant shares nothing with anything",
    "near_perfect": "a possible target leak is the most relevant of all",
}


def flagged_candidates_note(ranking: Ranking, names: Sequence[str]) -> str | None:
    """A note naming the candidates the ranking flagged id_like, constant or near_perfect."""
    wanted = set(names)
    found = {flag: [s.attribute for s in ranking.attributes
                    if s.attribute in wanted and flag in s.flags] for flag in _CANDIDATE_FLAGS}
    parts = [f"{flag} {', '.join(found[flag])} ({why})"
             for flag, why in _CANDIDATE_FLAGS.items() if found[flag]]
    if not parts:
        return None
    return "flagged candidates: " + "; ".join(parts) + ". Consider --exclude."


def ranking_keys(ranking: Ranking) -> dict[str, Any]:
    """The JSON keys that name the ranking a redundancy or selection result builds on."""
    return {"target": ranking.target, "table": ranking.table, "rows": ranking.rows}


def ranking_cuts(ranking: Ranking) -> dict[str, list[float]]:
    """The cut points of the ranking's numeric attributes, by name."""
    return {s.attribute: list(s.cuts) for s in ranking.attributes if s.cuts is not None}


@dataclass(frozen=True)
class PairMeasurer:
    """Measures pairs of a ranking's attributes on an open engine, binned as the ranking binned
    them, at most ``batch_pairs`` pairs per statement (and, given the ``ranking`` for the
    attributes' distinct values, about :data:`MAX_BATCH_CELLS` joint cells)."""

    engine: Engine
    spec: RankSpec
    #: The ranking's cut points of its numeric attributes (:func:`ranking_cuts`).
    cuts: Mapping[str, Sequence[float]]
    batch_pairs: int = DEFAULT_BATCH_PAIRS
    ranking: Ranking | None = None

    def fill(self, matrix: RedundancyMatrix, pairs: Iterable[tuple[str, str]]) -> None:
        """Measure those of ``pairs`` that ``matrix`` lacks, and add them to it."""
        needed = [p for p in pairs if frozenset(p) not in matrix.pairs]
        if not needed:
            return
        ranking = self.ranking
        chunks = (batches(needed, self.batch_pairs) if ranking is None else
                  batches_within(needed, self.batch_pairs,
                                 {s.attribute: s.distinct + 1 for s in ranking.attributes},
                                 ranking.rows))
        for batch in chunks:
            statement = pairs_statement(self.spec, self.engine.caps, self.cuts, batch)
            matrix.add(read_pairs(self.engine.fetch(statement.sql).records(), batch))


def measure_matrix(
    engine: Engine,
    spec: RankSpec,
    ranking: Ranking,
    attributes: Sequence[str] | None = None,
    *,
    batch_pairs: int = DEFAULT_BATCH_PAIRS,
) -> RedundancyMatrix:
    """Every pair among ``attributes`` (default: the ranking's, in its order), binned as ranked."""
    names = tuple(attributes if attributes is not None else
                  [s.attribute for s in ranking.attributes])
    matrix = RedundancyMatrix(attributes=names)
    PairMeasurer(engine, spec, ranking_cuts(ranking), batch_pairs, ranking).fill(
        matrix, all_pairs(names))
    return matrix


@dataclass
class Redundancy:
    """The pairwise redundancy of a table's attributes, beside their ranking."""

    ranking: Ranking
    matrix: RedundancyMatrix
    missing: str
    #: Every statement sent (the ranking's and the pairs'), for --debug.
    statements: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    #: Attributes left out of the pairs, with the reason (see :func:`screen_candidates`).
    left_out: dict[str, str] = field(default_factory=dict)

    def to_dict(self, by: str = "mutual_information") -> dict[str, Any]:
        """One JSON-ready object: the attributes with their relevance, the attributes left out
        of the pairs (``left_out``: attribute and reason), and every pair."""
        ranking = self.ranking
        return {
            **ranking_keys(ranking),
            "missing": self.missing,
            "attributes": [
                {"attribute": s.attribute, "kind": s.kind,
                 "information_gain": s.information_gain,
                 "attribute_entropy": s.attribute_entropy}
                for s in ranking.attributes
            ],
            "left_out": left_out_list(self.left_out),
            "pairs": [p.to_dict() for p in self.matrix.ordered(by)],
        }


def rank_on_session(session: Session, target: str, options: dict[str, Any],
                    ) -> tuple[RankSpec, Ranking]:
    """Resolve the options on ``session`` and rank: the start of redundancy and selection."""
    spec = session.resolve(make_options(target, **options))
    refuse_segments_and_weights(spec)
    session.set_timeout(spec.options.timeout)
    return spec, run_ranking(session.engine, spec)


def redundancy(source: Any, target: str, table: str | None = None, *,
               batch_pairs: int = DEFAULT_BATCH_PAIRS, include_flagged: bool = False,
               **options: Any) -> Redundancy:
    """Rank like :func:`bitsift.rank`, then measure every pair of the ranked attributes,
    identifiers, constants and noise left out unless ``include_flagged`` (see
    :func:`screen_candidates`).

    With ``limit``, only the top ``limit`` attributes (by ``sort``) are paired. Takes the
    options of :func:`bitsift.rank`.

    >>> import duckdb
    >>> con = duckdb.connect()
    >>> _ = con.execute("CREATE TABLE t AS SELECT i % 4 AS a, i % 2 AS b, i % 3 AS c, "
    ...                 "i % 2 = 0 AS y FROM range(120) r(i)")
    >>> r = redundancy(con, target="y", table="t")
    >>> [(p.first, p.second, round(p.mutual_information, 6)) for p in r.matrix.ordered()]
    [('a', 'b', 1.0)]
    >>> r.left_out  # c tells nothing about y
    {'c': 'no information'}
    """
    with session_for(source, table) as session:
        spec, ranking = rank_on_session(session, target, options)
        names, left = screen_candidates(ranking, [s.attribute for s in ranking.attributes],
                                        include_flagged)
        matrix = measure_matrix(session.engine, spec, ranking, names, batch_pairs=batch_pairs)
        record = session.record()
    notes = [n for n in (left_out_note(left), flagged_candidates_note(ranking, names)) if n]
    return record.stamp(Redundancy(ranking=record.stamp(ranking), matrix=matrix,
                                   missing=spec.options.missing, notes=notes, left_out=left))
