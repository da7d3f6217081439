"""The pasted statement (``bitsift sql``) against run mode (``bitsift rank``), per count strategy.

    python benchmarks/paste_strategies.py --engine mariadb --rows 200000 --json out.json
    python benchmarks/paste_strategies.py --engine postgres --rows 500000

The table of ``quantile_methods.py`` (a 3-class target, 3 categorical and 4 numeric attributes of
invented, seeded random values) is written to a scratch MariaDB database or PostgreSQL schema
and dropped afterwards. Each round, interleaved: ``bitsift.rank`` (run mode), then the pasted
statement in each form the dialect can run, executed as a user pasting it would (one
statement, SQLAlchemy, no parameters). A form is a count strategy, optionally with the steps
written as shared (recursive) CTEs: ``cross_join+counts`` (see ``Capabilities.shared_ctes``).
The default forms are the ones worth comparing now (MariaDB's plain ``union_all`` and
``cross_join`` took 172 s and 33 s on 200k rows: ``--strategies`` still runs them).
Medians are printed with the largest difference in information gain from run mode (rounding
only); ``--json`` also writes every round. The numbers behind each dialect's
``paste_count_strategy`` and ``paste_shared_ctes`` in src/bitsift/sql/dialects.py; see
RESULTS.md.
"""

from __future__ import annotations

import argparse
import dataclasses
import datetime as _dt
import json
import os
import statistics
import sys
import time
import uuid
from collections.abc import Iterator
from contextlib import contextmanager

import sqlalchemy as sa
from quantile_methods import MARIADB_URL, scratch_table
from quantile_methods import _fill as fill

import bitsift
from bitsift.sql import dialects

POSTGRES_URL = "postgresql+psycopg://postgres@127.0.0.1:5432/test"
STRATEGIES = {"mariadb": ("cross_join+counts", "union_all+base+counts", "union_scans+counts"),
              "postgres": ("grouping_sets", "union_all", "cross_join", "union_scans")}


def form_of(shipped: dialects.Capabilities, form: str) -> dialects.Capabilities:
    """The dialect's capabilities forced to one form: ``strategy[+shared step...]``."""
    strategy, *shared = form.split("+")
    return dataclasses.replace(shipped, count_strategy=strategy, paste_count_strategy=None,
                               shared_ctes=tuple(shared), paste_shared_ctes=None)


@contextmanager
def postgres_table(rows: int, url: str = POSTGRES_URL) -> Iterator[tuple[str, str]]:
    schema = f"bitsift_bench_{uuid.uuid4().hex[:12]}"
    admin = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with admin.begin() as connection:
            connection.exec_driver_sql(f'CREATE SCHEMA "{schema}"')
        fill(url, f'"{schema}".t', rows)
        with admin.begin() as connection:
            connection.exec_driver_sql(f'ANALYZE "{schema}".t')
        yield url, f"{schema}.t"
    finally:
        with admin.begin() as connection:
            connection.exec_driver_sql(f'DROP SCHEMA IF EXISTS "{schema}" CASCADE')
        admin.dispose()


def pasted(url: str, sql: str) -> dict[str, float]:
    """Run the printed statement as pasted: one statement, no bind parameters."""
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            result = connection.execution_options(no_parameters=True).exec_driver_sql(
                sql.rstrip().rstrip(";"))
            rows = result.mappings().all()
    finally:
        engine.dispose()
    return {r["attribute"]: float(r["information_gain"]) for r in rows if r["attribute_index"]}


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--engine", choices=tuple(STRATEGIES), default="mariadb")
    parser.add_argument("--rows", type=int, default=200_000)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--strategies", help="comma-separated forms (default: the dialect's)")
    parser.add_argument("--json", help="write every round's seconds and the medians here")
    parser.add_argument("--mariadb-url", default=MARIADB_URL)
    parser.add_argument("--postgres-url", default=POSTGRES_URL)
    parser.add_argument("--categorical-only", action="store_true",
                        help="leave out the numeric attributes (no bounds CTE)")
    args = parser.parse_args(argv)
    strategies = (tuple(args.strategies.split(",")) if args.strategies
                  else STRATEGIES[args.engine])
    shipped = dialects.CAPABILITIES[args.engine]
    options = {"attributes": "c1,c2,c3"} if args.categorical_only else {}
    seconds: dict[str, list[float]] = {k: [] for k in ("rank", *strategies)}
    gains: dict[str, dict[str, float]] = {}
    table_of = (postgres_table(args.rows, args.postgres_url) if args.engine == "postgres"
                else scratch_table("mariadb", args.rows, args.mariadb_url))
    with table_of as (url, table):
        statements = {}
        try:
            for strategy in strategies:
                dialects.CAPABILITIES[args.engine] = form_of(shipped, strategy)
                statements[strategy] = bitsift.statement(url, "y", table=table, **options)
        finally:
            dialects.CAPABILITIES[args.engine] = shipped
        for _ in range(args.repeats):
            start = time.perf_counter()
            ranking = bitsift.rank(url, target="y", table=table, **options)
            seconds["rank"].append(time.perf_counter() - start)
            gains["rank"] = {a.attribute: a.information_gain for a in ranking.attributes}
            for strategy in strategies:
                start = time.perf_counter()
                gains[strategy] = pasted(url, statements[strategy])
                seconds[strategy].append(time.perf_counter() - start)
                print(f"  {strategy}: {seconds[strategy][-1]:.2f} s", file=sys.stderr)
            print(f"  rank: {seconds['rank'][-1]:.2f} s", file=sys.stderr)
    kind = "3 categorical" if args.categorical_only else "3 categorical + 4 numeric (10 bins)"
    pasted_form = "+".join((shipped.for_paste.count_strategy, *shipped.for_paste.shared_ctes))
    print(f"{args.engine}, {args.rows:,} rows x {kind}, {args.repeats} rounds; shipped paste "
          f"form: {pasted_form} with cut points to compute, "
          f"{shipped.count_strategy} without")
    for name, runs in seconds.items():
        listed = ", ".join(f"{s:.2f}" for s in runs)
        print(f"  {name:<22} median {statistics.median(runs):7.2f} s  ({listed})")
    first = gains["rank"]
    worst = max(abs(gains[k][a] - first[a]) for k in gains for a in first)
    print(f"  largest difference in information gain from run mode: {worst:.1e}")
    if args.json:
        report = {"engine": args.engine, "rows": args.rows, "attributes": kind,
                  "repeats": args.repeats, "shipped_paste_form": pasted_form,
                  "measured_at": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC"),
                  "load_average": os.getloadavg(), "seconds": seconds,
                  "medians": {k: statistics.median(v) for k, v in seconds.items()},
                  "largest_gain_difference": worst}
        with open(args.json, "w", encoding="utf-8") as out:
            json.dump(report, out, indent=2)
            out.write("\n")


if __name__ == "__main__":
    sys.exit(main())
