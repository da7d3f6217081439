"""Running a loaded job: check every ranking against its source (and the destination) before
anything runs, then rank each and write all rows of the run in one transaction."""

from __future__ import annotations

import datetime as _dt
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass

from bitsift.errors import (
    BitsiftError,
    PredicateError,
    Problem,
    SourceError,
    SpecError,
    TableNotFoundError,
    unknown_names_message,
)
from bitsift.jobs.counts_build import CountsReport, count_partitions, store_counts
from bitsift.jobs.history import (
    HistoryError,
    ranking_rows,
    segment_json,
)
from bitsift.jobs.history_open import open_store
from bitsift.jobs.job_counts import COUNTS_SESSION, check_counts
from bitsift.jobs.job_keys import NAME_LISTS, _keyed
from bitsift.jobs.job_lines import _at
from bitsift.jobs.jobfile import (
    MAX_RUN_ID,
    Job,
    JobError,
    JobRanking,
    RunError,
)
from bitsift.names import resolve_name
from bitsift.run import api
from bitsift.run.result import Ranking, SegmentedRanking
from bitsift.run.session import Session
from bitsift.spec.predicate import parse_predicate
from bitsift.spec.rankspec import RankSpec


def preflight(job: Job, *, destination: bool = True, run_id: str | None = None,
              sessions: dict[int, Session] | None = None) -> None:
    """Check every ranking against the source's catalog and (with ``destination``) the results
    table: its layout, and that every name the run would write fits its columns.

    Nothing is ranked and nothing is written; every problem is reported at once. With
    ``sessions``, each ranking's session is kept open there (by its position in the job) for
    :func:`run_job` to rank on, its request already resolved; the caller closes them. The
    ``[counts]`` section is checked too (its session kept under
    :data:`~bitsift.jobs.job_counts.COUNTS_SESSION`).
    """
    problems: list[Problem] = []
    source_line = job.lines.of("", 0, "source")
    # The names each text column of the history will receive (attributes: every candidate).
    written: dict[str, set[str]] = {"job": {job.name}, "run_id": {run_id} if run_id else set(),
                                    "ranking": set(), "source_table": set(), "target": set(),
                                    "attribute": set()}
    for number, ranking in enumerate(job.rankings):
        where = f"ranking {ranking.name!r}: "
        try:
            session = Session.open(job.opened_source, ranking.table)
        except SourceError as error:
            problems.append(_at(source_line, str(error)))
            break
        except BitsiftError as error:
            problems.append(_at(ranking.line_of("table"), where + str(error)))
            continue
        if sessions is not None:
            sessions[number] = session
            problems += _check_on_session(job, ranking, session, written)
        else:
            with session:
                problems += _check_on_session(job, ranking, session, written)
    if job.counts is not None and not any(p.line == source_line for p in problems):
        problems += check_counts(job.counts, job.opened_source, source_line, sessions)
    if destination and job.destination is not None:
        results_line = job.lines.of("results", 0)
        try:
            with open_store(job.destination) as store:
                store.check()
                problems += [_at(results_line, p) for p in store.width_problems(written)]
        except HistoryError as error:
            problems.append(_at(results_line, str(error)))
    if problems:
        raise JobError(job.path, problems)


@contextmanager
def checked_sessions(job: Job, *, destination: bool = True,
                     run_id: str | None = None) -> Iterator[dict[int, Session]]:
    """:func:`preflight`, then each ranking's open session (by its position in the job) for
    what follows: the source is not opened again. Closed afterwards."""
    sessions: dict[int, Session] = {}
    try:
        preflight(job, destination=destination, run_id=run_id, sessions=sessions)
        yield sessions
    finally:
        for session in sessions.values():
            session.close()


def dry_run_check(job: Job, *, run_id: str | None = None) -> str | None:
    """:func:`preflight` (``bitsift run --dry-run``); what the ``[counts]`` section would
    count, in words (None without one)."""
    with checked_sessions(job, run_id=run_id) as sessions:
        if job.counts is None:
            return None
        return job.counts.plan(sessions[COUNTS_SESSION]).describe()


def _check_on_session(job: Job, ranking: JobRanking, session: Session,
                      written: dict[str, set[str]]) -> list[Problem]:
    """One ranking's problems against its open source; the names it would write are added
    to ``written`` when it has none."""
    where = f"ranking {ranking.name!r}: "
    try:
        session.columns  # noqa: B018 - read here to tell a missing table from other failures
    except TableNotFoundError as error:
        return [_at(ranking.line_of("table"), where + str(error))]
    except BitsiftError as error:
        return [_at(job.lines.of("", 0, "source"), where + str(error))]
    found, spec = _ranking_problems(ranking, session)
    if spec is not None:
        written["ranking"].add(ranking.name)
        written["source_table"].add(spec.source_name)
        written["target"].add(spec.target)
        written["attribute"].update(a.name for a in spec.attributes)
    return found


def _ranking_problems(ranking: JobRanking, session: Session,
                      ) -> tuple[list[Problem], RankSpec | None]:
    """The ranking's problems against the source's columns, and its checked request when it
    has none."""
    where = f"ranking {ranking.name!r}: "
    options = api.make_options(ranking.target, **ranking.options)
    columns, display = session.columns, session.display
    names = [c.name for c in columns]
    problems = []
    for key in ("target", "weight", *NAME_LISTS):
        if key in ("target", "weight"):
            wanted: tuple[str, ...] = tuple(n for n in [getattr(options, key)] if n)
        else:
            wanted = getattr(options, key) or ()
        unknown = [n for n in wanted if resolve_name(n, names) is None]
        if unknown:
            message = unknown_names_message("column", unknown, names)
            problems.append(_at(ranking.line_of(key), f"{where}{key}: {message} in {display}"))
    if options.where:
        try:
            parse_predicate(options.where, {c.name: c for c in columns}, session.dialect)
        except PredicateError as error:
            problems.append(_at(ranking.line_of("where"), where + str(error)))
    spec = None
    if not problems:
        try:
            spec = session.resolve(options)
        except BitsiftError as error:
            problems += _keyed(error.problems, where, ranking.line_of)
    return problems, spec


# --- running ------------------------------------------------------------------------------------


@dataclass
class RunResult:
    """What a run did: its id, when it started, each ranking, and the rows written."""

    job: Job
    run_id: str
    run_at: _dt.datetime
    #: Each ranking's result: one :class:`Ranking`, or one per segment when it has ``by``.
    rankings: list[tuple[JobRanking, Ranking | SegmentedRanking]]
    rows_written: int
    #: What the ``[counts]`` section counted and stored, if the job has one.
    counts: CountsReport | None = None


def default_run_id(run_at: _dt.datetime) -> str:
    """A run id from the start time, sortable: ``2026-01-02T03:04:05.123456Z``."""
    return run_at.astimezone(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def check_run_id(run_id: str) -> str:
    """``run_id`` if it is usable (1 to 100 printable characters), else :class:`SpecError`."""
    if not run_id.strip() or len(run_id) > MAX_RUN_ID or not run_id.isprintable():
        raise SpecError.option(
            "run_id", f" must be 1 to {MAX_RUN_ID} printable characters, not {run_id!r}")
    return run_id


def _run_ranking(job: Job, ranking: JobRanking, session: Session,
                 run_id: str) -> Ranking | SegmentedRanking:
    try:
        return api.rank(session, ranking.target, **ranking.options)
    except BitsiftError as error:
        raise RunError(
            f"job {job.name!r}, ranking {ranking.name!r} ({job.path.name} line "
            f"{ranking.line}) failed, so run {run_id} wrote nothing: {error}"
        ) from error


def run_job(job: Job, run_id: str | None = None, *, now: _dt.datetime | None = None) -> RunResult:
    """Rank every ranking of ``job`` and count its ``[counts]``, then write: the counts in
    one transaction, then all history rows in one transaction.

    A ranking or counting that fails raises :class:`RunError` and nothing is written. Running
    again with the same ``run_id`` replaces that run's rows; counting again adds only the
    partitions not yet stored.
    """
    run_at = (now or _dt.datetime.now(_dt.UTC)).astimezone(_dt.UTC)
    run_id = check_run_id(run_id) if run_id is not None else default_run_id(run_at)
    # Each ranking's source is opened and its request resolved once: by the checks.
    with checked_sessions(job, run_id=run_id) as sessions:
        done = [(ranking, _run_ranking(job, ranking, sessions[number], run_id))
                for number, ranking in enumerate(job.rankings)]
        counted = None
        if job.counts is not None:
            session = sessions[COUNTS_SESSION]
            try:
                counted = count_partitions(session, job.counts.plan(session))
            except BitsiftError as error:
                raise RunError(f"job {job.name!r}, [counts] ({job.path.name} line "
                               f"{job.counts.line}) failed, so run {run_id} wrote nothing: "
                               f"{error}") from error
    # The sources are closed before anything is written (a DuckDB file may be both).
    report = store_counts(counted) if counted is not None else None
    # One history row per attribute, and per segment for a ranking with `by`.
    rows = [
        row
        for ranking, result in done
        for part in (result.segments if isinstance(result, SegmentedRanking) else [result])
        for row in ranking_rows(part, run_id=run_id, run_at=run_at, job=job.name,
                                ranking_name=ranking.name, options=ranking.settings,
                                segment=segment_json(part.segment))
    ]
    written = 0
    if job.destination is not None and job.rankings:
        with open_store(job.destination, write=True) as store:
            written = store.replace_run(job.name, run_id, rows)
    return RunResult(job=job, run_id=run_id, run_at=run_at, rankings=done, rows_written=written,
                     counts=report)
