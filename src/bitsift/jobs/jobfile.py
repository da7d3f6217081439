"""Job files: a TOML file naming a source, one or more rankings and a results destination.

A job is validated as a whole before anything runs, and every problem is reported at once with
its line in the file. tomllib gives no line numbers for keys, so :func:`scan_lines` finds them in
the text. The format is documented in docs/scheduled-runs.md::

    job = "greenhouse-nightly"
    source = "data/greenhouse.duckdb"        # or a SQLAlchemy URL; paths relative to this file

    [results]
    destination = "data/history.duckdb"     # a DuckDB file or a SQLAlchemy URL
    table = "bitsift_history"               # [schema.]table

    [defaults]                               # optional: settings shared by every ranking
    table = "trays"
    target = "outcome"

    [[ranking]]
    name = "all-trays"

    [counts]                                 # optional: stored counts (jobs/job_counts.py)
    partition = "sown_on"

A job needs rankings, a [counts] section or both; [results] is needed with rankings.
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import sqlalchemy as sa

from bitsift.engines.duckdb_engine import file_reader
from bitsift.engines.read_options import FileSource, ReadValue, parse_read_options
from bitsift.engines.sources import parse_table_name
from bitsift.errors import (
    BitsiftError,
    Problem,
    SpecError,
    suggest,
)
from bitsift.jobs.history import (
    DEFAULT_TABLE,
    Destination,
)
from bitsift.jobs.job_counts import JobCounts, read_counts
from bitsift.jobs.job_keys import MAX_NAME, _keyed, _type_problem
from bitsift.jobs.job_lines import LineMap, _at, _toml_problem, scan_lines
from bitsift.names import one_line
from bitsift.run import api
from bitsift.spec.rankspec import RankOptions, Thresholds

TOP_KEYS: tuple[str, ...] = ("job", "source", "read_options", "results", "defaults", "ranking",
                             "counts")
RESULTS_KEYS: tuple[str, ...] = ("destination", "table")
#: A ranking's settings: the CLI's rank options, plus a name.
RANKING_KEYS: tuple[str, ...] = (
    "name", "table", "target", "attributes", "exclude", "categorical", "numeric", "missing",
    "bins", "where", "sort", "limit", "timeout", "high_cardinality", "by", "weight",
    "binning", "binning_for", "date_part", "confidence", "target_bins", "max_classes",
)
DEFAULT_KEYS: tuple[str, ...] = tuple(k for k in RANKING_KEYS if k != "name")
MAX_RUN_ID = 100


class JobError(SpecError):
    """The job file is invalid; :attr:`problems` lists every problem found, each at its line,
    options spelled as the file's keys."""

    line_per_problem = True

    def __init__(self, path: Path, problems: Sequence[Problem]) -> None:
        self.path = path
        found = sorted(problems, key=lambda p: (p.line or 0))
        count = len(found)
        # One line per problem, whatever a name in it holds (see names.one_line).
        lines = [one_line(f"{path}:{p.line}: {p.message}" if p.line else f"{path}: {p.message}")
                 for p in found]
        super().__init__(f"{count} problem{'s' if count > 1 else ''} in job file {path}:\n  "
                         + "\n  ".join(lines), problems=found)


class RunError(BitsiftError):
    """A ranking failed while the job ran; nothing was written."""


# --- where each key is written ----------------------------------------------------------------


@dataclass(frozen=True)
class JobRanking:
    """One ranking of a job: where it reads, what it asks, and where its settings are written."""

    name: str
    target: str
    table: str | None
    #: Keyword options for :func:`bitsift.run.api.rank` (without target and table).
    options: Mapping[str, Any]
    #: The settings as written (after [defaults]), for the history's options column.
    settings: Mapping[str, Any]
    line: int | None = None
    key_lines: Mapping[str, int | None] = field(default_factory=dict)

    def line_of(self, key: str) -> int | None:
        """The line setting ``key`` (in the ranking or in [defaults]), else the ranking's line."""
        return self.key_lines.get(key) or self.line


@dataclass(frozen=True)
class Job:
    """A validated job file."""

    path: Path
    name: str
    #: A SQLAlchemy URL, or a file path resolved against the job file's folder.
    source: str
    #: ``[results]``: where the rankings' history goes (None: a job of stored counts only).
    destination: Destination | None
    rankings: tuple[JobRanking, ...]
    lines: LineMap = field(default_factory=LineMap)
    #: ``[read_options]``: how a CSV source is read (:mod:`bitsift.engines.read_options`).
    read_options: tuple[tuple[str, ReadValue], ...] = ()
    #: ``[counts]``: the stored counts the job keeps, if any.
    counts: JobCounts | None = None

    @property
    def opened_source(self) -> str | FileSource:
        """What the rankings open: the source, with its reader options if any."""
        return FileSource(self.source, self.read_options) if self.read_options else self.source

    def ranking(self, name: str) -> JobRanking:
        for ranking in self.rankings:
            if ranking.name == name:
                return ranking
        raise KeyError(name)


def _is_url(text: str) -> bool:
    return "://" in text


class _Reader:
    """Reads the parsed TOML into a :class:`Job`, collecting every problem on the way."""

    def __init__(self, path: Path, data: dict[str, Any], lines: LineMap) -> None:
        self.path = path
        self.data = data
        self.lines = lines
        self.problems: list[Problem] = []
        #: (name, line) of every ranking, valid or not, to report duplicate names.
        self.names: list[tuple[str, int | None]] = []

    def problem(self, line: int | None, message: str) -> None:
        self.problems.append(_at(line, message))

    def unknown_keys(self, table: Mapping[str, Any], allowed: Sequence[str], section: str,
                     index: int, where: str) -> None:
        for key in table:
            if key not in allowed:
                self.problem(self.lines.of(section, index, key),
                             f"unknown key {key!r} in {where}{suggest(key, allowed)}")

    def string(self, table: Mapping[str, Any], key: str, section: str, index: int = 0, *,
               required: bool = False, where: str = "") -> str | None:
        value = table.get(key)
        line = self.lines.of(section, index, key)
        if value is None:
            if required:
                self.problem(self.lines.of(section, index), f"{where}{key} is required")
            return None
        if not isinstance(value, str) or not value.strip():
            self.problem(line, f"{where}{key} must be a non-empty string, not {value!r}")
            return None
        return value

    def location(self, text: str) -> str:
        if _is_url(text):
            return text
        path = Path(text).expanduser()
        if not path.is_absolute():
            path = self.path.parent / path
        return str(path)

    def read(self) -> Job:
        data = self.data
        self.unknown_keys(data, TOP_KEYS, "", 0, "the job file")
        name = self.string(data, "job", "", 0) or self.path.stem
        if len(name) > MAX_NAME:
            self.problem(self.lines.of("", 0, "job"), f"job name longer than {MAX_NAME} characters")
        source = self.source()
        read_options = self.read_options(source)
        has_counts = "counts" in data
        destination = self.destination(required=not has_counts or "ranking" in data)
        rankings = self.rankings(source, required=not has_counts)
        counts = read_counts(self, self.defaults(), source, destination)
        if self.problems:
            raise JobError(self.path, self.problems)
        assert source is not None
        return Job(path=self.path, name=name, source=source, destination=destination,
                   rankings=tuple(rankings), lines=self.lines, read_options=read_options,
                   counts=counts)

    def read_options(self, source: str | None) -> tuple[tuple[str, ReadValue], ...]:
        """``[read_options]``: checked like ``--read-option``; a CSV source only."""
        table = self.data.get("read_options")
        if table is None:
            return ()
        line = self.lines.of("", 0, "read_options")
        if not isinstance(table, dict):
            self.problem(line, "read_options must be a table of KEY = VALUE")
            return ()
        if source is not None and file_reader(source) != "read_csv_auto":
            self.problem(line, "read_options apply to a CSV source only")
            return ()
        try:
            return parse_read_options(table)
        except SpecError as error:
            self.problem(line, str(error))
            return ()

    def source(self) -> str | None:
        text = self.string(self.data, "source", "", 0, required=True)
        if text is None:
            return None
        line = self.lines.of("", 0, "source")
        location = self.location(text)
        if _is_url(location):
            if not location.startswith("duckdb:///"):
                try:
                    sa.engine.make_url(location)
                except Exception:  # noqa: BLE001 - any parse failure
                    self.problem(line, "source is not a valid database URL")
        elif not any(ch in location for ch in "*?[") and not Path(location).exists():
            self.problem(line, f"source file not found: {location}")
        return location

    def destination(self, *, required: bool = True) -> Destination | None:
        results = self.data.get("results")
        if results is None:
            if required:
                self.problem(None, "a [results] table with destination (and table) is required")
            return None
        if not isinstance(results, dict):
            self.problem(self.lines.of("", 0, "results"),
                         "results must be a table: [results] with destination and table")
            return None
        self.unknown_keys(results, RESULTS_KEYS, "results", 0, "[results]")
        text = self.string(results, "destination", "results", required=True, where="results.")
        table = self.string(results, "table", "results", where="results.") or DEFAULT_TABLE
        if text is None:
            return None
        destination = Destination(self.location(text), table)
        for problem in destination.keyed_problems():
            self.problem(self.lines.of("results", 0, problem.key or ""), problem.message)
        return destination

    def defaults(self) -> dict[str, Any]:
        """``[defaults]`` (empty when missing or not a table: reported by :meth:`rankings`)."""
        defaults = self.data.get("defaults", {})
        return defaults if isinstance(defaults, dict) else {}

    def rankings(self, source: str | None, *, required: bool = True) -> list[JobRanking]:
        if not isinstance(self.data.get("defaults", {}), dict):
            self.problem(self.lines.of("", 0, "defaults"), "defaults must be a table: [defaults]")
        defaults = self.defaults()
        self.unknown_keys(defaults, DEFAULT_KEYS, "defaults", 0, "[defaults]")
        entries = self.data.get("ranking")
        if entries is None:
            if required:
                self.problem(None, "no rankings: add at least one [[ranking]] table, or a "
                             "[counts] section")
            return []
        if not isinstance(entries, list) or not all(isinstance(e, dict) for e in entries):
            self.problem(self.lines.of("ranking", 0) or self.lines.of("", 0, "ranking"),
                         "rankings are written [[ranking]] (double brackets), one per ranking")
            return []
        rankings = []
        for index, entry in enumerate(entries):
            ranking = self.ranking(index, entry, defaults, source)
            if ranking is not None:
                rankings.append(ranking)
        self.unique_names()
        return rankings

    def unique_names(self) -> None:
        seen: dict[str, int | None] = {}
        for name, line in self.names:
            if name in seen:
                self.problem(line, f"ranking name {name!r} is already used at line {seen[name]}:"
                             " give each ranking its own name = \"...\"")
            else:
                seen[name] = line

    def ranking(self, index: int, entry: Mapping[str, Any], defaults: Mapping[str, Any],
                source: str | None) -> JobRanking | None:
        where = f"ranking {index + 1}: "
        self.unknown_keys(entry, RANKING_KEYS, "ranking", index, f"ranking {index + 1}")
        merged = {**{k: v for k, v in defaults.items() if k in DEFAULT_KEYS},
                  **{k: v for k, v in entry.items() if k in RANKING_KEYS}}
        key_lines = {k: (self.lines.of("ranking", index, k) if k in entry
                         else self.lines.of("defaults", 0, k)) for k in merged}
        header = self.lines.of("ranking", index)
        before = len(self.problems)
        typed = {}
        for key, value in merged.items():
            message = _type_problem(key, value)
            if message:
                self.problem(key_lines[key], where + message)
            else:
                typed[key] = value
        target = typed.get("target")
        if "target" not in merged:
            self.problem(header, where + "target is required (in the ranking or in [defaults])")
        table = typed.get("table")
        self.table_problems(table, source, key_lines.get("table") or header, where)
        options = {k: v for k, v in typed.items()
                   if k in RankOptions.__dataclass_fields__ and k != "target"}
        if "high_cardinality" in typed:
            options["thresholds"] = Thresholds(high_cardinality=typed["high_cardinality"])
        try:
            # The library's own checks of option values, so the job file and the CLI agree.
            api.make_options(target or "", **options)
        except SpecError as error:
            self.problems += _keyed(error.problems, where,
                                    lambda key: key_lines.get(key) or header)
        name = typed.get("name") or (f"{table}.{target}" if table else str(target))
        self.names.append((name, key_lines.get("name") or header))
        if len(self.problems) > before or target is None:
            return None
        return JobRanking(name=name, target=target, table=table, options=options,
                          settings=merged, line=header, key_lines=key_lines)

    def table_problems(self, table: Any, source: str | None, line: int | None,
                       where: str) -> None:
        if source is None or (table is not None and not isinstance(table, str)):
            return
        data_file = not _is_url(source) and file_reader(source) is not None
        if data_file and table:
            self.problem(line, where + f"table is not used with a data file source "
                         f"({Path(source).name}): remove it")
        elif not data_file and not table:
            self.problem(line, where + "table is required (in the ranking or in [defaults])")
        elif table:
            try:
                parse_table_name(table, "")
            except SpecError:
                self.problem(line, where + f"table must be [schema.]table, not {table!r}")


def load_job(path: str | Path) -> Job:
    """Read and validate a job file; :class:`JobError` lists every problem with its line."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except OSError as error:
        raise JobError(path, [_at(None, f"cannot read the job file: {error.strerror}")]
                       ) from None
    except UnicodeDecodeError:
        raise JobError(path, [_at(None, "the job file is not UTF-8 text")]) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise JobError(path, [_toml_problem(error)]) from None
    return _Reader(path, data, scan_lines(text)).read()


# --- checks against the source and the destination --------------------------------------------
