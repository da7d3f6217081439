"""Fuzzing (hypothesis) with hostile names and values on DuckDB, SQLite, PostgreSQL and MariaDB.

Each example creates a uniquely named table whose table and column names mix quotes,
backticks, spaces, unicode, reserved words, bitsift's own SQL aliases and long names; whose
values are empty strings, unicode, NULLs, the extreme 64-bit integers, subnormal and huge
floats and, where the engine stores them, NaN and infinities; and whose target has random
class skews. bitsift must then either rank every attribute exactly as :mod:`bitsift.run.reference`
does on the rows the engine really stored (to 1e-9), or refuse with one clear one-line
:class:`~bitsift.errors.DataError` when the target has fewer than two classes. Every statement
that reaches the database is recorded (a SQLAlchemy ``before_cursor_execute`` hook; DuckDB's
fetch) and must be a read-only SELECT, catalog introspection, or one of the session
statements bitsift documents.

Engine limits on names, decided here: names up to the engine's limit work everywhere
(PostgreSQL 63 bytes, MariaDB 64 characters, DuckDB and SQLite unlimited); a longer name
cannot exist in PostgreSQL or MariaDB, so asking for one is refused with an "unknown column"
or "unknown table" error naming what the database holds (PostgreSQL's cut name as the
suggestion).
"""

from __future__ import annotations

import math
import os
import re
import unicodedata
import uuid
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
import sqlglot
from conftest import MARIADB_URL, POSTGRES_URL, unique_name
from helpers import (
    COLUMN_TYPES,
    COMPARED_METRICS,
    Dataset,
    fill_duckdb,
    numpy_cuts,
    quoted,
)
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats
from sqlglot import exp

import bitsift
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.errors import BitsiftError, ColumnError, DataError, SpecError, TableNotFoundError
from bitsift.run import reference

# --- what may reach the database ----------------------------------------------------------------

#: Session statements bitsift documents (README "Safety"): read-only transactions, timeouts,
#: SQLite's query_only pragma and its reset.
SESSION_STATEMENTS = re.compile(
    r"^(SET TRANSACTION READ ONLY|SET LOCAL statement_timeout = \d+"
    r"|SET LOCAL work_mem = '256MB'|PRAGMA query_only = (ON|OFF))$"
)
#: MariaDB's per-statement timeout prefix, in front of a SELECT.
TIMEOUT_PREFIX = re.compile(r"^SET STATEMENT max_statement_time = \d+(\.\d+)? FOR ")
#: SQLAlchemy's catalog introspection that is not a SELECT (MariaDB, SQLite).
_BACKTICKED = r"`(?:[^`]|``)*`"
_DOUBLE_QUOTED = r'"(?:[^"]|"")*"'
CATALOG_STATEMENTS = re.compile(
    rf"^(SHOW FULL TABLES FROM {_BACKTICKED}|SHOW CREATE TABLE {_BACKTICKED}(\.{_BACKTICKED})?"
    rf"|PRAGMA (main|{_DOUBLE_QUOTED})\.table_x?info\({_DOUBLE_QUOTED}\))$"
)
_WRITE_NODES: tuple[type[exp.Expression], ...] = (exp.DDL, exp.DML, exp.Command, exp.Into,
                                                  exp.Set)
SQLGLOT_READ = {"postgresql": "postgres", "mysql": "mysql", "mariadb": "mysql",
                "sqlite": "sqlite", "duckdb": "duckdb"}


def unexpected_statements(statements: Sequence[str], dialect: str) -> list[str]:
    """The statements that are neither one read-only query, nor catalog introspection, nor a
    documented session statement."""
    bad = []
    for raw in statements:
        text = TIMEOUT_PREFIX.sub("", raw.strip(), count=1)
        if SESSION_STATEMENTS.match(text) or CATALOG_STATEMENTS.match(text):
            continue
        # SQLAlchemy's introspection queries carry pyformat placeholders.
        parsable = re.sub(r"%\(\w+\)s", "NULL", text)
        try:
            trees = [t for t in sqlglot.parse(parsable, read=SQLGLOT_READ[dialect]) if t]
        except sqlglot.errors.SqlglotError:
            bad.append(raw)
            continue
        if (len(trees) != 1 or not isinstance(trees[0], exp.Query)
                or any(isinstance(node, _WRITE_NODES) for node in trees[0].walk())):
            bad.append(raw)
    return bad


@contextmanager
def sqlalchemy_statements() -> Iterator[list[tuple[str, str]]]:
    """(dialect, statement) of everything any SQLAlchemy engine sends to a cursor meanwhile."""
    seen: list[tuple[str, str]] = []

    def hook(connection: sa.Connection, _cursor: Any, statement: str, *_: Any) -> None:
        seen.append((connection.dialect.name, statement))

    sa.event.listen(sa.Engine, "before_cursor_execute", hook)
    try:
        yield seen
    finally:
        sa.event.remove(sa.Engine, "before_cursor_execute", hook)


@contextmanager
def duckdb_statements() -> Iterator[list[str]]:
    """Every statement DuckDB engines fetch meanwhile (an observer: DuckDB still runs them)."""
    seen: list[str] = []
    original = DuckDBEngine.fetch

    def fetch(self: DuckDBEngine, sql: str) -> Any:
        seen.append(sql)
        return original(self, sql)

    DuckDBEngine.fetch = fetch  # type: ignore[method-assign]
    try:
        yield seen
    finally:
        DuckDBEngine.fetch = original  # type: ignore[method-assign]


def test_statement_classifier_refuses_writes() -> None:
    assert unexpected_statements(["SELECT 1", "WITH a AS (SELECT 1 AS x) SELECT x FROM a",
                                  "SET TRANSACTION READ ONLY",
                                  "SET STATEMENT max_statement_time = 1.500000 FOR SELECT 1",
                                  "PRAGMA main.table_xinfo(\"t;\"\"\")",
                                  "SHOW CREATE TABLE `d`.`;``DROP`"], "mysql") == []
    writes = ["DROP TABLE t", "INSERT INTO t VALUES (1)", "SELECT 1; DROP TABLE t",
              "CREATE TABLE x AS SELECT 1", "SELECT 1 INTO x", "SET GLOBAL read_only = 0",
              "SET STATEMENT max_statement_time = 1 FOR DELETE FROM t", "UPDATE t SET a = 1",
              "PRAGMA query_only = OFF; DROP TABLE t", "GRANT ALL ON t TO u",
              "SHOW CREATE TABLE `d`.`t`; DROP TABLE t", "PRAGMA main.table_xinfo(\"t\"); DROP"]
    assert unexpected_statements(writes, "mysql") == writes


# --- the engines' limits ------------------------------------------------------------------------

#: The longest identifier each engine keeps (PostgreSQL: NAMEDATALEN - 1 bytes; MariaDB: 64
#: characters); DuckDB and SQLite have none.
NAME_BYTES = {"postgres": 63}
NAME_CHARS = {"mariadb": 64}
#: Floats each engine stores as they are (MariaDB's DOUBLE refuses NaN and infinities; SQLite
#: stores NaN as NULL, which the read-back below reflects).
NON_FINITE = {"duckdb": True, "sqlite": True, "postgres": True, "mariadb": False}

RESERVED = ("select", "from", "where", "group", "order", "by", "table", "null", "true", "user",
            "default", "grouping", "sets", "window", "rows", "key", "index", "values", "limit",
            # bitsift's own aliases in the generated SQL
            "y", "a1", "a2", "attr", "n", "n_x", "src", "base", "counts", "cells", "bounds",
            "c1_1", "k", "i", "e", "g", "gains", "excluded", "attribute_index")
HOSTILE_CHARS = list("\"'`;%?$:@\\ .-()[]*/#,=+|!&^~<>{}") + list("éÉßΩ日本ıİﬁ\u00a0\u3000")


def fit_name(engine: str, name: str) -> str:
    """``name`` made storable by ``engine``: cut to its length limit, no trailing whitespace on
    MariaDB (it refuses such names), never empty."""
    if engine in NAME_CHARS:
        name = name[: NAME_CHARS[engine]].rstrip()
    if engine in NAME_BYTES:
        while len(name.encode()) > NAME_BYTES[engine]:
            name = name[:-1]
    return name or "_"


def fit_table_name(engine: str, name: str) -> str:
    """``fit_name``, and on MariaDB short enough as a file name: it stores a table as files
    named with every character but [A-Za-z0-9_] written as 5 bytes (@XXXX), 255 bytes at most."""
    name = fit_name(engine, name)
    if engine == "mariadb":
        while sum(1 if c.isascii() and (c.isalnum() or c == "_") else 5 for c in name) > 200:
            name = name[:-1].rstrip()
    return name or "_"


def collision_key(name: str) -> str:
    """Names engines may consider equal (case, accents, trailing spaces) share a key."""
    decomposed = unicodedata.normalize("NFKD", name)
    bare = "".join(c for c in decomposed if not unicodedata.combining(c))
    return bare.casefold().rstrip()


name_characters = st.one_of(
    st.sampled_from(HOSTILE_CHARS),
    st.characters(codec="utf-8", categories=("L", "N", "P", "S", "Zs"), max_codepoint=0xFFFF),
)
names = st.one_of(
    st.sampled_from(RESERVED),
    st.text(name_characters, min_size=1, max_size=16),
    # Long names, around and beyond PostgreSQL's and MariaDB's limits (then cut to fit).
    st.builds(lambda stem, size: (stem * 200)[:size],
              st.text(name_characters, min_size=1, max_size=4), st.integers(50, 300)),
)

TEXT_VALUES = ("", " ", "a", "A", "a ", "'", '"', "`", "\\", "%", "%s", "?", ";", "NULL",
               "null", "\t", "\n", "é", "É", "ﬁ", "ı", "日本", "🙂", "x" * 100)
text_values = st.one_of(
    st.sampled_from(TEXT_VALUES),
    # Any character but NUL, which PostgreSQL's text cannot hold.
    st.text(st.characters(codec="utf-8", exclude_characters="\x00"), max_size=12),
)
EXTREME_INTEGERS = (0, 1, -1, 2**31 - 1, -(2**31), 2**31, 2**53 + 1, 2**63 - 1, -(2**63))
integer_values = st.one_of(st.sampled_from(EXTREME_INTEGERS),
                           st.integers(-(2**63), 2**63 - 1))
EXTREME_FLOATS = (0.0, -0.0, 5e-324, -5e-324, 2.2250738585072014e-308, 1e-300, 1e300,
                  1.7976931348623157e308, -1.7976931348623157e308, 0.1, 1 / 3)


def float_values(engine: str) -> st.SearchStrategy[float]:
    finite = st.one_of(st.sampled_from(EXTREME_FLOATS),
                       st.floats(allow_nan=False, allow_infinity=False))
    if NON_FINITE[engine]:
        return st.one_of(finite, st.sampled_from([math.nan, math.inf, -math.inf]))
    return finite


VALUE_KINDS = ("text", "integer", "float")


@st.composite
def hostile_tables(draw: st.DrawFn, engine: str) -> tuple[str, Dataset]:
    """A table name and a dataset: target ``y``-like column first, then 1-4 attributes."""
    chosen = draw(st.lists(names.map(lambda n: fit_name(engine, n)), min_size=2, max_size=5,
                           unique_by=collision_key))
    table = fit_table_name(engine, draw(names))
    rows = draw(st.integers(0, 40))
    # Target: text or integer, 1-6 classes with skewed weights, some NULLs.
    target_kind = draw(st.sampled_from(("text", "integer")))
    classes = draw(st.lists(text_values if target_kind == "text" else integer_values,
                            min_size=1, max_size=6, unique=True))
    weights = draw(st.lists(st.integers(1, 60), min_size=len(classes), max_size=len(classes)))
    pool: list[Any] = [c for c, w in zip(classes, weights, strict=True) for _ in range(w)]
    if draw(st.booleans()):
        pool += [None] * draw(st.integers(1, 30))
    columns: list[list[Any]] = [draw(st.lists(st.sampled_from(pool), min_size=rows,
                                              max_size=rows))]
    kinds = [target_kind]
    for _ in chosen[1:]:
        kind = draw(st.sampled_from(VALUE_KINDS))
        strategy = {"text": text_values, "integer": integer_values,
                    "float": float_values(engine)}[kind]
        values = draw(st.lists(strategy, min_size=1, max_size=6))
        if draw(st.booleans()):
            values.append(None)
        columns.append(draw(st.lists(st.sampled_from(values), min_size=rows, max_size=rows)))
        kinds.append(kind)
    dataset = Dataset(columns=tuple(zip(chosen, kinds, strict=True)),
                      rows=list(zip(*columns, strict=True)) if rows else [])
    return table, dataset


# --- loading and reading back ------------------------------------------------------------------


@pytest.fixture(scope="module")
def pg_fuzz_schema() -> Iterator[str]:
    yield from _scratch("postgres")


@pytest.fixture(scope="module")
def mariadb_fuzz_database() -> Iterator[str]:
    yield from _scratch("mariadb")


def _scratch(engine: str) -> Iterator[str]:
    url = POSTGRES_URL if engine == "postgres" else MARIADB_URL
    writer = sa.create_engine(url, poolclass=sa.pool.NullPool)
    name = unique_name("bitsift_fuzz")
    try:
        with writer.begin() as connection:
            if engine == "postgres":
                connection.exec_driver_sql(f'CREATE SCHEMA "{name}"')
            else:
                connection.exec_driver_sql(f"CREATE DATABASE `{name}` CHARACTER SET utf8mb4")
    except sa.exc.OperationalError as error:
        pytest.fail(f"{engine} unreachable: {error}")
    try:
        yield name
    finally:
        with writer.begin() as connection:
            if engine == "postgres":
                connection.exec_driver_sql(f'DROP SCHEMA "{name}" CASCADE')
            else:
                connection.exec_driver_sql(f"DROP DATABASE `{name}`")
        writer.dispose()


def _create_empty(engine: str, parts: Sequence[str], dataset: Dataset) -> str:
    """CREATE TABLE for a dataset without rows (the helpers' loaders insert at least one)."""
    types = COLUMN_TYPES[engine]
    columns = ", ".join(f"{quoted(engine, n)} {types[t]}" for n, t in dataset.columns)
    return f"CREATE TABLE {quoted(engine, *parts)} ({columns})"


def _read_back(rows: list[tuple[Any, ...]], dataset: Dataset) -> Dataset:
    return Dataset(columns=dataset.columns, rows=[tuple(r) for r in rows])


@contextmanager
def stored(engine: str, table: str, dataset: Dataset, place: str | None
           ) -> Iterator[tuple[Any, str, Dataset]]:
    """Load ``dataset``; yield SOURCE, --table (quoted for the engine) and the rows as the
    engine stored them (SQLite turns NaN into NULL, MariaDB -0.0 into 0.0). The table is
    dropped afterwards."""
    select = "SELECT " + ", ".join(quoted(engine, n) for n in dataset.names) + " FROM "
    if engine == "duckdb":
        connection = duckdb.connect()
        try:
            if dataset.rows:
                fill_duckdb(connection, [table], dataset)
            else:
                connection.execute(_create_empty(engine, [table], dataset))
            back = connection.execute(select + quoted(engine, table)).fetchall()
            yield connection, quoted(engine, table), _read_back(back, dataset)
        finally:
            connection.close()
        return
    assert place is not None
    url = {"sqlite": f"sqlite:///{place}", "postgres": POSTGRES_URL, "mariadb": MARIADB_URL}[engine]
    parts = [table] if engine == "sqlite" else [place, table]
    writer = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with writer.begin() as connection:
            connection.exec_driver_sql(_create_empty(engine, parts, dataset),
                                       execution_options={"no_parameters": True})
            if dataset.rows:
                # A '%' in the table's name is not a placeholder: doubled for pyformat drivers.
                name = quoted(engine, *parts)
                if connection.dialect.paramstyle != "qmark":
                    name = name.replace("%", "%%")
                mark = "?" if connection.dialect.paramstyle == "qmark" else "%s"
                marks = ", ".join([mark] * len(dataset.columns))
                connection.exec_driver_sql(f"INSERT INTO {name} VALUES ({marks})",
                                           list(dataset.rows))
            back = connection.exec_driver_sql(select + quoted(engine, *parts),
                                              execution_options={"no_parameters": True}).all()
        yield url, quoted(engine, *parts), _read_back(back, dataset)
    finally:
        with writer.begin() as connection:
            connection.exec_driver_sql("DROP TABLE " + quoted(engine, *parts),
                                       execution_options={"no_parameters": True})
        writer.dispose()


# --- the property -------------------------------------------------------------------------------


def assert_ranked_like_reference(ranking: bitsift.Ranking, data: Dataset) -> None:
    target = data.names[0]
    y = data.column(target)
    present = [v for v in y if v is not None]
    assert (ranking.rows, ranking.rows_excluded) == (len(present), len(y) - len(present))
    assert ranking.classes == len(set(present))
    assert sorted(a.attribute for a in ranking.attributes) == sorted(data.names[1:])
    kinds = dict(data.columns)
    for scored in ranking.attributes:
        values = data.column(scored.attribute)
        if kinds[scored.attribute] == "float":
            assert scored.kind == "numeric"
            cuts = scored.cuts or []
            assert cuts == sorted(set(cuts)) and all(math.isfinite(c) for c in cuts)
            finite = [v for v, t in zip(values, y, strict=True) if v is not None and t is not None]
            if all(math.isfinite(v) and abs(v) < 1e300 for v in finite):
                # Ordinary numbers: the engine's quantiles are numpy's, to rounding (DuckDB's
                # quantile_cont interpolates tied values as lo*(1-d) + hi*d, which can add a
                # cut one ulp above a tied value: no stored value falls between the two).
                want = numpy_cuts(values, y, 10)
                assert same_cuts(cuts, want), (scored.attribute, cuts, want)
            values = reference.bin_values(values, cuts)
        else:
            assert scored.kind == "categorical"
        expected = reference.metrics(reference.contingency(values, y))
        where = f"attribute {scored.attribute!r}"
        assert (scored.distinct, scored.dof, scored.rows) == (
            expected["distinct"], expected["dof"], expected["rows"]), where
        for metric in COMPARED_METRICS:
            got, want = getattr(scored, metric), expected[metric]
            tolerance = 1e-9 * max(1.0, abs(want))
            if metric == "p_value":
                tolerance += p_value_spread(expected["g_statistic"], scored.dof)
            assert abs(got - want) <= tolerance, f"{where}: {metric} {got} {want}"


def same_cuts(got: Sequence[float], want: Sequence[float]) -> bool:
    """Every cut of each list is within 1e-12 (relative) of a cut of the other."""

    def near(a: float, cuts: Sequence[float]) -> bool:
        return any(abs(a - b) <= 1e-12 * max(1.0, abs(b)) for b in cuts)

    return all(near(a, want) for a in got) and all(near(b, got) for b in want)


def p_value_spread(g: float, dof: int) -> float:
    """How far the p-value moves when G moves by the 1e-9 it is compared to.

    Near G = 0 the chi-square survival function is steep (its slope is infinite at 0 for one
    degree of freedom): an IG of 1e-16 bits, rounding noise, changes p in the 8th digit.
    """
    if dof <= 0:
        return 0.0
    delta = 1e-9 * max(1.0, abs(g))
    return float(stats.chi2.sf(max(g - delta, 0.0), dof) - stats.chi2.sf(g + delta, dof))


def check_example(engine: str, table: str, dataset: Dataset, place: str | None,
                  timeout: float | None) -> None:
    with stored(engine, table, dataset, place) as (source, table_text, data):
        target = data.names[0]
        present = {v for v in data.column(target) if v is not None}
        outcome: bitsift.Ranking | BitsiftError
        with sqlalchemy_statements() as sent, duckdb_statements() as fetched:
            try:
                outcome = bitsift.rank(source, table=table_text, target=target, timeout=timeout)
            except BitsiftError as error:
                outcome = error
        if engine == "duckdb":
            statements, dialect = fetched, "duckdb"
        else:
            statements = [s for _, s in sent]
            dialect = sent[0][0] if sent else engine
        assert statements, "no statement was recorded"
        assert unexpected_statements(statements, dialect) == []
        if len(present) < 2:
            assert isinstance(outcome, DataError), outcome
            message = str(outcome)
            assert "\n" not in message and message
            assert any(w in message for w in ("single class", "NULL", "no rows")), message
        else:
            assert isinstance(outcome, bitsift.Ranking), f"refused: {outcome}"
            assert_ranked_like_reference(outcome, data)
            if engine != "duckdb":
                # The ranking statement itself went through the hook (not only catalog reads).
                assert any("GROUP BY" in s for s in statements)


#: Examples per engine; raise it for a deeper local run (BITSIFT_FUZZ_EXAMPLES=500).
EXAMPLES = int(os.environ.get("BITSIFT_FUZZ_EXAMPLES", "25"))
FUZZ = settings(max_examples=EXAMPLES, deadline=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                       HealthCheck.function_scoped_fixture,
                                       HealthCheck.large_base_example])
FUZZ_SERVER = settings(FUZZ, max_examples=max(1, EXAMPLES * 3 // 5))
timeouts = st.sampled_from([None, None, 600.0])


@pytest.mark.slow
@FUZZ
@given(example=hostile_tables("duckdb"), timeout=timeouts)
def test_fuzz_duckdb(example: tuple[str, Dataset], timeout: float | None) -> None:
    check_example("duckdb", *example, None, timeout)


@pytest.mark.slow
@FUZZ
@given(example=hostile_tables("sqlite"), timeout=timeouts)
def test_fuzz_sqlite(example: tuple[str, Dataset], timeout: float | None,
                     tmp_path_factory: pytest.TempPathFactory) -> None:
    path = tmp_path_factory.getbasetemp() / "fuzz.sqlite"
    check_example("sqlite", *example, str(path), timeout)


@pytest.mark.postgres
@FUZZ_SERVER
@given(example=hostile_tables("postgres"), timeout=timeouts)
def test_fuzz_postgres(example: tuple[str, Dataset], timeout: float | None,
                       pg_fuzz_schema: str) -> None:
    check_example("postgres", *example, pg_fuzz_schema, timeout)


@pytest.mark.mariadb
@FUZZ_SERVER
@given(example=hostile_tables("mariadb"), timeout=timeouts)
def test_fuzz_mariadb(example: tuple[str, Dataset], timeout: float | None,
                      mariadb_fuzz_database: str) -> None:
    check_example("mariadb", *example, mariadb_fuzz_database, timeout)


# --- names at and beyond the engines' limits ----------------------------------------------------

#: 63 bytes exactly: 31 two-byte characters and one ASCII letter.
PG_LONGEST = "é" * 31 + "x"
#: 64 characters exactly.
MARIADB_LONGEST = "m" * 63 + "é"


def _simple(names: tuple[str, str, str]) -> Dataset:
    rows = [(i % 2, i % 3, f"v{i % 4}") for i in range(24)]
    return Dataset(columns=((names[0], "integer"), (names[1], "integer"), (names[2], "text")),
                   rows=rows)


def _place(engine: str, request: pytest.FixtureRequest) -> str | None:
    """Where a deterministic test's scratch table goes: SQLite file, schema or database."""
    if engine == "sqlite":
        return str(request.getfixturevalue("tmp_path") / "scratch.sqlite")
    if engine == "postgres":
        return str(request.getfixturevalue("pg_schema"))
    if engine == "mariadb":
        return str(request.getfixturevalue("mariadb_database"))
    return None


@pytest.mark.parametrize("engine", ["duckdb", "sqlite", "postgres", "mariadb"])
def test_names_at_the_engine_limit_rank(engine: str, request: pytest.FixtureRequest) -> None:
    long_name = {"postgres": PG_LONGEST, "mariadb": MARIADB_LONGEST}.get(engine, "w" * 1000)
    other = long_name[:-1] + "2"
    dataset = _simple(("select", long_name, other))
    with stored(engine, long_name, dataset, _place(engine, request)) as (source, table, data):
        assert data.rows == dataset.rows
        ranking = bitsift.rank(source, table=table, target="select", attributes=[long_name, other])
        assert_ranked_like_reference(ranking, data)


def test_postgres_name_beyond_63_bytes_is_refused_naming_the_cut(pg_schema: str) -> None:
    long_name = "z" * 70
    dataset = _simple(("y", long_name[:63], "w"))  # what PostgreSQL keeps of the long name
    with stored("postgres", "t", dataset, pg_schema) as (source, table_text, _):
        with pytest.raises(ColumnError) as caught:
            bitsift.rank(source, table=table_text, target="y", attributes=[long_name])
        message = str(caught.value)
        assert f"unknown column: {long_name!r}" in message
        assert f"did you mean {long_name[:63]!r}" in message
        assert "63 bytes" in message and "\n" not in message
        with pytest.raises(ColumnError, match="63 bytes"):
            bitsift.rank(source, table=table_text, target=long_name)
    with stored("postgres", "q" * 63, dataset, pg_schema) as (source, _, _):
        with pytest.raises(TableNotFoundError) as caught:
            bitsift.rank(source, table=f'{pg_schema}."{"q" * 64}"', target="y")
        assert f"did you mean {'q' * 63!r}" in str(caught.value)
        assert "63 bytes" in str(caught.value)


def test_mariadb_name_beyond_64_characters_is_refused(mariadb_database: str) -> None:
    dataset = _simple(("y", "a", "b"))
    with stored("mariadb", "t", dataset, mariadb_database) as (source, table_text, _):
        with pytest.raises(ColumnError, match=r"unknown column: 'a{65}'"):
            bitsift.rank(source, table=table_text, target="y", attributes=["a" * 65])
        with pytest.raises(TableNotFoundError, match="unknown table"):
            bitsift.rank(source, table=f"{mariadb_database}.{'t' * 65}", target="y")


def test_postgres_case_variant_names_stay_apart(pg_schema: str) -> None:
    # Quoted names are case-sensitive in PostgreSQL: "Level" and "level" are two columns.
    rows = [(i % 2, i % 2, i % 5, uuid.uuid4().hex[:1]) for i in range(60)]
    dataset = Dataset(columns=(("y", "integer"), ("Level", "integer"), ("level", "integer"),
                               ("LEVEL", "text")), rows=rows)
    with stored("postgres", "Case", dataset, pg_schema) as (source, table_text, data):
        ranking = bitsift.rank(source, table=table_text, target="y")
        assert_ranked_like_reference(ranking, data)
        assert ranking["Level"].information_gain == pytest.approx(1.0)
        picked = bitsift.rank(source, table=table_text, target="y", attributes=["level"])
        assert [a.attribute for a in picked.attributes] == ["level"]


# --- what fuzzing found, kept as plain regression tests ----------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "sqlite", "postgres", "mariadb"])
def test_regressions_found_by_fuzzing(engine: str, request: pytest.FixtureRequest) -> None:
    # A column name with a backtick (SQLAlchemy's MySQL reflection doubled it), a float column
    # that is NULL on every row (SQLAlchemy's SQLite FLOOR raised on NULL in the quantile
    # pre-pass), and a table named like one of the statement's CTEs (SQLite: "circular
    # reference: counts"; DuckDB's paste-ready SQL read the "bounds" CTE instead of the table).
    big = math.inf if NON_FINITE[engine] else 1e308
    rows = [(i % 2, i % 3, None, float(i % 4) if i % 5 else big) for i in range(40)]
    dataset = Dataset(columns=(("y", "integer"), ("a`b", "integer"), ("nothing", "float"),
                               ("f", "float")), rows=rows)
    place = _place(engine, request)
    for table in ("counts", "bounds"):
        with stored(engine, table, dataset, place) as (source, qualified, data):
            # Unqualified where the engine allows it: that is where the names collided.
            table_text = quoted(engine, table) if engine in ("duckdb", "sqlite") else qualified
            ranking = bitsift.rank(source, table=table_text, target="y")
            assert_ranked_like_reference(ranking, data)
            assert ranking["nothing"].distinct == 1 and ranking["nothing"].cuts == []
            if engine == "duckdb":
                sql = bitsift.statement(source, table=table_text, target="y")
                rows_back = source.execute(sql).fetchall()
                assert len(rows_back) == 4  # the target and three attributes


@pytest.mark.slow
@pytest.mark.parametrize("name", ["counts", "Base", "cells"])
def test_paste_mode_refuses_an_unqualified_table_named_like_a_step(name: str) -> None:
    # Without a SOURCE bitsift cannot look up the table's schema: the pasted statement would
    # read its own CTE instead of the table, so the user is asked to qualify the name.
    with pytest.raises(SpecError, match=f"table '{name}' has the name of a step"):
        bitsift.statement(table=name, target="y", attributes="a", dialect="postgres")
    qualified = bitsift.statement(table=f"public.{name}", target="y", attributes="a",
                                  dialect="postgres")
    assert f'FROM "public"."{name}" AS src' in qualified
