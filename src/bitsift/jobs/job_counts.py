"""The ``[counts]`` section of a job file (docs/scheduled-runs.md, docs/stored-counts.md):
``bitsift run`` keeps stored counts of the job's source as well as, or instead of, its
history. The keys mirror ``bitsift counts``; table, target and the selection and binning keys
may come from ``[defaults]`` as the rankings' do::

    [counts]
    partition = "sown_on"                    # required
    grain = "day"                            # day, week, month or value
    into = "data/counts.duckdb"              # default: [results] destination
    counts_table = "bitsift_counts"
    exclude = ["tray_id"]
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

from bitsift.errors import BitsiftError, Problem, SourceError
from bitsift.jobs.counts_build import CountsPlan, plan_counts
from bitsift.jobs.history import Destination
from bitsift.jobs.job_keys import _keyed, _type_problem
from bitsift.jobs.job_lines import LineMap, _at
from bitsift.run import api
from bitsift.run.counts_meta import DEFAULT_COUNTS_TABLE
from bitsift.run.session import Session
from bitsift.spec.rankspec import Thresholds
from bitsift.sql.counts_sql import GRAINS

#: The keys of ``bitsift counts`` that decide what is counted (also read from [defaults]).
COUNTED_KEYS: tuple[str, ...] = (
    "table", "target", "attributes", "exclude", "categorical", "numeric", "bins", "binning",
    "binning_for", "date_part", "where", "high_cardinality", "timeout",
)
#: Every key of [counts].
COUNTS_KEYS: tuple[str, ...] = ("partition", "grain", "into", "counts_table", "recount_from",
                                *COUNTED_KEYS)


class _Reader(Protocol):
    """What [counts] needs of the job file's reader (:class:`bitsift.jobs.jobfile._Reader`)."""

    data: dict[str, Any]
    lines: LineMap
    problems: list[Problem]

    def problem(self, line: int | None, message: str) -> None: ...

    def unknown_keys(self, table: Mapping[str, Any], allowed: Sequence[str], section: str,
                     index: int, where: str) -> None: ...

    def location(self, text: str) -> str: ...

    def table_problems(self, table: Any, source: str | None, line: int | None,
                       where: str) -> None: ...


@dataclass(frozen=True)
class JobCounts:
    """A job's ``[counts]``: what is counted, where it goes, where each key is written."""

    target: str
    table: str | None
    partition: str
    grain: str
    into: Destination
    recount_from: str | int | None
    #: Keyword options for :func:`bitsift.jobs.counts_build.plan_counts` (the selection and
    #: binning keys, ``thresholds`` for ``high_cardinality``).
    options: Mapping[str, Any]
    line: int | None = None
    key_lines: Mapping[str, int | None] = field(default_factory=dict)

    def line_of(self, key: str) -> int | None:
        """The line setting ``key`` (in [counts] or [defaults]), else the section's line."""
        return self.key_lines.get(key) or self.line

    def plan(self, session: Session) -> CountsPlan:
        """The run's counts checked against the open source and the destination."""
        return plan_counts(session, target=self.target, partition=self.partition,
                           into=self.into.location, grain=self.grain,
                           counts_table=self.into.table, recount_from=self.recount_from,
                           **self.options)


def read_counts(reader: _Reader, defaults: Mapping[str, Any], source: str | None,
                results: Destination | None) -> JobCounts | None:
    """The ``[counts]`` section checked (None when absent or invalid; problems go to
    ``reader``)."""
    section = reader.data.get("counts")
    if section is None:
        return None
    header = reader.lines.of("counts", 0) or reader.lines.of("", 0, "counts")
    if not isinstance(section, dict):
        reader.problem(header, "counts must be a table: [counts] with partition and into")
        return None
    before = len(reader.problems)
    reader.unknown_keys(section, COUNTS_KEYS, "counts", 0, "[counts]")
    merged = {**{k: v for k, v in defaults.items() if k in COUNTED_KEYS},
              **{k: v for k, v in section.items() if k in COUNTS_KEYS}}
    key_lines = {k: (reader.lines.of("counts", 0, k) if k in section
                     else reader.lines.of("defaults", 0, k)) for k in merged}
    where = "counts: "
    typed: dict[str, Any] = {}
    for key, value in merged.items():
        message = _counts_type_problem(key, value) if key not in COUNTED_KEYS else (
            _type_problem(key, value))
        if message:
            reader.problem(key_lines[key], where + message)
        else:
            typed[key] = value
    for required in ("partition", "target"):
        if required not in merged:
            reader.problem(header, f"{where}{required} is required"
                           + (" (in [counts] or in [defaults])" if required == "target" else ""))
    grain = typed.get("grain", "day")
    if grain not in GRAINS:
        reader.problem(key_lines.get("grain") or header,
                       f"{where}grain must be one of {', '.join(GRAINS)}, not {grain!r}")
    into = _into(reader, typed, results, key_lines.get("into") or header)
    reader.table_problems(typed.get("table"), source, key_lines.get("table") or header, where)
    options = {k: v for k, v in typed.items()
               if k in COUNTED_KEYS and k not in ("table", "target", "high_cardinality")}
    if "high_cardinality" in typed:
        options["thresholds"] = Thresholds(high_cardinality=typed["high_cardinality"])
    try:
        api.make_options(typed.get("target") or "", **options)
    except BitsiftError as error:
        reader.problems += _keyed(error.problems, where, lambda k: key_lines.get(k) or header)
    if len(reader.problems) > before or into is None:
        return None
    recount = typed.get("recount_from")
    return JobCounts(target=typed["target"], table=typed.get("table"),
                     partition=typed["partition"], grain=grain, into=into,
                     recount_from=recount.isoformat() if isinstance(recount, _dt.date)
                     else recount, options=options, line=header, key_lines=key_lines)


def _counts_type_problem(key: str, value: Any) -> str | None:
    """Why ``value`` does not fit one of [counts]' own keys, or None."""
    if key == "recount_from":
        if isinstance(value, bool) or not isinstance(value, str | int | _dt.date) or (
                isinstance(value, _dt.datetime)):
            return ("recount_from must be a partition (a date, a whole number or text), not "
                    f"{value!r}")
        return None
    if not isinstance(value, str) or not value.strip():
        return f"{key} must be a non-empty string, not {value!r}"
    return None


def _into(reader: _Reader, typed: Mapping[str, Any], results: Destination | None,
          line: int | None) -> Destination | None:
    """Where the counts go: ``into`` (default: the [results] destination) and
    ``counts_table``."""
    table = typed.get("counts_table", DEFAULT_COUNTS_TABLE)
    if "into" in typed:
        location = reader.location(typed["into"])
    elif results is not None:
        location = results.location
    else:
        reader.problem(line, "counts: into is required (a DuckDB file or a SQLAlchemy URL) "
                       "when the job has no [results]")
        return None
    destination = Destination(location, table)
    for problem in destination.keyed_problems():
        key = "counts_table" if problem.key == "table" else "into"
        reader.problem(reader.lines.of("counts", 0, key) or line, "counts: " + problem.message)
    return destination


#: The key of the [counts] session among a job's open sessions (rankings use 0, 1, ...).
COUNTS_SESSION = -1


def check_counts(counts: JobCounts, opened: Any, source_line: int | None,
                 sessions: dict[int, Session] | None) -> list[Problem]:
    """The [counts] section's problems against the source and the destination (nothing is
    counted); with ``sessions``, its open session is kept there (:data:`COUNTS_SESSION`)."""
    try:
        session = Session.open(opened, counts.table)
    except SourceError as error:
        return [_at(source_line, str(error))]
    except BitsiftError as error:
        return [_at(counts.line_of("table"), "counts: " + str(error))]
    try:
        counts.plan(session)
    except BitsiftError as error:
        return _keyed(error.problems, "counts: ", counts.line_of)
    finally:
        if sessions is None:
            session.close()
        else:
            sessions[COUNTS_SESSION] = session
    return []
