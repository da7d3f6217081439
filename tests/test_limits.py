"""Limits: a million distinct values, 500 columns, 200 classes, weights up to 1e12 and counts
beyond 32 bits, on every engine that runs here.

Memory is measured as the peak RSS of a ``bitsift`` subprocess (``getrusage`` at exit),
compared with the same command on a 1,000-row table and with a client that pulls the rows: only
aggregates cross the wire, so a million distinct values must not show on the client.
"""

from __future__ import annotations

import json
import math
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import duckdb
import numpy as np
import pytest
import sqlalchemy as sa
from conftest import POSTGRES_URL
from helpers import (
    COMPARED_METRICS,
    ENGINES,
    Dataset,
    assert_matches_reference,
    fill_duckdb,
    loaded,
    quoted,
    rank_with,
)

import bitsift
from bitsift.engines.policy import run_policy
from bitsift.run import api, reference

# --- a million distinct values -----------------------------------------------------------------

MILLION = 1_000_000
#: Prints the process's peak resident memory (kB) on stderr when it exits: VmHWM, the high
#: water mark of this program's own memory (getrusage's ru_maxrss would also count the parent's,
#: which a child inherits on Linux: under pytest it reads the test runner's size).
PEAK_RSS = ("import atexit, re, sys\n"
            "def _peak():\n"
            "    status = open('/proc/self/status', encoding='ascii').read()\n"
            "    sys.stderr.write('peak_rss_kb=' + re.search(r'VmHWM:\\s*(\\d+)', status)[1]"
            " + '\\n')\n"
            "atexit.register(_peak)\n")
#: Allowed growth of the client's peak RSS between 1,000 and 1,000,000 rows (measured
#: 2026-12-02: +0.05 MB; pulling the same three columns instead: +190 MB).
RSS_GROWTH_KB = 32 * 1024


def peak_rss(code: str, *args: str) -> tuple[int, subprocess.CompletedProcess[str]]:
    """Run ``code`` in a fresh interpreter; its peak RSS in kB and the finished process."""
    done = subprocess.run([sys.executable, "-c", PEAK_RSS + code, *args], capture_output=True,
                          text=True, timeout=600, check=False)
    found = re.search(r"peak_rss_kb=(\d+)", done.stderr)
    assert found, done.stderr
    return int(found.group(1)), done


CLI = "from bitsift.cli import main; main()"


def _run(connection: sa.Connection, statement: str) -> sa.CursorResult[Any]:
    return connection.exec_driver_sql(statement, execution_options={"no_parameters": True})


def million_row_classes() -> np.ndarray:
    """The class of each row of the million-row tables: i % 3 for i = 1..1,000,000."""
    return np.arange(1, MILLION + 1) % 3


def assert_identifier_scores(scored: dict[str, Any], classes: np.ndarray) -> None:
    """A column with a distinct value on every row: IG = H(Y), dof = (N - 1)(|Y| - 1)."""
    h_y = reference.entropy_bits(np.bincount(classes))
    assert scored["distinct"] == MILLION
    assert scored["dof"] == (MILLION - 1) * 2
    assert abs(scored["information_gain"] - h_y) <= 1e-9
    assert abs(scored["conditional_entropy"]) <= 1e-9
    assert abs(scored["attribute_entropy"] - math.log2(MILLION)) <= 1e-9
    g = 2 * MILLION * math.log(2) * h_y
    assert abs(scored["g_statistic"] - g) <= 1e-9 * g
    assert {"id_like", "high_cardinality", "near_perfect"} <= set(scored["flags"])


@pytest.mark.slow
@pytest.mark.postgres
@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="reads Linux's /proc")
def test_million_distinct_values_keep_client_memory_flat(pg_schema: str,
                                                         postgres_engine: sa.Engine) -> None:
    with postgres_engine.begin() as connection:
        for table, rows in (("ids", MILLION), ("tiny", 1000)):
            _run(connection,
                 f'CREATE UNLOGGED TABLE "{pg_schema}".{table} AS SELECT i AS id, '
                 f"(i % 12) / 2 AS grp, i % 3 AS y FROM generate_series(1, {rows}) i")
    command = ("rank", POSTGRES_URL, "--target", "y", "--format", "json", "--table")
    baseline, _ = peak_rss(CLI, *command, f"{pg_schema}.tiny")
    ranked, done = peak_rss(CLI, *command, f"{pg_schema}.ids")
    assert done.returncode == 0, done.stderr
    pull = ("import sqlalchemy as sa\nimport bitsift.cli\n"
            f"with sa.create_engine({POSTGRES_URL!r}).connect() as c:\n"
            f"    rows = c.exec_driver_sql('SELECT id, grp, y FROM \"{pg_schema}\".ids').all()\n")
    pulled, _ = peak_rss(pull)
    # The control: the measurement does see a million rows reaching the client.
    assert pulled - baseline > 2 * RSS_GROWTH_KB, (baseline, pulled)
    assert ranked - baseline < RSS_GROWTH_KB, (baseline, ranked)

    result = json.loads(done.stdout)
    assert (result["rows"], result["classes"]) == (MILLION, 3)
    scores = {a["attribute"]: a for a in result["attributes"]}
    classes = million_row_classes()
    assert_identifier_scores(scores["id"], classes)
    groups = (np.arange(1, MILLION + 1) % 12) // 2
    table = np.zeros((6, 3))
    np.add.at(table, (groups, classes), 1)
    expected = reference.metrics(table)
    assert abs(result["target_entropy"] - expected["target_entropy"]) <= 1e-9
    for metric in COMPARED_METRICS:
        if metric != "target_entropy":  # top-level in the JSON contract
            want = expected[metric]
            assert abs(scores["grp"][metric] - want) <= 1e-9 * max(1, abs(want)), metric


@pytest.mark.slow
def test_million_distinct_text_values_on_duckdb() -> None:
    connection = duckdb.connect()
    connection.execute("CREATE TABLE t AS SELECT md5(CAST(i AS VARCHAR)) AS code, i AS id, "
                       f"i % 3 AS y FROM range(1, {MILLION + 1}) r(i)")
    ranking = bitsift.rank(connection, table="t", target="y")
    classes = million_row_classes()
    for name in ("code", "id"):
        assert_identifier_scores(ranking[name].to_dict(), classes)


# --- 500 columns --------------------------------------------------------------------------------

WIDE_COLUMNS = 500
WIDE_ROWS = 240


def wide_dataset() -> Dataset:
    """``y`` with 3 classes and 500 attributes: 475 integers of 2 to 10 values (some tied to
    ``y``), 25 floats to bin."""
    rng = np.random.default_rng(500)
    y = rng.integers(0, 3, WIDE_ROWS)
    columns: list[tuple[str, str]] = [("y", "integer")]
    values: list[list[Any]] = [[int(v) for v in y]]
    for k in range(WIDE_COLUMNS):
        if k % 20 == 19:
            columns.append((f"f{k}", "float"))
            values.append([float(v) for v in rng.normal(y * (k % 3), 1.0)])
        else:
            columns.append((f"c{k}", "integer"))
            noise = rng.integers(0, k % 9 + 2, WIDE_ROWS)
            values.append([int(v) for v in (noise + y * (k % 2)) % (k % 9 + 2)])
    return Dataset(columns=tuple(columns), rows=list(zip(*values, strict=True)))


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_500_columns_rank_in_batches(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = wide_dataset()
    with loaded(engine, dataset, request, table="wide") as where:
        ranking = bitsift.rank(where.source, table=where.table, target="y")
    assert len(ranking.attributes) == WIDE_COLUMNS
    numeric = [n for n, kind in dataset.columns if kind == "float"]
    assert_matches_reference(ranking, dataset, "y", numeric=numeric, context=engine)
    # Run mode splits the attributes: no ranking statement holds more than the batch size, and
    # together they hold each attribute once. Where quantile bins are counted from cells
    # (bitsift.run.quantile_counts), those attributes' metrics are computed in the client from
    # the cells: no ranking statement holds them. Where the run policy counts in the client
    # (bitsift.run.value_counts), every other attribute has a bare GROUP BY of its own instead.
    sizes = []
    for statement in (s for s in ranking.statements if "information_gain" in s):
        sizes.append(max(int(i) for i in re.findall(r"\bAS a(\d+)\b", statement)))
    counted = run_policy(engine).run_quantile == "counted"
    others = WIDE_COLUMNS - (len(numeric) if counted else 0)
    bare = [s for s in ranking.statements if re.search(r"\bAS v\b.* LIMIT \d+$", s)]
    if run_policy(engine).run_counts == "client":
        assert not sizes and len(bare) == others, engine
    else:
        assert max(sizes) <= api.MAX_ATTRIBUTES_PER_STATEMENT
        assert sum(sizes) == others and not bare, engine
    assert any("bucket_cells" in s for s in ranking.statements) == counted, engine


@pytest.mark.slow
def test_batches_agree_with_one_statement(monkeypatch: pytest.MonkeyPatch) -> None:
    # The same 100 attributes ranked in one statement and in batches of 40 give the same
    # numbers: the target's row is taken once, the attributes renumbered.
    dataset = wide_dataset()
    small = Dataset(columns=dataset.columns[:101], rows=[r[:101] for r in dataset.rows])
    connection = duckdb.connect()
    fill_duckdb(connection, ["t"], small)
    statement = {"run_counts": "statement"}  # DuckDB's run policy counts in the client
    for missing in ("category", "drop"):
        whole = rank_with(connection, "t", "y", policy=statement, missing=missing)
        with monkeypatch.context() as patched:
            patched.setattr(api, "MAX_ATTRIBUTES_PER_STATEMENT", 40)
            split = rank_with(connection, "t", "y", policy=statement, missing=missing)
        over_rows = [s for s in split.statements if "information_gain" in s]
        assert len(over_rows) == 3
        assert (split.rows, split.rows_excluded, split.classes) == (
            whole.rows, whole.rows_excluded, whole.classes)
        assert sorted(a.attribute for a in split.attributes) == sorted(small.names[1:])
        for scored in split.attributes:
            other = whole[scored.attribute]
            assert (scored.distinct, scored.dof, scored.rows, scored.cuts) == (
                other.distinct, other.dof, other.rows, other.cuts)
            for metric in COMPARED_METRICS:
                got, want = getattr(scored, metric), getattr(other, metric)
                assert abs(got - want) <= 1e-12 * max(1.0, abs(want)), (scored.attribute, metric)


# --- 200 classes --------------------------------------------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_200_classes(engine: str, request: pytest.FixtureRequest) -> None:
    rng = np.random.default_rng(200)
    rows = []
    for i in range(4000):
        label = int(rng.integers(0, 200))
        rows.append((f"class {label:03d}", i % 10, (label * 7 + int(rng.integers(0, 3))) % 400,
                     float(label + rng.normal())))
    dataset = Dataset(columns=(("y", "text"), ("a", "integer"), ("b", "integer"),
                               ("f", "float")), rows=rows)
    with loaded(engine, dataset, request) as where:
        ranking = bitsift.rank(where.source, table=where.table, target="y",
                               max_classes=1000)  # many classes on purpose (issue 21 cap)
    assert ranking.classes == 200
    assert_matches_reference(ranking, dataset, "y", numeric=["f"], context=engine)
    assert ranking["b"].dof == (ranking["b"].distinct - 1) * 199


# --- big weights and counts beyond 32 bits ------------------------------------------------------

#: Whole-number weights up to 1e12: totals far beyond 2**31 (and 2**32) rows.
WEIGHTS = (1.0, 3.0, 1e3, 2.0**31 + 1, 3e9, 1e12)


def weighted_reference(dataset: Dataset, attribute: str, weights: list[float]) -> dict[str, float]:
    """The reference metrics with each row counted ``weight`` times."""
    x, y = dataset.column(attribute), dataset.column("y")
    values = {v: i for i, v in enumerate(dict.fromkeys(x))}
    classes = {c: j for j, c in enumerate(dict.fromkeys(y))}
    table = np.zeros((len(values), len(classes)))
    for xv, yv, w in zip(x, y, weights, strict=True):
        table[values[xv], classes[yv]] += w
    return reference.metrics(table)


@pytest.mark.parametrize("engine", ENGINES)
def test_weights_up_to_1e12_do_not_overflow(engine: str, request: pytest.FixtureRequest) -> None:
    rng = np.random.default_rng(12)
    rows = []
    for i in range(600):
        y = int(rng.integers(0, 3))
        rows.append((y, (y + int(rng.integers(0, 2))) % 4, i % 5, WEIGHTS[i % len(WEIGHTS)]))
    dataset = Dataset(columns=(("y", "integer"), ("a", "integer"), ("b", "integer"),
                               ("w", "float")), rows=rows)
    weights = dataset.column("w")
    with loaded(engine, dataset, request) as where:
        ranking = bitsift.rank(where.source, table=where.table, target="y", weight="w")
    assert ranking.weight_total == pytest.approx(sum(weights), rel=1e-12)
    assert ranking.weight_total > 2.0**40
    assert ranking.rows == len(rows)
    for name in ("a", "b"):
        scored = ranking[name]
        expected = weighted_reference(dataset, name, weights)
        for metric in COMPARED_METRICS:
            got, want = getattr(scored, metric), expected[metric]
            assert got is not None and math.isfinite(got), (engine, name, metric)
            assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), (engine, name, metric, got, want)


#: The result columns that hold counts, and those that hold measurements.
COUNT_COLUMNS = ("rows_used", "distinct_values", "classes", "dof")
MEASURE_COLUMNS = ("information_gain", "g_statistic", "target_entropy")


@pytest.mark.parametrize("engine", ENGINES)
def test_counts_come_back_as_64_bit_integers(engine: str, request: pytest.FixtureRequest) -> None:
    # COUNT(*) is 64-bit on all four engines; the statement keeps counts in BIGINT (PostgreSQL
    # and MariaDB would sum them into NUMERIC/DECIMAL) and measurements in DOUBLE. Checked on
    # the types each driver reports for the ranking statement's result columns (the statement's
    # way forced where the run policy counts in the client: the statement serves there too).
    dataset = Dataset(columns=(("y", "integer"), ("a", "integer")),
                      rows=[(i % 2, i % 4) for i in range(30)])
    with loaded(engine, dataset, request) as where:
        sql = rank_with(where.source, where.table, "y",
                        policy={"run_counts": "statement"}).statements[-1]
        types = result_types(where, sql)
    for name in COUNT_COLUMNS:
        assert types[name] == "integer64", (engine, name, types[name])
    for name in MEASURE_COLUMNS:
        assert types[name] == "double", (engine, name, types[name])


def result_types(where: Any, sql: str) -> dict[str, str]:
    """``integer64``, ``double`` or the driver's own type name, per result column."""
    if where.engine == "duckdb":
        cursor = where.source.execute(sql)
        named = {"BIGINT": "integer64", "HUGEINT": "integer128", "DOUBLE": "double"}
        return {d[0]: named.get(str(d[1]), str(d[1])) for d in cursor.description}
    engine = sa.create_engine(where.url, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            if where.engine == "sqlite":
                # SQLite types values, not columns: the attribute's row, 64-bit INTEGER or REAL.
                columns = list(_run(connection, sql).keys())
                typed = ", ".join(f"typeof({quoted('sqlite', c)}) AS {quoted('sqlite', c)}"
                                  for c in columns)
                row = _run(connection, f"SELECT {typed} FROM ({sql}) AS r "
                                       "WHERE attribute_index = 1").one()
                names = {"integer": "integer64", "real": "double"}
                return {c: names.get(t, t) for c, t in zip(columns, row, strict=True)}
            cursor = _run(connection, sql).cursor
            description = cursor.description
    finally:
        engine.dispose()
    if where.engine == "postgres":
        named = {20: "integer64", 701: "double"}  # type OIDs: int8, float8
        return {d[0]: named.get(d[1], str(d[1])) for d in description}
    from pymysql.constants import FIELD_TYPE

    named = {FIELD_TYPE.LONGLONG: "integer64", FIELD_TYPE.DOUBLE: "double"}
    return {d[0]: named.get(d[1], str(d[1])) for d in description}
