"""Stored counts against ranking the rows, side by side in one run (docs/stored-counts.md).

    python benchmarks/stored_counts.py --days 30 --rows-per-day 1000000 --attributes 16

The table is datagen.py's (a 3-class target, every 4th attribute a DOUBLE binned into 10
quantiles, the others categorical with 2 to 1,000 values) with a ``day`` column: ``--days``
daily partitions, plus one more day that arrives later. After the counts of the first days
are built (timed once, "first build"), each round times, interleaved:

(a) the nightly work with counts: append the new day (``bitsift counts``; from the second
    round on the same day is recounted with ``--recount-from``, the same work) and rank the
    last ``--days`` days from the counts (``rank --from-counts --since``);
(b) ranking the rows of the same window directly (``bitsift.rank`` with ``--where``).

Reports the medians, the ratio a/b, and the counts table's size against the data's (rows and
DuckDB file bytes). Both rankings must agree on every categorical attribute to 1e-9 (numeric
ones are cut at the stored cut points by (a) and at the window's own by (b)).
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
from pathlib import Path
from typing import Any

import duckdb

sys.path.insert(0, str(Path(__file__).resolve().parent))

from datagen import TABLE, TARGET, create_table_sql  # noqa: E402

import bitsift  # noqa: E402
from bitsift.jobs.counts_build import build_counts  # noqa: E402
from bitsift.run.counts_rank import rank_counts  # noqa: E402
from bitsift.run.result import Ranking  # noqa: E402

FIRST_DAY = _dt.date(2026, 1, 1)


def _day(offset: int) -> str:
    return (FIRST_DAY + _dt.timedelta(days=offset)).isoformat()


def generate(path: Path, days: int, per_day: int, k: int, seed: int) -> None:
    """``days`` + 1 days of datagen's rows; the last day waits in a staging table."""
    with duckdb.connect(str(path)) as con:
        con.execute(create_table_sql("duckdb", "generated", (days + 1) * per_day, k, seed))
        # Constant SQL with our own numbers only: row n belongs to day n // per_day.
        con.execute(
            f"CREATE TABLE {TABLE} AS SELECT *, DATE '{FIRST_DAY.isoformat()}' + CAST("
            f"(ROW_NUMBER() OVER () - 1) // {int(per_day)} AS INTEGER) AS day FROM generated")
        con.execute("DROP TABLE generated")
        con.execute(f"CREATE TABLE arriving AS SELECT * FROM {TABLE} WHERE day = "
                    f"DATE '{_day(days)}'")
        con.execute(f"DELETE FROM {TABLE} WHERE day = DATE '{_day(days)}'")
        con.execute("CHECKPOINT")


def _arrive(path: Path) -> None:
    with duckdb.connect(str(path)) as con:
        con.execute(f"INSERT INTO {TABLE} SELECT * FROM arriving")
        con.execute("CHECKPOINT")


def _rows(path: Path, table: str) -> int:
    with duckdb.connect(str(path), read_only=True) as con:
        row = con.execute(f"SELECT COUNT(*) FROM {table}").fetchone()
    return int(row[0]) if row else 0


def run(days: int, per_day: int, k: int, repeats: int, seed: int,
        directory: str | None = None) -> dict[str, Any]:
    workdir = Path(tempfile.mkdtemp(prefix="bitsift-counts-bench-", dir=directory))
    source, dest = workdir / "data.duckdb", workdir / "counts.duckdb"
    try:
        generate(source, days, per_day, k, seed)
        started = time.perf_counter()
        build_counts(str(source), table=TABLE, target=TARGET, partition="day", into=str(dest))
        first_build = time.perf_counter() - started
        _arrive(source)
        since, until = _day(1), _day(days + 1)
        where = f"day >= DATE '{since}' AND day < DATE '{until}'"
        timings: dict[str, list[float]] = {"a": [], "b": []}
        last: dict[str, Ranking] = {}
        for round_ in range(repeats):
            started = time.perf_counter()
            build_counts(str(source), table=TABLE, target=TARGET, partition="day",
                         into=str(dest), recount_from=_day(days) if round_ else None)
            window = rank_counts(str(dest), since=since)
            timings["a"].append(time.perf_counter() - started)
            started = time.perf_counter()
            rows = bitsift.rank(str(source), target=TARGET, table=TABLE, exclude="day",
                                where=where)
            timings["b"].append(time.perf_counter() - started)
            assert isinstance(window, Ranking) and isinstance(rows, Ranking)
            last = {"a": window, "b": rows}
        worst = _categorical_difference(last["a"], last["b"])
        counts_rows, data_rows = _rows(dest, "bitsift_counts"), _rows(source, TABLE)
        medians = {key: statistics.median(values) for key, values in timings.items()}
        return {
            "days": days, "rows_per_day": per_day, "attributes": k, "repeats": repeats,
            "first_build_seconds": first_build, "seconds": timings, "median_seconds": medians,
            "ratio_a_over_b": medians["a"] / medians["b"],
            "counts_rows": counts_rows, "data_rows": data_rows,
            "counts_bytes": dest.stat().st_size, "data_bytes": source.stat().st_size,
            "largest_categorical_difference": worst,
        }
    finally:
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
        f"stored counts vs rows, DuckDB: {result['days']} days x {result['rows_per_day']:,} "
        f"rows x {result['attributes']} attributes, median of {result['repeats']}",
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
    parser.add_argument("--json", help="write everything to this file")
    args = parser.parse_args(argv)
    result = run(args.days, args.rows_per_day, args.attributes, args.repeats, args.seed)
    sys.stdout.write(report(result))
    if args.json:
        Path(args.json).write_text(json.dumps(result, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
