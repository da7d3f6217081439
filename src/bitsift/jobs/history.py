"""The results history table: one row per (run, ranking, segment, attribute), written in one
transaction per run.

The schema is :data:`COLUMNS` (documented in docs/scheduled-runs.md) with version
:data:`SCHEMA_VERSION`, stored in every row. A missing table is created; a table of an older
schema version (without the columns of the versions after it, :data:`ADDED_BY_VERSION`) is read
as it is (those columns NULL) and migrated by the first write, under the writer lock, in the
write's transaction (ALTER TABLE ... ADD COLUMN of nullable columns; MySQL/MariaDB commit DDL at
once, so there the columns are added just before the write's transaction); an existing table
whose columns differ otherwise is an error and is never altered. Destinations are a DuckDB
file (written through DuckDB, SQL built by sqlglot) or a SQLAlchemy URL (written through
SQLAlchemy Core).

Writers of one history table take turns: a DuckDB file admits one writing process (the others
wait for it, up to :data:`WRITE_WAIT_SECONDS`), PostgreSQL and MySQL/MariaDB writers hold a lock
named after the table (an advisory lock, ``GET_LOCK``) for the whole write, and SQLite writers
start with ``BEGIN IMMEDIATE``. Two runs with one run id therefore replace each other's rows
instead of both inserting. The key columns (job, run id) compare byte for byte on every engine,
also where the column's collation ignores case or trailing spaces (MySQL/MariaDB)."""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import sqlalchemy as sa
from sqlglot import exp

from bitsift import jsonout
from bitsift.engines.masking import (
    mask_url,
    raw_at_in_password,
)
from bitsift.engines.sources import parse_table_name
from bitsift.errors import BitsiftError, Option, Problem, SpecError, parameter_name
from bitsift.numformat import cuts_json
from bitsift.run.result import Ranking
from bitsift.sql.dialects import SQLALCHEMY_DIALECTS, capabilities
from bitsift.version import __version__

#: Bumped whenever :data:`COLUMNS` changes; a table holding newer rows is refused.
SCHEMA_VERSION = 3
DEFAULT_TABLE = "bitsift_history"


class HistoryError(BitsiftError):
    """The results destination cannot be used: unreachable, incompatible table, failed write."""


@dataclass(frozen=True)
class HistoryColumn:
    """One column of the history table: its name, type family and meaning."""

    name: str
    #: "text", "integer", "float" or "timestamp".
    family: str
    description: str
    nullable: bool = False
    #: VARCHAR length where an engine needs one (MySQL); ``None`` means unbounded text.
    length: int | None = None


COLUMNS: tuple[HistoryColumn, ...] = (
    HistoryColumn("schema_version", "integer", "version of this table layout (currently 3)"),
    HistoryColumn("run_id", "text", "the run's id (`--run-id`, or generated from the time)",
                  length=100),
    HistoryColumn("run_at", "timestamp", "when the run started, UTC (stored without a zone)"),
    HistoryColumn("job", "text", "the job's name (`job` in the job file)", length=200),
    HistoryColumn("ranking", "text", "the ranking's name within the job", length=200),
    # Names come from the source, which may allow any length: stored unbounded.
    HistoryColumn("source_table", "text", "the table (or file) that was ranked"),
    HistoryColumn("target", "text", "the target column"),
    HistoryColumn("segment", "text", "segment values as a JSON object; empty (or NULL) for an "
                  "unsegmented ranking", nullable=True),
    HistoryColumn("attribute", "text", "the ranked column"),
    HistoryColumn("position", "integer", "1-based place in the ranking's sort order"),
    HistoryColumn("kind", "text", "`categorical` or `numeric` (quantile-binned)", length=20),
    HistoryColumn("distinct_values", "integer", "distinct values (bins for numeric attributes)"),
    HistoryColumn("rows_used", "integer", "rows in this attribute's counts"),
    HistoryColumn("rows_excluded", "integer", "rows left out because the target is NULL"),
    HistoryColumn("classes", "integer", "distinct target values"),
    HistoryColumn("target_entropy", "float", "H(Y) over the rows used, bits"),
    HistoryColumn("information_gain", "float", "IG = H(Y) - H(Y|X), bits"),
    HistoryColumn("gain_ratio", "float", "IG / H(X)"),
    HistoryColumn("symmetric_uncertainty", "float", "2 IG / (H(X) + H(Y))"),
    HistoryColumn("conditional_entropy", "float", "H(Y|X), bits"),
    HistoryColumn("attribute_entropy", "float", "H(X), bits"),
    HistoryColumn("g_statistic", "float", "G = 2 N ln2 IG"),
    HistoryColumn("dof", "integer", "degrees of freedom of the G-test"),
    HistoryColumn("p_value", "float", "chi-square survival function of G; NULL when the "
                  "weights are not whole numbers", nullable=True),
    HistoryColumn("flags", "text", "trust flags, comma-separated; empty (or NULL) when none",
                  nullable=True, length=255),
    HistoryColumn("options", "text", "the ranking's settings from the job file, as JSON"),
    HistoryColumn("bitsift_version", "text", "version of bitsift that wrote the row", length=32),
    # Schema version 2 (issue 18), appended: what ALTER TABLE ... ADD COLUMN gives an old table.
    HistoryColumn("information_gain_se", "float", "standard error of IG, bits; NULL with "
                  "fractional weights or in rows of schema version 1", nullable=True),
    HistoryColumn("information_gain_corrected", "float", "IG less its first-order bias "
                  "(r-1)(c-1)/(2 N ln 2); NULL in rows of schema version 1", nullable=True),
    HistoryColumn("information_gain_low", "float", "low end of the gain's interval at the "
                  "run's confidence (in options), clipped at 0", nullable=True),
    HistoryColumn("information_gain_high", "float", "high end of the gain's interval",
                  nullable=True),
    HistoryColumn("rank_low", "integer", "best plausible rank in the ranking (segment)",
                  nullable=True),
    HistoryColumn("rank_high", "integer", "worst plausible rank in the ranking (segment)",
                  nullable=True),
    # Schema version 3 (issue 21), appended.
    HistoryColumn("cut_points", "text", "the attribute's cut points as a JSON array: numbers "
                  "for numeric attributes, ISO 8601 strings for dated ones; NULL for "
                  "categorical ones and in rows of schema versions 1 and 2", nullable=True),
)
COLUMN_NAMES: tuple[str, ...] = tuple(c.name for c in COLUMNS)
#: The columns schema version 2 added to version 1.
ADDED_IN_2: tuple[HistoryColumn, ...] = COLUMNS[-7:-1]
#: The columns schema version 3 added to version 2, at the end of :data:`COLUMNS`.
ADDED_IN_3: tuple[HistoryColumn, ...] = COLUMNS[-1:]
#: The columns each version after the first added, in order: a table of version v lacks every
#: group after its own.
ADDED_BY_VERSION: tuple[tuple[HistoryColumn, ...], ...] = (ADDED_IN_2, ADDED_IN_3)


@dataclass(frozen=True)
class Destination:
    """Where results go: a DuckDB file or a SQLAlchemy URL, and a table (schema-qualified)."""

    location: str
    table: str = DEFAULT_TABLE

    @property
    def is_url(self) -> bool:
        return "://" in self.location and not self.location.startswith("duckdb:///")

    @property
    def path(self) -> Path:
        return Path(self.location.removeprefix("duckdb:///"))

    @property
    def display(self) -> str:
        """The location without a password, for messages."""
        if not self.is_url:
            return str(self.path)
        return mask_url(self.location)

    def sqlglot_dialect(self) -> str:
        if not self.is_url:
            return "duckdb"
        try:
            backend = sa.engine.make_url(self.location).get_backend_name()
        except Exception:  # noqa: BLE001 - reported by validate()
            return ""
        # SQLALCHEMY_DIALECTS names bitsift's dialects ("mariadb"); sqlglot's may differ.
        name = SQLALCHEMY_DIALECTS.get(backend)
        return capabilities(name).sqlglot_dialect if name else ""

    def table_name(self) -> exp.Table:
        """The table as ``[schema.]table``, every part quoted by sqlglot."""
        table = parse_table_name(self.table, self.sqlglot_dialect())
        if table.catalog and self.is_url:
            raise SpecError(f"results table must be [schema.]table, not {self.table!r}")
        return table

    def problems(self) -> list[str]:
        """Everything wrong with the destination that can be told without connecting."""
        return [p.message for p in self.keyed_problems()]

    def keyed_problems(self) -> list[Problem]:
        """:meth:`problems`, each about its key of a job's [results]: destination or table."""
        found = []
        if self.is_url and raw_at_in_password(self.location):
            # SQLAlchemy would read the rest of the password as the host: refuse it unsent.
            found.append(Problem.of(f"the password in {self.display} contains '@': write it "
                                    "as %40", key="destination"))
        elif self.is_url:
            try:
                sa.engine.make_url(self.location)
            except Exception:  # noqa: BLE001 - any parse failure
                found.append(Problem.of(f"not a valid database URL: {self.display}",
                                        key="destination"))
        elif not self.path.parent.is_dir():
            found.append(Problem.of(f"folder of the results file does not exist: "
                                    f"{self.path.parent}", key="destination"))
        try:
            self.table_name()
        except SpecError as error:
            found += [Problem.of(line, key="table") for line in
                      error.lines(_results_table_spelling)]
        return found


def _results_table_spelling(option: Option) -> str:
    """The table option, in a destination's problems, is the results table."""
    return "results table" if option.name == "table" else parameter_name(option)


@dataclass(frozen=True)
class RunInfo:
    """One run of a job as the history table knows it."""

    run_id: str
    run_at: _dt.datetime
    rows: int


def ranking_rows(ranking: Ranking, *, run_id: str, run_at: _dt.datetime, job: str,
                 ranking_name: str, options: Mapping[str, Any], segment: str = ""
                 ) -> list[dict[str, Any]]:
    """The history rows of one ranking, one per attribute, in the ranking's order."""
    stamp = _utc_naive(run_at)
    settings = options_json(options)
    rows = []
    for position, scored in enumerate(ranking.attributes, start=1):
        rows.append({
            "schema_version": SCHEMA_VERSION,
            "run_id": run_id,
            "run_at": stamp,
            "job": job,
            "ranking": ranking_name,
            "source_table": ranking.table,
            "target": ranking.target,
            "segment": segment,
            "attribute": scored.attribute,
            "position": position,
            "kind": scored.kind,
            "distinct_values": scored.distinct,
            "rows_used": scored.rows,
            "rows_excluded": ranking.rows_excluded,
            "classes": ranking.classes,
            "target_entropy": scored.target_entropy,
            "information_gain": scored.information_gain,
            "gain_ratio": scored.gain_ratio,
            "symmetric_uncertainty": scored.symmetric_uncertainty,
            "conditional_entropy": scored.conditional_entropy,
            "attribute_entropy": scored.attribute_entropy,
            "g_statistic": scored.g_statistic,
            "dof": scored.dof,
            "p_value": scored.p_value,
            "flags": ",".join(scored.flags),
            "options": settings,
            "bitsift_version": __version__,
            "information_gain_se": scored.information_gain_se,
            "information_gain_corrected": scored.information_gain_corrected,
            "information_gain_low": scored.information_gain_low,
            "information_gain_high": scored.information_gain_high,
            "rank_low": scored.rank_low,
            "rank_high": scored.rank_high,
            "cut_points": (None if scored.cuts is None
                           else cuts_json(scored.cuts, scored.temporal)),
        })
    return rows


def options_json(options: Mapping[str, Any]) -> str:
    """The history's ``options``: a ranking's settings from the job file as compact JSON.

    >>> options_json({"sort": "gain_ratio", "bins": 5})
    '{"bins":5,"sort":"gain_ratio"}'
    """
    return jsonout.dumps(dict(options), sort_keys=True, separators=(",", ":"), default=str)


def segment_json(segment: Mapping[str, Any] | None) -> str:
    """The history's ``segment`` value: the segment's values as a JSON object in ``--by``
    order, ``""`` for an unsegmented ranking.

    >>> segment_json({"region": "north", "tier": None}), segment_json(None)
    ('{"region":"north","tier":null}', '')
    """
    if segment is None:
        return ""
    return jsonout.dumps(dict(segment), separators=(",", ":"), ensure_ascii=False, default=str)


def _utc_naive(moment: _dt.datetime) -> _dt.datetime:
    if moment.tzinfo is not None:
        moment = moment.astimezone(_dt.UTC).replace(tzinfo=None)
    return moment


def columns_to_add(existing: Mapping[str, str]) -> list[HistoryColumn]:
    """The columns an older table lacks: every group of :data:`ADDED_BY_VERSION` after its
    version, whole (a table lacking only some of a group's columns, or a group but not the
    ones after it, is no older version: :func:`compatibility_problems` names what it misses)."""
    names = {name.lower() for name in existing}
    lacking: list[HistoryColumn] = []
    for group in reversed(ADDED_BY_VERSION):
        if any(c.name in names for c in group):
            break
        lacking[:0] = group
    return lacking


def compatibility_problems(existing: Mapping[str, str]) -> list[str]:
    """What makes an existing table (column name -> type family) unusable; empty when fine.
    A table of an older schema version (lacking the columns of the versions after it,
    :func:`columns_to_add`) is fine: it is migrated by the first write."""
    by_lower = {name.lower(): family for name, family in existing.items()}
    problems = []
    optional = {c.name for c in columns_to_add(existing)}
    missing = [c.name for c in COLUMNS if c.name not in by_lower and c.name not in optional]
    if missing:
        problems.append("missing column(s) " + ", ".join(missing))
    expected = set(COLUMN_NAMES)
    extra = sorted(name for name in by_lower if name not in expected)
    if extra:
        problems.append("unexpected column(s) " + ", ".join(extra))
    for column in COLUMNS:
        family = by_lower.get(column.name)
        if family is None:
            continue
        accepted = {column.family} | ({"decimal"} if column.family == "float" else set())
        if family not in accepted:
            problems.append(f"column {column.name} holds {family}, expected {column.family}")
    return problems
