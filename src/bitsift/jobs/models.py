"""Model files: one plain SELECT per ranking of a job, for schedulers that materialize SELECT
files as tables.

Layout: ``OUT/<job>__<ranking>.sql``, names lower-cased with every run of other characters than
letters, digits and ``_`` turned into ``_`` (so the file name is also a valid model name). Each
file holds a header comment and :func:`bitsift.run.api.statement`'s statement without a trailing
semicolon (most schedulers wrap the SELECT in their own CREATE TABLE ... AS).
"""

from __future__ import annotations

import os
import re
import tempfile
from dataclasses import dataclass
from pathlib import Path

from bitsift.errors import BitsiftError, SpecError
from bitsift.jobs.job_run import checked_sessions, preflight
from bitsift.jobs.jobfile import Job, JobRanking
from bitsift.run import api
from bitsift.run.session import Session
from bitsift.version import __version__


@dataclass(frozen=True)
class ModelFile:
    """A model file written for one ranking."""

    ranking: str
    path: Path


def slug(text: str) -> str:
    """A file and model name from free text.

    >>> slug("Greenhouse nightly / all-trays")
    'greenhouse_nightly_all_trays'
    """
    return re.sub(r"[^a-z0-9_]+", "_", text.lower()).strip("_") or "model"


def model_name(job: Job, ranking: JobRanking) -> str:
    """The file name (without ``.sql``) of a ranking's model."""
    return f"{slug(job.name)}__{slug(ranking.name)}"


def model_text(job: Job, ranking: JobRanking, dialect: str | None = None,
               session: Session | None = None) -> str:
    """The content of one model file: header comment, then one SELECT (no semicolon).
    ``session``: the ranking's source already open (default: the job's source is opened)."""
    options = {k: v for k, v in ranking.options.items() if k not in ("limit", "timeout")}
    source = session if session is not None else job.opened_source
    statement = api.statement(source, ranking.target, ranking.table, dialect=dialect,
                              **options)
    header = [
        f"bitsift {__version__} model: job {job.name}, ranking {ranking.name}",
        f"from job file {job.path.name}; regenerate with: bitsift models {job.path.name}"
        + (f" --dialect {dialect}" if dialect else "") + " --out DIR",
    ]
    settings = ", ".join(f"{k} = {v!r}" for k, v in sorted(ranking.settings.items()))
    header.append(f"settings: {settings}")
    not_here = [k for k in ("limit", "timeout") if k in ranking.settings]
    if not_here:
        header.append(f"not applied in a model: {', '.join(not_here)} (every attribute is listed)")
    header.append("trust flags and p-values are computed by `bitsift rank`, not by this SELECT")
    comments = "\n".join("-- " + " ".join(line.split()) for line in header)
    body = statement.rstrip().removesuffix(";").rstrip()
    return f"{comments}\n{body}\n"


def _write_atomically(path: Path, text: str) -> None:
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            out.write(text)
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def write_models(job: Job, out_dir: str | Path, dialect: str | None = None) -> list[ModelFile]:
    """Write one ``.sql`` file per ranking of ``job`` into ``out_dir`` (created if missing).

    Every ranking is checked against the source first; nothing is written when one is invalid.
    Existing files of the same names are replaced; other files are left alone.
    """
    names = [model_name(job, r) for r in job.rankings]
    clashes = sorted({n for n in names if names.count(n) > 1})
    if clashes:
        raise SpecError("ranking names give the same model file name: " + ", ".join(clashes)
                        + ": rename the rankings")
    # Each ranking's source is opened once: by the checks, then kept for its statement.
    with checked_sessions(job, destination=False) as sessions:
        texts = [(r, name, model_text(job, r, dialect, sessions[number]))
                 for number, (r, name) in enumerate(zip(job.rankings, names, strict=True))]
    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise BitsiftError(f"cannot create {out}: {error.strerror}") from None
    written = []
    for ranking, name, text in texts:
        path = out / f"{name}.sql"
        _write_atomically(path, text)
        written.append(ModelFile(ranking=ranking.name, path=path))
    return written


def preflight_rankings(job: Job) -> None:
    """The job's checks against its source (the results destination is not needed here)."""
    preflight(job, destination=False)
