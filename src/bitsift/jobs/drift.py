"""Drift between two runs of a job, read from the history table.

An attribute drifts when its information gain moves (by default: when the two runs' intervals
of the gain do not overlap; with ``ig_rule="change"``, or for rows without an interval, by more
than ``ig_change`` bits), its place in the ranking by more than ``rank_change`` positions,
when it appears or disappears, or when it gains or loses a trust flag. Rankings that appear
or disappear between runs are reported too. Cut points that moved (history of schema version 3)
are a note, not drift: quantile bins follow the data.
"""

from __future__ import annotations

import datetime as _dt
import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import asdict, dataclass, field
from typing import Any

from bitsift import jsonout
from bitsift.errors import BitsiftError, Option, Problem, SpecError, suggest
from bitsift.jobs.history import Destination, HistoryError, RunInfo
from bitsift.jobs.history_open import open_store
from bitsift.names import one_line
from bitsift.numformat import format_bits
from bitsift.output.texttable import aligned

#: Exit code of ``bitsift drift`` when something drifted, so schedulers can alert.
DRIFT_EXIT_CODE = 3
#: Metric differences below this are rounding, never drift: well above the resolution that
#: rankings are snapped to (:data:`bitsift.run.metrics.RESOLUTION_DIGITS`), so history written
#: before snapping compares quietly too. Attributes whose sort metric differs by no more
#: than this are ties: their order among themselves is never a rank change.
FLOAT_NOISE = 1e-9
#: How an information gain move is judged: ``interval`` (the runs' intervals do not overlap)
#: or ``change`` (it moved by more than ``ig_change`` bits).
IG_RULES: tuple[str, ...] = ("interval", "change")


@dataclass(frozen=True)
class DriftThresholds:
    """How far an attribute may move before it counts as drift (strictly more than this)."""

    #: Absolute change of information gain, in bits.
    ig_change: float = 0.01
    #: Change of place in the ranking, in positions.
    rank_change: int = 3
    #: One of :data:`IG_RULES`; rows without an interval (history of schema version 1,
    #: fractional weights) fall back to ``ig_change`` under ``interval``.
    ig_rule: str = "interval"

    def __post_init__(self) -> None:
        if self.ig_rule not in IG_RULES:
            raise SpecError.option("ig_rule", f" must be one of {', '.join(IG_RULES)}, "
                                   f"not {self.ig_rule!r}")
        if self.ig_change < 0:
            raise SpecError.option("ig_change", f" must be at least 0, not {self.ig_change}")
        if self.rank_change < 0:
            raise SpecError.option("rank_change", f" must be at least 0, not {self.rank_change}")


@dataclass(frozen=True)
class Change:
    """One finding. ``kind`` is one of ``information_gain``, ``rank``, ``appeared``,
    ``disappeared``, ``flag_gained``, ``flag_lost``, ``ranking_appeared``,
    ``ranking_disappeared``."""

    kind: str
    ranking: str
    segment: str
    attribute: str | None
    before: Any = None
    after: Any = None


@dataclass
class DriftReport:
    """The changes between an older and a newer run of one job."""

    job: str
    old: RunInfo | None
    new: RunInfo | None
    thresholds: DriftThresholds
    changes: list[Change] = field(default_factory=list)
    #: Things worth knowing that are not drift (e.g. a ranking's settings changed).
    notes: list[str] = field(default_factory=list)
    #: Drift between two windows of stored counts (``drift --from-counts``): ``new`` and
    #: ``old``, each its ``table`` (with the window) and ``rows``; no runs then.
    windows: dict[str, dict[str, Any]] | None = None

    @property
    def drifted(self) -> bool:
        return bool(self.changes)

    def to_dict(self) -> dict[str, Any]:
        def run(info: RunInfo | None) -> dict[str, Any] | None:
            if info is None:
                return None
            return {"run_id": info.run_id, "run_at": _stamp(info.run_at), "rows": info.rows}

        windows = {"windows": self.windows} if self.windows is not None else {}
        return {
            "job": self.job,
            **windows,
            "old_run": run(self.old),
            "new_run": run(self.new),
            "thresholds": asdict(self.thresholds),
            "drifted": self.drifted,
            "changes": [asdict(c) for c in self.changes],
            "notes": list(self.notes),
        }


def _stamp(moment: _dt.datetime) -> str:
    return moment.strftime("%Y-%m-%d %H:%M:%S UTC")


def _flags(text: str | None) -> set[str]:
    return {f for f in (text or "").split(",") if f}


def _key(row: Mapping[str, Any]) -> tuple[str, str, str]:
    return (row["ranking"], row["segment"] or "", row["attribute"])


def _sort_metric(row: Mapping[str, Any]) -> str:
    """The metric the ranking was sorted by (its options' ``sort``; IG when absent)."""
    try:
        sort = json.loads(row.get("options") or "{}").get("sort")
    except (ValueError, AttributeError):
        sort = None
    return sort if isinstance(sort, str) and row.get(sort) is not None else "information_gain"


def _tie_spans(rows: Mapping[tuple[str, str, str], Mapping[str, Any]]
               ) -> dict[tuple[str, str, str], tuple[int, int]]:
    """Per attribute, the lowest and highest position held by its ties (itself and the
    attributes of its ranking whose sort metric is within :data:`FLOAT_NOISE`, chained)."""
    rankings: dict[tuple[str, str], list[tuple[float, tuple[str, str, str]]]] = {}
    for key, row in rows.items():
        value = float(row.get(_sort_metric(row)) or 0.0)
        rankings.setdefault(key[:2], []).append((value, key))
    spans: dict[tuple[str, str, str], tuple[int, int]] = {}
    for members in rankings.values():
        members.sort()
        cluster: list[tuple[str, str, str]] = []
        for i, (value, key) in enumerate(members):
            cluster.append(key)
            if i + 1 == len(members) or members[i + 1][0] - value > FLOAT_NOISE:
                positions = [int(rows[k]["position"]) for k in cluster]
                spans.update(dict.fromkeys(cluster, (min(positions), max(positions))))
                cluster = []
    return spans


def _span_gap(before: tuple[int, int], after: tuple[int, int]) -> int:
    """How many places apart two position spans are (0 when they overlap)."""
    return max(0, after[0] - before[1], before[0] - after[1])


def compare(old_rows: Iterable[Mapping[str, Any]], new_rows: Iterable[Mapping[str, Any]],
            thresholds: DriftThresholds | None = None) -> tuple[list[Change], list[str]]:
    """Changes and notes between two runs' history rows (as dicts with the table's columns)."""
    limits = thresholds or DriftThresholds()
    old = {_key(r): r for r in old_rows}
    new = {_key(r): r for r in new_rows}
    old_rankings = {(k[0], k[1]) for k in old}
    new_rankings = {(k[0], k[1]) for k in new}
    changes: list[Change] = []
    notes: list[str] = []
    without_interval: set[str] = set()
    for ranking, segment in sorted(old_rankings - new_rankings):
        changes.append(Change("ranking_disappeared", ranking, segment, None))
    for ranking, segment in sorted(new_rankings - old_rankings):
        changes.append(Change("ranking_appeared", ranking, segment, None))
    for ranking, segment in sorted(old_rankings & new_rankings):
        before_options = {r["options"] for k, r in old.items() if k[:2] == (ranking, segment)}
        after_options = {r["options"] for k, r in new.items() if k[:2] == (ranking, segment)}
        if before_options != after_options:
            notes.append(f"the settings of ranking {ranking!r} changed between the runs; "
                         "moves may come from that rather than from the data")
    spans = (_tie_spans(old), _tie_spans(new))
    for key in sorted(old.keys() | new.keys()):
        ranking, segment, attribute = key
        if (ranking, segment) not in old_rankings or (ranking, segment) not in new_rankings:
            continue
        before, after = old.get(key), new.get(key)
        if before is None:
            assert after is not None
            changes.append(Change("appeared", ranking, segment, attribute, None,
                                  _summary(after)))
            continue
        if after is None:
            changes.append(Change("disappeared", ranking, segment, attribute, _summary(before)))
            continue
        changes += _attribute_changes(key, before, after, limits,
                                      _span_gap(spans[0][key], spans[1][key]))
        if limits.ig_rule == "interval" and not (_interval(before) and _interval(after)):
            without_interval.add(ranking)
    notes += _moved_cuts(old, new)
    if without_interval:
        notes.append(f"ranking(s) {', '.join(repr(r) for r in sorted(without_interval))}: some "
                     "rows have no interval of the gain (history written before schema "
                     "version 2, or fractional weights); their gains are compared with "
                     f"--ig-change ({limits.ig_change:g} bits) instead")
    return changes, notes


def _moved_cuts(old: Mapping[tuple[str, str, str], Mapping[str, Any]],
                new: Mapping[tuple[str, str, str], Mapping[str, Any]]) -> list[str]:
    """One note per ranking whose attributes' cut points differ between the runs (rows
    without them, NULL, compare as unknown): their gains were measured on other bins."""
    moved: dict[str, set[str]] = {}
    for key in old.keys() & new.keys():
        before, after = old[key].get("cut_points"), new[key].get("cut_points")
        if before is not None and after is not None and before != after:
            moved.setdefault(key[0], set()).add(key[2])
    return [f"ranking {ranking!r}: the cut points of {', '.join(sorted(names))} moved between "
            "the runs; their gains compare different bins"
            for ranking, names in sorted(moved.items())]


def _interval(row: Mapping[str, Any]) -> tuple[float, float] | None:
    """The row's interval of the gain, or None (NULL, or a row read without the column)."""
    low, high = row.get("information_gain_low"), row.get("information_gain_high")
    if low is None or high is None:
        return None
    return float(low), float(high)


def _gain_moved(before: Mapping[str, Any], after: Mapping[str, Any],
                limits: DriftThresholds) -> bool:
    """Whether the gain moved beyond the rule: intervals apart (both rows have one), else by
    more than ``ig_change``. Differences of rounding (:data:`FLOAT_NOISE`) never count."""
    ig_before, ig_after = float(before["information_gain"]), float(after["information_gain"])
    if abs(ig_after - ig_before) <= FLOAT_NOISE:
        return False
    old_span, new_span = _interval(before), _interval(after)
    if limits.ig_rule == "interval" and old_span is not None and new_span is not None:
        return (old_span[1] + FLOAT_NOISE < new_span[0]
                or new_span[1] + FLOAT_NOISE < old_span[0])
    return abs(ig_after - ig_before) > limits.ig_change + FLOAT_NOISE


def _summary(row: Mapping[str, Any]) -> dict[str, Any]:
    return {"position": row["position"], "information_gain": row["information_gain"]}


def _attribute_changes(key: tuple[str, str, str], before: Mapping[str, Any],
                       after: Mapping[str, Any], limits: DriftThresholds,
                       places_moved: int) -> list[Change]:
    ranking, segment, attribute = key
    changes = []
    ig_before, ig_after = float(before["information_gain"]), float(after["information_gain"])
    # Parallel aggregation sums in varying order: identical data can differ in the last bits.
    if _gain_moved(before, after, limits):
        changes.append(Change("information_gain", ranking, segment, attribute, ig_before,
                              ig_after))
    # Places moved beyond its ties: tied attributes may come in any order on old history.
    if places_moved > limits.rank_change:
        changes.append(Change("rank", ranking, segment, attribute, int(before["position"]),
                              int(after["position"])))
    flags_before, flags_after = _flags(before["flags"]), _flags(after["flags"])
    for flag in sorted(flags_after - flags_before):
        changes.append(Change("flag_gained", ranking, segment, attribute, None, flag))
    for flag in sorted(flags_before - flags_after):
        changes.append(Change("flag_lost", ranking, segment, attribute, flag, None))
    return changes


def _pick_runs(runs: Sequence[RunInfo], old: str | None, new: str | None,
               job: str) -> tuple[RunInfo | None, RunInfo | None]:
    by_id = {r.run_id: r for r in runs}
    for wanted in (old, new):
        if wanted is not None and wanted not in by_id:
            known = ", ".join(r.run_id for r in runs[:5]) or "none"
            raise BitsiftError(f"job {job!r} has no run {wanted!r} (newest runs: {known})")
    if old is not None and new is None:
        raise SpecError(problems=[Problem("old", (
            Option("old"), " needs ", Option("new"), ": name both runs, or only ", Option("new"),
            ", or neither"))])
    if new is None:
        return (runs[1] if len(runs) > 1 else None), (runs[0] if runs else None)
    newer = by_id[new]
    if old is not None:
        return by_id[old], newer
    earlier = [r for r in runs if (r.run_at, r.run_id) < (newer.run_at, newer.run_id)]
    return (earlier[0] if earlier else None), newer


def drift(destination: Destination, job: str, *, old: str | None = None, new: str | None = None,
          thresholds: DriftThresholds | None = None) -> DriftReport:
    """Compare two runs of ``job`` in the history at ``destination``.

    Without run ids: the two newest runs. With ``new`` only: that run and the one before it.
    One run gives an empty report with a note. A missing table, a job without runs and a
    ``new`` run with none before it raise :class:`BitsiftError`: a monitor that found nothing
    to compare must not report "no drift".
    """
    limits = thresholds or DriftThresholds()
    with open_store(destination) as store:
        if not store.check():
            raise HistoryError(_nothing_there(destination, "table", store.tables()))
        runs = store.runs(job)
        if not runs:
            raise HistoryError(_nothing_there(destination, "job", store.jobs(), job))
        older, newer = _pick_runs(runs, old, new, job)
        if older is None and new is not None:
            raise BitsiftError(f"run {new!r} is the oldest run of job {job!r} in "
                               f"{destination.table}: there is no earlier run to compare it with")
        report = DriftReport(job=job, old=older, new=newer, thresholds=limits)
        if older is None or newer is None:
            report.notes.append(
                f"job {job!r} has {len(runs)} run{'s' if len(runs) != 1 else ''} in "
                f"{destination.table}: nothing to compare yet"
            )
            return report
        rows = store.read(job, [older.run_id, newer.run_id])
    report.changes, report.notes = compare(
        [r for r in rows if r["run_id"] == older.run_id],
        [r for r in rows if r["run_id"] == newer.run_id],
        limits,
    )
    return report


#: At most this many existing jobs or tables are named in the error.
LISTED_NAMES = 10


def _nothing_there(destination: Destination, what: str, existing: Sequence[str],
                   job: str = "") -> str:
    """The error line for a missing results table (``what="table"``) or a job without runs."""
    where = f"{destination.table} in {destination.display}"
    if what == "table":
        head = f"results table {where} does not exist: no run has written to it"
        pool = [name for name in existing if name != destination.table]
    else:
        head = f"job {job!r} has no runs in results table {where}{suggest(job, existing)}"
        pool = list(existing)
    if not pool:
        return f"{head}; it has no {what}s"
    shown = ", ".join(repr(name) for name in pool[:LISTED_NAMES])
    more = f" and {len(pool) - LISTED_NAMES} more" if len(pool) > LISTED_NAMES else ""
    return f"{head}; {what}s there: {shown}{more}"


_LABELS = {
    "information_gain": "information gain",
    "rank": "rank",
    "appeared": "appeared",
    "disappeared": "disappeared",
    "flag_gained": "flag gained",
    "flag_lost": "flag lost",
    "ranking_appeared": "ranking appeared",
    "ranking_disappeared": "ranking disappeared",
}


def _place_and_gain(when: str, score: Mapping[str, Any]) -> str:
    return f"{when} #{score['position']}, IG {format_bits(score['information_gain'])}"


def _describe(change: Change) -> str:
    if change.kind == "information_gain":
        delta = change.after - change.before
        return f"{format_bits(change.before)} -> {format_bits(change.after)} bits ({delta:+.4f})"
    if change.kind == "rank":
        return f"#{change.before} -> #{change.after}"
    if change.kind == "appeared":
        return _place_and_gain("now", change.after)
    if change.kind == "disappeared":
        return _place_and_gain("was", change.before)
    if change.kind == "flag_gained":
        return str(change.after)
    if change.kind == "flag_lost":
        return str(change.before)
    return ""


def render_text(report: DriftReport) -> str:
    """A plain-text report: the two runs, one line per change, and the verdict."""
    lines = []
    if report.old is not None and report.new is not None:
        lines.append(f"job {report.job}: run {report.new.run_id} ({_stamp(report.new.run_at)}) "
                     f"against run {report.old.run_id} ({_stamp(report.old.run_at)})")
    if report.windows is not None:
        new, old = report.windows["new"], report.windows["old"]
        lines.append(one_line(f"{new['table']}, {new['rows']:,} rows, against "
                              f"{old['table']}, {old['rows']:,} rows"))
    limits = report.thresholds
    gain_rule = (f"information gain moves > {limits.ig_change:g} bits"
                 if limits.ig_rule == "change" else
                 "information gain intervals apart (without intervals: moves > "
                 f"{limits.ig_change:g} bits)")
    lines.append(f"thresholds: {gain_rule}, rank moves > {limits.rank_change} places")
    if report.changes:
        rows = [
            (c.ranking + (f" {c.segment}" if c.segment else ""), c.attribute or "-",
             _LABELS[c.kind], _describe(c))
            for c in report.changes
        ]
        header = ("ranking", "attribute", "change", "detail")
        lines += ["", *aligned([header, *rows], left=range(len(header))), ""]
    lines += [f"note: {n}" for n in report.notes]
    count = len(report.changes)
    if report.drifted:
        lines.append(f"DRIFT: {count} change{'s' if count != 1 else ''} beyond the thresholds "
                     f"(exit code {DRIFT_EXIT_CODE})")
    else:
        lines.append("no drift beyond the thresholds")
    return "\n".join(lines) + "\n"


def render_json(report: DriftReport) -> str:
    """The report as JSON (see :meth:`DriftReport.to_dict`)."""
    return jsonout.dumps(report.to_dict(), indent=2) + "\n"
