"""How run mode finds quantile bins, per engine: the dialect's one-statement quantile, bucket
cut points (bitsift.run.quantiles) and bins counted from cells (bitsift.run.quantile_counts),
side by side.

    python benchmarks/quantile_methods.py --engine sqlite --rows 500000
    python benchmarks/quantile_methods.py --engine mariadb --rows 500000

The table (a 3-class target, 3 categorical and 4 numeric attributes of invented, seeded random
values) is written to a scratch SQLite file or MariaDB database and removed afterwards. Each
method ranks it ``--repeats`` times in this process, interleaved; the medians are printed with
the largest difference in information gain between the methods (rounding only). The numbers
behind the SQLite and MariaDB choices in src/bitsift/engines/policy.py; see RESULTS.md.
"""

from __future__ import annotations

import argparse
import dataclasses
import random
import statistics
import sys
import tempfile
import time
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import sqlalchemy as sa

import bitsift
from bitsift.engines import policy

MARIADB_URL = "mysql+pymysql://root@127.0.0.1:3306/test"
COLUMNS = "y INTEGER, c1 INTEGER, c2 VARCHAR(8), c3 INTEGER, n1 DOUBLE PRECISION, " \
          "n2 DOUBLE PRECISION, n3 DOUBLE PRECISION, n4 DOUBLE PRECISION"


def _rows(count: int, seed: int = 1) -> Iterator[tuple[object, ...]]:
    rng = random.Random(seed)
    for _ in range(count):
        y = rng.randrange(3)
        yield (y, rng.randrange(10), f"v{rng.randrange(200)}", (y * 7 + rng.randrange(1000)) % 1000,
               rng.random() + 0.1 * y, rng.gauss(0, 1), rng.expovariate(1), rng.random() * 100)


@contextmanager
def scratch_table(engine: str, rows: int, mariadb_url: str = MARIADB_URL,
                  ) -> Iterator[tuple[str, str]]:
    """(URL, table) of a freshly written table, dropped afterwards."""
    if engine == "sqlite":
        with tempfile.TemporaryDirectory(prefix="bitsift-bench-") as directory:
            url = f"sqlite:///{Path(directory) / 'bench.sqlite'}"
            _fill(url, "t", rows)
            yield url, "t"
        return
    database = f"bitsift_bench_{uuid.uuid4().hex[:12]}"
    admin = sa.create_engine(mariadb_url, poolclass=sa.pool.NullPool)
    try:
        with admin.begin() as connection:
            connection.exec_driver_sql(f"CREATE DATABASE `{database}`")
        _fill(mariadb_url, f"`{database}`.t", rows)
        yield mariadb_url, f"{database}.t"
    finally:
        with admin.begin() as connection:
            connection.exec_driver_sql(f"DROP DATABASE IF EXISTS `{database}`")
        admin.dispose()


def _fill(url: str, table: str, rows: int) -> None:
    writer = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with writer.begin() as connection:
            connection.exec_driver_sql(f"CREATE TABLE {table} ({COLUMNS})")
            insert = sa.text(f"INSERT INTO {table} VALUES (:y, :c1, :c2, :c3, :n1, :n2, :n3, :n4)")
            batch: list[dict[str, object]] = []
            for row in _rows(rows):
                batch.append(dict(zip(("y", "c1", "c2", "c3", "n1", "n2", "n3", "n4"), row,
                                      strict=True)))
                if len(batch) == 50_000:
                    connection.execute(insert, batch)
                    batch = []
            if batch:
                connection.execute(insert, batch)
    finally:
        writer.dispose()


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--engine", choices=("sqlite", "mariadb"), default="sqlite")
    parser.add_argument("--rows", type=int, default=500_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--mariadb-url", default=MARIADB_URL)
    args = parser.parse_args(argv)
    methods = ["statement", "buckets", "counted"]
    shipped = policy.run_policy(args.engine)
    seconds: dict[str, list[float]] = {m: [] for m in methods}
    gains: dict[str, dict[str, float]] = {}
    with scratch_table(args.engine, args.rows, args.mariadb_url) as (url, table):
        try:
            for _ in range(args.repeats):
                for method in methods:
                    policy.POLICIES[args.engine] = dataclasses.replace(
                        shipped, run_quantile=method)
                    start = time.perf_counter()
                    ranking = bitsift.rank(url, target="y", table=table)
                    seconds[method].append(time.perf_counter() - start)
                    gains[method] = {a.attribute: a.information_gain for a in ranking.attributes}
        finally:
            policy.POLICIES[args.engine] = shipped
    print(f"{args.engine}, {args.rows:,} rows x 7 attributes (4 numeric), {args.repeats} rounds; "
          f"shipped: {shipped.run_quantile}")
    for method in methods:
        runs = ", ".join(f"{s:.2f}" for s in seconds[method])
        print(f"  {method:<10} median {statistics.median(seconds[method]):6.2f} s  ({runs})")
    first = gains[methods[0]]
    worst = max(abs(gains[m][name] - first[name]) for m in methods for name in first)
    print(f"  largest difference in information gain between methods: {worst:.1e}")


if __name__ == "__main__":
    sys.exit(main())
