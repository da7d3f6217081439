"""Stored counts against ranking the rows, side by side in one run (docs/stored-counts.md).

    python benchmarks/stored_counts.py --days 30 --rows-per-day 1000000 --attributes 16
    python benchmarks/stored_counts.py --engine postgres --days 30 --rows-per-day 100000

The table is datagen.py's (a 3-class target, every 4th attribute a DOUBLE binned into 10
quantiles, the others categorical with 2 to 1,000 values) with a ``day`` column: ``--days``
daily partitions, plus one more day that arrives later. After the counts of the first days
are built (timed once, "first build"), each round times, interleaved:

(a) the nightly work with counts: append the new day (``bitsift counts``; from the second
    round on the same day is recounted with ``--recount-from``, the same work) and rank the
    last ``--days`` days from the counts (``rank --from-counts --since``);
(b) ranking the rows of the same window directly (``bitsift.rank`` with ``--where``).

Reports the medians, the ratio a/b, and the counts table's size against the data's (rows and
DuckDB file bytes, or PostgreSQL's pg_total_relation_size). The PostgreSQL table gets an index
on ``day``, as a warehouse table has on its partition column (or is partitioned on it). Both
rankings must agree on every categorical attribute to 1e-9 (numeric ones are cut at the stored
cut points by (a) and at the window's own by (b)).
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import shutil
import statistics
import sys
import tempfile
import time
import uuid
from pathlib import Path
from typing import Any

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))

from datagen import DEFAULT_POSTGRES_URL, TABLE, TARGET, create_table_sql  # noqa: E402

import bitsift  # noqa: E402
from bitsift.jobs.counts_build import build_counts  # noqa: E402
from bitsift.run.counts_rank import rank_counts  # noqa: E402
from bitsift.run.result import Ranking  # noqa: E402

FIRST_DAY = _dt.date(2026, 1, 1)


def _day(offset: int) -> str:
    return (FIRST_DAY + _dt.timedelta(days=offset)).isoformat()


_DAY_SQL = ("CREATE TABLE {table} AS SELECT *, DATE '{first}' + CAST(FLOOR((ROW_NUMBER() OVER ()"
            " - 1) / {per_day}) AS INTEGER) AS day FROM {generated}")


class DuckDBBackend:
    """The table and the counts in two DuckDB files of a temporary folder."""

    def __init__(self, workdir: Path) -> None:
        self.path, self.dest = workdir / "data.duckdb", workdir / "counts.duckdb"
        self.source, self.table = str(self.path), TABLE
        self.into, self.counts_table = str(self.dest), "bitsift_counts"

    def execute(self, *statements: str) -> list[Any]:
        with duckdb.connect(str(self.path)) as con:
            rows: list[Any] = []
            for sql in statements:
                rows = con.execute(sql).fetchall()
            return rows

    def generated(self, rows: int, k: int, seed: int) -> str:
        return create_table_sql("duckdb", "generated", rows, k, seed)

    def qualified(self, name: str) -> str:
        return name

    def counts_rows(self) -> int:
        with duckdb.connect(str(self.dest), read_only=True) as con:
            row = con.execute("SELECT COUNT(*) FROM bitsift_counts").fetchone()
        return int(row[0]) if row else 0

    def sizes(self) -> tuple[int, int]:
        return self.dest.stat().st_size, self.path.stat().st_size

    def close(self) -> None:
        pass


class PostgresBackend:
    """The table and the counts in one uniquely named PostgreSQL schema, dropped afterwards."""

    def __init__(self, url: str) -> None:
        import sqlalchemy as sa

        self.schema = f"bitsift_bench_{uuid.uuid4().hex[:12]}"
        self.engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
        self.source = self.into = url
        self.table, self.counts_table = f"{self.schema}.{TABLE}", f"{self.schema}.bitsift_counts"
        self.execute(f'CREATE SCHEMA "{self.schema}"')

    def execute(self, *statements: str) -> list[Any]:
        rows: list[Any] = []
        with self.engine.begin() as connection:
            for sql in statements:
                result = connection.exec_driver_sql(sql)
                rows = list(result.fetchall()) if result.returns_rows else []
        return rows

    def generated(self, rows: int, k: int, seed: int) -> str:
        return create_table_sql("postgres", self.qualified("generated"), rows, k, seed)

    def qualified(self, name: str) -> str:
        return f'"{self.schema}"."{name}"'

    def counts_rows(self) -> int:
        return int(self.execute(f"SELECT COUNT(*) FROM {self.qualified('bitsift_counts')}")[0][0])

    def sizes(self) -> tuple[int, int]:
        size = "SELECT pg_total_relation_size('{}')"
        counts = self.execute(size.format(self.qualified("bitsift_counts")))[0][0]
        data = self.execute(size.format(self.qualified(TABLE)))[0][0]
        return int(counts), int(data)

    def close(self) -> None:
        self.execute(f'DROP SCHEMA IF EXISTS "{self.schema}" CASCADE')
        self.engine.dispose()


Backend = DuckDBBackend | PostgresBackend


def generate(backend: Backend, days: int, per_day: int, k: int, seed: int) -> None:
    """``days`` + 1 days of datagen's rows; the last day waits in a staging table (constant
    SQL with our own names and numbers only: row n belongs to day n // per_day)."""
    table, arriving = backend.qualified(TABLE), backend.qualified("arriving")
    backend.execute(
        backend.generated((days + 1) * per_day, k, seed),
        _DAY_SQL.format(table=table, first=FIRST_DAY.isoformat(), per_day=int(per_day),
                        generated=backend.qualified("generated")),
        f"DROP TABLE {backend.qualified('generated')}",
        f"CREATE TABLE {arriving} AS SELECT * FROM {table} WHERE day = DATE '{_day(days)}'",
        f"DELETE FROM {table} WHERE day = DATE '{_day(days)}'")
    if isinstance(backend, PostgresBackend):
        # A warehouse table is indexed or partitioned on its partition column: without it,
        # counting the new day reads every day (DuckDB's zonemaps need no index).
        backend.execute(f"CREATE INDEX ON {table} (day)", f"ANALYZE {table}")


def run(days: int, per_day: int, k: int, repeats: int, seed: int, engine: str = "duckdb",
        url: str = DEFAULT_POSTGRES_URL) -> dict[str, Any]:
    workdir = Path(tempfile.mkdtemp(prefix="bitsift-counts-bench-"))
    backend: Backend = DuckDBBackend(workdir) if engine == "duckdb" else PostgresBackend(url)
    try:
        generate(backend, days, per_day, k, seed)
        counted = {"table": backend.table, "target": TARGET, "partition": "day",
                   "into": backend.into, "counts_table": backend.counts_table}
        started = time.perf_counter()
        build_counts(backend.source, **counted)
        first_build = time.perf_counter() - started
        backend.execute(f"INSERT INTO {backend.qualified(TABLE)} SELECT * FROM "
                        f"{backend.qualified('arriving')}")
        since, until = _day(1), _day(days + 1)
        where = f"day >= DATE '{since}' AND day < DATE '{until}'"
        timings: dict[str, list[float]] = {"a": [], "b": []}
        last: dict[str, Ranking] = {}
        for round_ in range(repeats):
            started = time.perf_counter()
            build_counts(backend.source, **counted,
                         recount_from=_day(days) if round_ else None)
            window = rank_counts(backend.into, counts_table=backend.counts_table, since=since)
            timings["a"].append(time.perf_counter() - started)
            started = time.perf_counter()
            rows = bitsift.rank(backend.source, target=TARGET, table=backend.table,
                                exclude="day", where=where)
            timings["b"].append(time.perf_counter() - started)
            assert isinstance(window, Ranking) and isinstance(rows, Ranking)
            last = {"a": window, "b": rows}
        worst = _categorical_difference(last["a"], last["b"])
        counts_bytes, data_bytes = backend.sizes()
        medians = {key: statistics.median(values) for key, values in timings.items()}
        return {
            "engine": engine, "days": days, "rows_per_day": per_day, "attributes": k,
            "repeats": repeats, "first_build_seconds": first_build, "seconds": timings,
            "median_seconds": medians, "ratio_a_over_b": medians["a"] / medians["b"],
            "counts_rows": backend.counts_rows(), "data_rows": (days + 1) * per_day,
            "counts_bytes": counts_bytes, "data_bytes": data_bytes,
            "largest_categorical_difference": worst,
        }
    finally:
        backend.close()
        shutil.rmtree(workdir, ignore_errors=True)


def _categorical_difference(a: Ranking, b: Ranking) -> float:
    worst = 0.0
    for scored in a.attributes:
        if scored.kind != "categorical":
            continue
        other = b[scored.attribute]
        worst = max(worst, abs(scored.information_gain - other.information_gain),
                    abs(scored.gain_ratio - other.gain_ratio))
    return worst


def report(result: dict[str, Any]) -> str:
    medians = result["median_seconds"]
    lines = [
        f"stored counts vs rows, {result['engine']}: {result['days']} days x "
        f"{result['rows_per_day']:,} rows x {result['attributes']} attributes, median of "
        f"{result['repeats']}",
        f"  first build of the counts           {result['first_build_seconds']:8.2f} s",
        f"  (a) append one day + rank from counts {medians['a']:8.2f} s",
        f"  (b) rank the rows of the window       {medians['b']:8.2f} s",
        f"  ratio a/b: {result['ratio_a_over_b']:.3f}",
        f"  counts table: {result['counts_rows']:,} rows, {result['counts_bytes'] / 2**20:.1f} MiB"
        f"; data: {result['data_rows']:,} rows, {result['data_bytes'] / 2**20:.1f} MiB",
        f"  largest categorical IG/GR difference a vs b: "
        f"{result['largest_categorical_difference']:.1e}",
    ]
    return "\n".join(lines) + "\n"


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=int, default=30)
    parser.add_argument("--rows-per-day", type=int, default=1_000_000)
    parser.add_argument("--attributes", type=int, default=16)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--seed", type=int, default=20261204)
    parser.add_argument("--engine", choices=("duckdb", "postgres"), default="duckdb")
    parser.add_argument("--postgres-url", default=DEFAULT_POSTGRES_URL)
    parser.add_argument("--json", help="write everything to this file")
    args = parser.parse_args(argv)
    result = run(args.days, args.rows_per_day, args.attributes, args.repeats, args.seed,
                 args.engine, args.postgres_url)
    sys.stdout.write(report(result))
    if args.json:
        Path(args.json).write_text(json.dumps(result, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
