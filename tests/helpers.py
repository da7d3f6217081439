"""Load the same generated table into DuckDB, SQLite, PostgreSQL and MariaDB, and the NumPy truth.

The warehouse, parity, safety and golden tests all compare engines on identical rows. A
:class:`Dataset` is plain Python rows plus a logical type per column; :func:`load` writes it
with plain DDL and ``executemany`` bind parameters (never values pasted into SQL), and
:func:`expected_metrics` computes what every engine must return with :mod:`bitsift.run.reference`.
"""

from __future__ import annotations

import dataclasses
import math
import random
import re
import traceback
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import duckdb
import numpy as np
import pytest
import sqlalchemy as sa
import sqlglot
from conftest import MARIADB_URL, POSTGRES_URL
from sqlglot import exp

import bitsift
from bitsift.cli import main
from bitsift.run import reference
from bitsift.run.api import METRICS_CHECKED
from bitsift.run.result import Ranking
from bitsift.run.session import Session
from bitsift.sql.dialects import CAPABILITIES, capabilities

#: Engines the test suite executes SQL on.
ENGINES: tuple[str, ...] = ("duckdb", "sqlite", "postgres", "mariadb")

#: Column DDL type per engine for the logical types a :class:`Dataset` uses. MariaDB text keeps
#: the server's default case-insensitive, PAD SPACE collation on purpose: bitsift must still
#: tell 'a' from 'A' and 'x' from 'x '.
COLUMN_TYPES: dict[str, dict[str, str]] = {
    "duckdb": {"text": "VARCHAR", "integer": "BIGINT", "float": "DOUBLE",
               "decimal": "DECIMAL(10, 2)", "date": "DATE", "timestamp": "TIMESTAMP"},
    "sqlite": {"text": "TEXT", "integer": "INTEGER", "float": "REAL", "decimal": "NUMERIC",
               "date": "DATE", "timestamp": "TIMESTAMP"},
    "postgres": {"text": "TEXT", "integer": "BIGINT", "float": "DOUBLE PRECISION",
                 "decimal": "NUMERIC(10, 2)", "date": "DATE", "timestamp": "TIMESTAMP"},
    "mariadb": {"text": "VARCHAR(100)", "integer": "BIGINT", "float": "DOUBLE",
                "decimal": "DECIMAL(10, 2)", "date": "DATE", "timestamp": "DATETIME"},
}

#: sqlglot dialect used to quote the scratch tables' names.
QUOTING_DIALECT: dict[str, str] = {
    "duckdb": "duckdb",
    "sqlite": "sqlite",
    "postgres": "postgres",
    "mariadb": "mysql",
}

#: Metrics compared with the reference, all to 1e-9 (the G statistic relative to its size).
COMPARED_METRICS: tuple[str, ...] = METRICS_CHECKED


@dataclass(frozen=True)
class Dataset:
    """Rows of one table and the logical type (``text``, ``integer``, ``float``, ``decimal``)
    of each column."""

    columns: tuple[tuple[str, str], ...]
    rows: list[tuple[Any, ...]]

    @property
    def names(self) -> list[str]:
        return [name for name, _ in self.columns]

    def column(self, name: str) -> list[Any]:
        index = self.names.index(name)
        return [row[index] for row in self.rows]

    def renamed(self, mapping: Mapping[str, str]) -> Dataset:
        """The same rows with some columns renamed."""
        columns = tuple((mapping.get(n, n), t) for n, t in self.columns)
        return dataclasses.replace(self, columns=columns)


#: Text values with the traps of real catalogs: case variants, a trailing space (PAD SPACE
#: collations compare 'x' = 'x '), accents (accent-insensitive collations), the empty string.
TRICKY_TEXT: tuple[str, ...] = ("a", "A", "b", "x", "x ", "é", "e", "É", "naïve", "日本", "")
TARGET_CLASSES: tuple[str, ...] = ("yes", "no", "No", "no ", "maybe")
TARGET_WEIGHTS: tuple[float, ...] = (0.55, 0.25, 0.1, 0.06, 0.04)
#: Columns of :func:`random_dataset` that bitsift bins by default (floats and decimals).
NUMERIC_COLUMNS: tuple[str, ...] = ("score", "ratio", "price")


def random_dataset(seed: int, rows: int = 1500) -> Dataset:
    """A random table with NULLs, skewed classes, tricky text, integers and floats to bin.

    ``y`` (text target) depends on ``word`` and ``score`` so the ranking is not all zeros;
    ``level`` is an integer attribute with ties (categorical unless forced numeric), ``score``
    and ``ratio`` are floats and ``price`` a DECIMAL(10, 2) (all three binned, see
    :data:`NUMERIC_COLUMNS`), ``noise`` is independent.
    """
    rng = random.Random(seed)
    data: list[tuple[Any, ...]] = []
    for _ in range(rows):
        word = rng.choice(TRICKY_TEXT) if rng.random() > 0.08 else None
        level = rng.choice((1, 2, 2, 3, 3, 3, 10, -4)) if rng.random() > 0.05 else None
        score = rng.gauss(0.0, 1.0) if rng.random() > 0.1 else None
        ratio = round(rng.random() * 7, 2)  # many ties, duplicate quantile cuts
        noise = rng.choice(("p", "q", "r"))
        price = round(rng.uniform(0, 50), 2) if rng.random() > 0.04 else None
        weights = list(TARGET_WEIGHTS)
        if word in ("a", "x"):
            weights[0] += 0.6
        if word in ("A", "x "):
            weights[2] += 0.6
        if score is not None and score > 0.8:
            weights[4] += 0.5
        y = rng.choices(TARGET_CLASSES, weights)[0] if rng.random() > 0.03 else None
        data.append((y, word, level, score, ratio, noise, price))
    columns = (("y", "text"), ("word", "text"), ("level", "integer"), ("score", "float"),
               ("ratio", "float"), ("noise", "text"), ("price", "decimal"))
    return Dataset(columns=columns, rows=data)


def quoted(dialect: str, *parts: str) -> str:
    """A dotted name with every part quoted by sqlglot for ``dialect``."""
    return ".".join(exp.to_identifier(p, quoted=True).sql(QUOTING_DIALECT[dialect]) for p in parts)


def _ddl(engine: str, parts: Sequence[str], dataset: Dataset) -> tuple[str, str]:
    """CREATE TABLE and the INSERT (with ``{p}`` for the driver's placeholder)."""
    types = COLUMN_TYPES[engine]
    columns = ", ".join(f"{quoted(engine, n)} {types[t]}" for n, t in dataset.columns)
    name = quoted(engine, *parts)
    marks = ", ".join(["{p}"] * len(dataset.columns))
    return f"CREATE TABLE {name} ({columns})", f"INSERT INTO {name} VALUES ({marks})"


def fill_duckdb(connection: duckdb.DuckDBPyConnection, parts: Sequence[str],
                dataset: Dataset) -> None:
    """Create and fill the table in an open DuckDB connection."""
    create, _ = _ddl("duckdb", parts, dataset)
    connection.execute(create)
    # One list parameter per column, unnested side by side: row-by-row executemany is slow
    # in DuckDB, and this is still bind parameters only.
    types = COLUMN_TYPES["duckdb"]
    columns = ", ".join(f"UNNEST(CAST(? AS {types[t]}[]))" for _, t in dataset.columns)
    values = [list(column) for column in zip(*dataset.rows, strict=True)]
    connection.execute(f"INSERT INTO {quoted('duckdb', *parts)} SELECT {columns}", values)


def fill_sqlalchemy(engine_name: str, connection: sa.Connection, parts: Sequence[str],
                    dataset: Dataset) -> None:
    """Create and fill the table through a SQLAlchemy connection (caller commits)."""
    create, insert = _ddl(engine_name, parts, dataset)
    mark = "?" if connection.dialect.paramstyle == "qmark" else "%s"
    # no_parameters: a '%' in a column name is not a placeholder (the INSERT names none).
    connection.exec_driver_sql(create, execution_options={"no_parameters": True})
    connection.exec_driver_sql(insert.replace("{p}", mark), list(dataset.rows))


@dataclass
class Loaded:
    """A table loaded into one engine: what to pass to ``bitsift.rank`` as SOURCE and --table."""

    engine: str
    source: Any
    table: str
    url: str | None = None
    #: The scratch schema (PostgreSQL) or database (MariaDB) holding the table.
    schema: str | None = None


@contextmanager
def loaded(engine: str, dataset: Dataset, request: pytest.FixtureRequest,
           table: str = "t", *, duckdb_file: bool = False) -> Iterator[Loaded]:
    """Load ``dataset`` as ``table`` into ``engine``; PostgreSQL and MariaDB use the conftest
    fixtures ``pg_schema`` / ``mariadb_database`` (a unique schema dropped afterwards).

    DuckDB gets an in-memory connection, or with ``duckdb_file`` a database file (its path is
    the SOURCE, as on the command line)."""
    if engine == "duckdb" and duckdb_file:
        path = request.getfixturevalue("tmp_path") / "bitsift_test.duckdb"
        with duckdb.connect(str(path)) as connection:
            fill_duckdb(connection, [table], dataset)
        yield Loaded(engine, str(path), quoted("duckdb", table))
        return
    if engine == "duckdb":
        connection = duckdb.connect()
        fill_duckdb(connection, [table], dataset)
        try:
            yield Loaded(engine, connection, quoted("duckdb", table))
        finally:
            connection.close()
        return
    if engine == "sqlite":
        tmp_path: Path = request.getfixturevalue("tmp_path")
        url = f"sqlite:///{tmp_path / 'bitsift_test.sqlite'}"
        parts = [table]
    elif engine == "postgres":
        url = POSTGRES_URL
        parts = [request.getfixturevalue("pg_schema"), table]
    elif engine == "mariadb":
        url = MARIADB_URL
        parts = [request.getfixturevalue("mariadb_database"), table]
    else:  # pragma: no cover - a typo in a test
        raise ValueError(engine)
    writer = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with writer.begin() as connection:
            fill_sqlalchemy(engine, connection, parts, dataset)
    finally:
        writer.dispose()
    yield Loaded(engine, url, quoted(engine, *parts), url=url,
                 schema=parts[0] if len(parts) > 1 else None)


def run_sql(where: Loaded, sql: str) -> list[dict[str, Any]]:
    """Execute a statement as a user pasting it would: unqualified names resolve in the
    scratch schema (PostgreSQL search_path) or database (MariaDB's URL)."""
    if where.engine == "duckdb":
        connection = (duckdb.connect(where.source, read_only=True)
                      if isinstance(where.source, str) else where.source)
        cursor = connection.execute(sql)
        names = [d[0] for d in cursor.description]
        rows = [dict(zip(names, row, strict=True)) for row in cursor.fetchall()]
        if connection is not where.source:
            connection.close()
        return rows
    assert where.url is not None
    url = sa.make_url(where.url)
    if where.engine == "mariadb":
        url = url.set(database=where.schema)
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            if where.engine == "postgres":
                schema = quoted("postgres", where.schema or "")
                connection.exec_driver_sql(f"SET search_path TO {schema}")
            result = connection.exec_driver_sql(sql, execution_options={"no_parameters": True})
            return [dict(row._mapping) for row in result]
    finally:
        engine.dispose()


def rank_with(source: Any, table: str | None, target: str, *, strategy: str | None = None,
              quantile: str | None = None, caps: Mapping[str, Any] | None = None,
              policy: Mapping[str, Any] | None = None, **options: Any) -> Ranking:
    """``bitsift.rank`` with the dialect's count strategy / quantile method (or any other
    capability in ``caps``, and run-policy field in ``policy``) overridden."""
    with Session.open(source, table) as session:
        overrides = {k: v for k, v in (("count_strategy", strategy), ("quantile", quantile)) if v}
        session.engine.caps = dataclasses.replace(session.engine.caps, **overrides,
                                                  **(caps or {}))
        session.engine.policy = dataclasses.replace(session.engine.policy, **(policy or {}))
        return bitsift.rank(session, target, **options)


def numpy_cuts(values: Sequence[Any], y: Sequence[Any], bins: int) -> list[float]:
    """Quantile boundaries as bitsift defines them: rows with a target and a value, linear
    interpolation (numpy's default), duplicates dropped."""
    kept = [float(v) for v, t in zip(values, y, strict=True) if v is not None and t is not None]
    if not kept:
        return []
    levels = [round(j / bins, 12) for j in range(1, bins)]
    return sorted({float(q) for q in np.quantile(np.asarray(kept), levels) if math.isfinite(q)})


def expected_metrics(dataset: Dataset, target: str, attribute: str, *, numeric: bool,
                     missing: str = "category", bins: int = 10) -> dict[str, Any]:
    """The NumPy reference's metrics (and cuts) for one attribute of ``dataset``."""
    y = dataset.column(target)
    values = dataset.column(attribute)
    cuts = None
    if numeric:
        cuts = numpy_cuts(values, y, bins)
        values = reference.bin_values(values, cuts)
    table = reference.contingency(values, y, missing)
    result: dict[str, Any] = dict(reference.metrics(table))
    result["cuts"] = cuts
    return result


def assert_matches_reference(ranking: Ranking, dataset: Dataset, target: str, *,
                             numeric: Sequence[str] = (), missing: str = "category",
                             bins: int = 10, context: str = "") -> None:
    """Every attribute of ``ranking`` has the reference's metrics to 1e-9."""
    assert ranking.attributes, context
    for scored in ranking.attributes:
        where = f"{context} attribute {scored.attribute!r}"
        expected = expected_metrics(dataset, target, scored.attribute,
                                    numeric=scored.attribute in numeric, missing=missing,
                                    bins=bins)
        assert scored.distinct == expected["distinct"], where
        assert scored.dof == expected["dof"], where
        assert scored.rows == expected["rows"], where
        for metric in COMPARED_METRICS:
            got, want = getattr(scored, metric), expected[metric]
            assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), (
                f"{where}: {metric} = {got!r}, reference {want!r}"
            )
        if expected["cuts"] is not None:
            assert scored.cuts is not None, where
            assert len(scored.cuts) == len(expected["cuts"]), f"{where}: cuts {scored.cuts}"
            for got, want in zip(scored.cuts, expected["cuts"], strict=True):
                assert abs(got - want) <= 1e-12 * max(1.0, abs(want)), f"{where}: cuts"


def assert_same_ranking(got: Ranking, want: Ranking, context: str = "") -> None:
    """Two rankings of the same table agree on every metric to 1e-9, attribute by attribute."""
    assert [a.attribute for a in got.attributes] == [a.attribute for a in want.attributes], context
    assert (got.rows, got.rows_excluded, got.classes) == (want.rows, want.rows_excluded,
                                                          want.classes), context
    for a, b in zip(got.attributes, want.attributes, strict=True):
        where = f"{context} {a.attribute}"
        assert (a.distinct, a.dof, a.rows) == (b.distinct, b.dof, b.rows), where
        assert (a.rank_low, a.rank_high) == (b.rank_low, b.rank_high), where
        for metric in COMPARED_METRICS:
            x, w = getattr(a, metric), getattr(b, metric)
            if x is None or w is None:  # no interval: nothing measured, on both sides
                assert x is w, f"{context} {a.attribute} {metric}: {x} / {w}"
                continue
            assert abs(x - w) <= 1e-9 * max(1.0, abs(w)), f"{context} {a.attribute} {metric}"


# --- paste-ready SQL: golden files -------------------------------------------------------------

GOLDEN_DIR = Path(__file__).resolve().parent / "golden"
#: Every dialect `bitsift sql --dialect` must write: each entry of the capability table, so a
#: new dialect gets golden files (and fails until they are generated) without a list to edit.
PASTE_DIALECTS: tuple[str, ...] = tuple(CAPABILITIES)
#: The golden statements: described without a connection, so every dialect gets the same spec.
#: The table name is unqualified so the same text runs in a scratch schema (search_path) or
#: database. Columns are those of :func:`random_dataset`.
GOLDEN_VARIANTS: dict[str, dict[str, Any]] = {
    "default": {"attributes": "word,level,noise", "numeric": "score,ratio", "bins": 4},
    "where_drop": {"attributes": "word,level", "numeric": "score", "bins": 3,
                   "missing": "drop", "where": "level <> 3 OR word IS NULL"},
    # Best split, equal width and quantile side by side, computed inside the statement.
    "binning": {"attributes": "word,noise", "numeric": "score,ratio,price", "bins": 4,
                "binning": "best-split", "binning_for": "ratio=equal-width,price=quantile:3",
                "where": "word <> 'b' OR word IS NULL"},
}
GOLDEN_TABLE = "bitsift_golden"
_STAMP = re.compile(r"^-- bitsift \S+ - (.*), \d{4}-\d{2}-\d{2} \d{2}:\d{2} UTC$", re.MULTILINE)


def golden_path(dialect: str, variant: str) -> Path:
    return GOLDEN_DIR / f"{dialect}.{variant}.sql"


def paste_sql(dialect: str, variant: str) -> str:
    """The paste-ready statement of a golden variant, with version and time masked."""
    text = bitsift.statement(table=GOLDEN_TABLE, target="y", dialect=dialect,
                             **GOLDEN_VARIANTS[variant])
    return _STAMP.sub(r"-- bitsift <version> - \1, <time>", text)


def invalid_constructs(sql: str, dialect: str) -> list[str]:
    """Constructs that sqlglot may emit but the dialect rejects or gets wrong (design.md's
    pitfalls); an empty list means none was found."""
    caps = capabilities(dialect)
    problems: list[str] = []
    body = "\n".join(line for line in sql.splitlines() if not line.startswith("--"))

    def forbid(pattern: str, why: str) -> None:
        if re.search(pattern, body, re.IGNORECASE):
            problems.append(why)

    forbid(r"\bGROUPING_ID\b", "GROUPING_ID (invalid on postgres, trino, clickhouse)")
    forbid(r"\bGROUPING\s*\([^()]*,", "GROUPING() with several columns")
    forbid(r"APPROX|PERCENTILE_APPROX|\bquantile\s*\(", "an approximate quantile")
    forbid(r"\bPERCENTILE_CONT\s*\([^()]*,", "two-argument PERCENTILE_CONT")
    forbid(r"\bTABLESAMPLE\b", "TABLESAMPLE")
    forbid(r"\bVALUES\b", "a VALUES list (column aliases break on SQLite and Oracle)")
    forbid(r"\bFULL\s+(OUTER\s+)?JOIN\b", "FULL JOIN (not in MySQL/MariaDB)")
    if dialect != "tsql":
        forbid(r"\bLOG\s*\(", "LOG() (its base differs between engines: use LN)")
    if caps.count_strategy != "grouping_sets":
        forbid(r"\bGROUPING\b", "GROUPING SETS / GROUPING() on an engine without them")
    if caps.quantile != "percentile_cont":
        forbid(r"\bWITHIN\s+GROUP\b", "an ordered-set aggregate the engine lacks or approximates")
    if dialect in ("mysql", "mariadb"):
        forbid(r"\bVARBINARY\b", "CAST(... AS VARBINARY) (MySQL/MariaDB cast to BINARY)")
    if dialect in ("tsql", "oracle"):
        forbid(r"\bLIMIT\b", "LIMIT")
        forbid(r"\bTRUE\b|\bFALSE\b", "a boolean literal")
        forbid(r"\bCLOB\b|\(MAX\)", "a LOB / MAX type")
    if dialect in ("tsql", "mysql", "mariadb"):
        forbid(r"\bNULLS\s+(FIRST|LAST)\b", "NULLS FIRST/LAST")
    if dialect == "tsql":
        forbid(r"\bCOUNT\s*\(", "COUNT() (32-bit on SQL Server: COUNT_BIG)")
    tree = sqlglot.parse_one(body, read=caps.sqlglot_dialect)
    if any(isinstance(n, exp.Log) and not n.args.get("expression") for n in tree.walk()):
        problems.append("one-argument LOG")
    if dialect == "oracle" and any(
        not (s.args.get("from_") or s.args.get("from")) for s in tree.find_all(exp.Select)
    ):
        problems.append("SELECT without FROM (Oracle needs FROM DUAL)")
    return problems


@dataclass
class Outcome:
    code: int
    out: str
    err: str

    @property
    def texts(self) -> tuple[str, str]:
        return self.out, self.err


def run_main(capsys: pytest.CaptureFixture[str], *args: str) -> Outcome:
    """``bitsift ARGS`` in this process (quicker than a subprocess). With --debug an error
    escapes ``main`` as it would reach Python's top level: its traceback, formatted as Python
    prints it, is added to stderr."""
    trace = ""
    try:
        main(list(args))
        code = 0
    except SystemExit as exit_:
        code = exit_.code if isinstance(exit_.code, int) else 1
    except Exception as error:  # noqa: BLE001 - what --debug lets through
        code = 1
        trace = "".join(traceback.format_exception(error))
    out, err = capsys.readouterr()
    return Outcome(code, out, err + trace)
