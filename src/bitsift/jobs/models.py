"""Model files: one plain SELECT per ranking of a job whose rows are history rows, for
schedulers that materialize SELECT files as tables or append them to the job's history table.

Layout: ``OUT/<job>__<ranking>.sql``, names lower-cased with every run of other characters than
letters, digits and ``_`` turned into ``_`` (so the file name is also a valid model name). Each
file holds a header comment and one SELECT (:func:`bitsift.sql.history_select.history_select`)
without a trailing semicolon (most schedulers wrap the SELECT in their own CREATE TABLE ... AS).
With ``insert``, ``OUT/<job>.insert.sql`` holds the ready-to-schedule script of the whole job
(:mod:`bitsift.jobs.history_script`): one run, every ranking. A job with a ``[counts]``
section also gets ``OUT/<job>.counts.sql``: the statements of ``bitsift sql --counts`` that
keep its counts table inside the source's database (create it if missing, add the partitions
newer than the newest stored one, rank the stored partitions). Files hold no generation time:
the same job file, data and bitsift version give the same bytes.
"""

from __future__ import annotations

import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path

from bitsift.errors import BitsiftError, SpecError
from bitsift.jobs import history_script
from bitsift.jobs.counts_build import paste_counts
from bitsift.jobs.history import COLUMNS, SCHEMA_VERSION, options_json
from bitsift.jobs.job_counts import COUNTS_SESSION
from bitsift.jobs.job_run import checked_sessions, preflight
from bitsift.jobs.jobfile import Job, JobRanking
from bitsift.run import api
from bitsift.run.cuts import fetch_mdl_cuts
from bitsift.run.session import Session
from bitsift.spec.rankspec import RankSpec
from bitsift.sql.dialects import Capabilities, capabilities
from bitsift.sql.history_select import history_select, job_history_select
from bitsift.sql.paste import binning_summary
from bitsift.sql.sqlbuild import Statement
from bitsift.version import __version__


@dataclass(frozen=True)
class ModelFile:
    """A model file written for one ranking (``script``: the job's ``--insert`` script, if
    asked; the same for every ranking of the job)."""

    ranking: str
    path: Path
    script: Path | None = None
    #: ``ranking`` (a ranking's model) or ``counts`` (the [counts] statements; no ranking).
    kind: str = "ranking"


def slug(text: str) -> str:
    """A file and model name from free text.

    >>> slug("Greenhouse nightly / all-trays")
    'greenhouse_nightly_all_trays'
    """
    return re.sub(r"[^a-z0-9_]+", "_", text.lower()).strip("_") or "model"


def model_name(job: Job, ranking: JobRanking) -> str:
    """The file name (without ``.sql``) of a ranking's model."""
    return f"{slug(job.name)}__{slug(ranking.name)}"


def _comments(lines: list[str]) -> str:
    return "\n".join("-- " + " ".join(line.replace("*/", "* /").split()) for line in lines)


def _header(job: Job, ranking: JobRanking, spec: RankSpec, caps: Capabilities,
            dialect: str | None, notes: list[str]) -> list[str]:
    attributes = ", ".join(f"{a.name} ({a.kind}{', ' + a.date_part if a.date_part else ''})"
                           for a in spec.attributes)
    settings = ", ".join(f"{k} = {v!r}" for k, v in sorted(ranking.settings.items()))
    header = [
        f"bitsift {__version__} model: job {job.name}, ranking {ranking.name}",
        f"from job file {job.path.name}; regenerate with: bitsift models {job.path.name}"
        + (f" --dialect {dialect}" if dialect else "") + " --out DIR",
        f"settings: {settings}",
        f"table: {spec.source_name}; target: {spec.target}; attributes: {attributes}",
        f"missing values: {spec.options.missing}; numeric binning: {binning_summary(spec)}",
    ]
    if spec.where:
        header.append(f"where: {spec.where.text}")
    if "limit" in ranking.settings:
        header.append(f"limit: the top {spec.options.limit} attributes of each segment")
    if "timeout" in ranking.settings:
        header.append("not applied in a model: timeout (set the scheduler's own)")
    header += [
        f"rows: history rows (schema version {SCHEMA_VERSION}, the columns of the history table "
        "in docs/scheduled-runs.md), one per segment x attribute; each execution is one run:",
        "run_at is the statement's start time in UTC, run_id its text in the engine's form",
        "p_value: " + ("the engine's chi-square survival function of g_statistic"
                       if caps.chi2_survival else
                       f"NULL, {caps.name} has no chi-square distribution function "
                       "(bitsift drift reads it as unknown)"),
    ]
    return header + [f"note: {n}" for n in notes]


def model_statement(job: Job, ranking: JobRanking, dialect: str | None,
                    session: Session) -> tuple[Statement, list[str], Capabilities]:
    """One ranking's history SELECT, its header lines and its dialect, on its open source."""
    caps = capabilities(dialect) if dialect else session.engine.caps
    # The request the checks resolved (timeout included, unused here): resolved once.
    spec = session.resolve(api.make_options(ranking.target, **ranking.options))
    # MDL's cut points need a Python step: computed here and inlined as literals.
    cuts = fetch_mdl_cuts(session.engine, spec)
    constants: dict[str, str | int] = {
        "schema_version": SCHEMA_VERSION,
        "job": job.name,
        "ranking": ranking.name,
        "source_table": spec.source_name,
        "target": spec.target,
        "options": options_json(ranking.settings),
        "bitsift_version": __version__,
    }
    statement = history_select(spec, caps, COLUMNS, constants, cuts=cuts)
    return statement, _header(job, ranking, spec, caps, dialect, list(session.notes)), caps


def model_text(job: Job, ranking: JobRanking, dialect: str | None = None,
               session: Session | None = None) -> str:
    """The content of one model file: header comment, then one SELECT (no semicolon).
    ``session``: the ranking's source already open (default: the job's source is opened)."""
    if session is None:
        with Session.open(job.opened_source, ranking.table) as opened:
            return model_text(job, ranking, dialect, opened)
    statement, header, _ = model_statement(job, ranking, dialect, session)
    return f"{_comments(header)}\n{statement.sql}\n"


def job_script(job: Job, statements: list[Statement], caps: Capabilities,
               dialect: str | None) -> str:
    """The ``--insert`` script of a job: every ranking's rows appended in one statement (one
    reading of the clock, so one run, as ``bitsift run`` writes it), after creating the history
    table if it is missing."""
    destination = job.destination
    if destination is None:
        raise SpecError("insert writes the rankings' history script: the job has no [results]")
    header = [
        f"bitsift {__version__} history script: job {job.name}, rankings "
        + ", ".join(r.name for r in job.rankings),
        f"from job file {job.path.name}; regenerate with: bitsift models {job.path.name}"
        + (f" --dialect {dialect}" if dialect else "") + " --insert --out DIR",
        f"creates {destination.table} if missing (the DDL of bitsift run, schema version "
        f"{SCHEMA_VERSION}) and appends one run: every ranking's history rows, run_at the "
        "statement's start time in UTC, run_id its text in the engine's form",
        "timeout is not applied (set the scheduler's own); p_value: "
        + ("the engine's chi-square survival function" if caps.chi2_survival else
           f"NULL, {caps.name} has no chi-square distribution function (drift reads it as "
           "unknown)"),
    ]
    combined = job_history_select(statements, caps)
    return f"{_comments(header)}\n" + history_script.script(destination.table, combined, caps)


def _write_atomically(path: Path, text: str) -> None:
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            out.write(text)
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def write_models(job: Job, out_dir: str | Path, dialect: str | None = None, *,
                 insert: bool = False) -> list[ModelFile]:
    """Write one ``.sql`` file per ranking of ``job`` into ``out_dir`` (created if missing),
    and with ``insert`` the job's script (``<job>.insert.sql``, see :func:`job_script`).

    Every ranking is checked against the source first; nothing is written when one is invalid.
    Existing files of the same names are replaced; other files are left alone.
    """
    names = [model_name(job, r) for r in job.rankings]
    clashes = sorted({n for n in names if names.count(n) > 1})
    if clashes:
        raise SpecError("ranking names give the same model file name: " + ", ".join(clashes)
                        + ": rename the rankings")
    if insert and not job.rankings:
        raise SpecError("insert writes the rankings' history script: the job has no rankings")
    # Each ranking's source is opened once: by the checks, then kept for its statement.
    with checked_sessions(job, destination=False) as sessions:
        built = [model_statement(job, r, dialect, sessions[number])
                 for number, r in enumerate(job.rankings)]
        counts = (counts_model_text(job, dialect, sessions[COUNTS_SESSION])
                  if job.counts is not None else None)
    texts = [(r, name, f"{_comments(header)}\n{statement.sql}\n")
             for r, name, (statement, header, _) in zip(job.rankings, names, built, strict=True)]
    script = job_script(job, [b[0] for b in built], built[0][2], dialect) if insert else None
    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise BitsiftError(f"cannot create {out}: {error.strerror}") from None
    written = []
    script_path = out / f"{slug(job.name)}.insert.sql" if script is not None else None
    for ranking, name, text in texts:
        path = out / f"{name}.sql"
        _write_atomically(path, text)
        written.append(ModelFile(ranking=ranking.name, path=path, script=script_path))
    if script_path is not None and script is not None:
        _write_atomically(script_path, script)
    if counts is not None:
        path = out / f"{slug(job.name)}.counts.sql"
        _write_atomically(path, counts)
        written.append(ModelFile(ranking="", path=path, kind="counts"))
    return written


def counts_model_text(job: Job, dialect: str | None, session: Session) -> str:
    """The job's ``[counts]`` as pasted statements (those of ``bitsift sql --counts``) for
    its source's database, on the open source (cut points computed from it now)."""
    counts = job.counts
    assert counts is not None
    text = paste_counts(session, target=counts.target, partition=counts.partition,
                        grain=counts.grain, counts_table=counts.into.table, dialect=dialect,
                        **counts.options)
    header = [
        f"bitsift {__version__} counts model: job {job.name}, [counts]",
        f"from job file {job.path.name}; regenerate with: bitsift models {job.path.name}"
        + (f" --dialect {dialect}" if dialect else "") + " --out DIR",
        f"the counts table {counts.into.table} is kept in the source's own database (bitsift "
        "run keeps its counts in the job's into instead); the ranking covers every stored "
        "partition: add a WHERE on \"partition\" for a window",
    ]
    return f"{_comments(header)}\n{text}"


def preflight_rankings(job: Job) -> None:
    """The job's checks against its source (the results destination is not needed here)."""
    preflight(job, destination=False)
