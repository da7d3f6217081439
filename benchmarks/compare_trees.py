"""The ranking's cost in two bitsift source trees, side by side on one DuckDB table.

Made for issue 18 (the gain's se, interval and rank range in the same statement; target:
at most 5 % more time on DuckDB 10M x 16), usable for any change of the ranking statement:

    .venv/bin/python benchmarks/compare_trees.py --baseline ../main/src --candidate src \\
        --rows 10000000 --attributes 16 --repeats 7

The table (benchmarks/datagen.py) is written once; every round times one ``bitsift.rank`` in
a fresh process per tree (imports not timed), baseline and candidate alternating, and
reports the medians, their ratio, and how many statements each tree sent (the same count:
no extra pass). Timings on a shared machine are noisy: run it on a quiet one.
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import datagen  # noqa: E402 - the harness's own module, next to this file

#: Run in the child: one timed ranking with the tree on PYTHONPATH.
CHILD = """
import json, sys, time
import bitsift
import scipy.special  # bitsift imports it lazily for the p-value: an import, not timed
start = time.perf_counter()
ranking = bitsift.rank(sys.argv[1], target="y", table=sys.argv[2])
seconds = time.perf_counter() - start
print(json.dumps({"seconds": seconds, "statements": len(ranking.statements)}))
"""


def time_once(tree: Path, database: Path, table: str) -> dict[str, float]:
    """One ranking of the table by the bitsift in ``tree`` (its ``src`` folder)."""
    completed = subprocess.run(
        [sys.executable, "-c", CHILD, str(database), table],
        env={"PYTHONPATH": str(tree.resolve()), "PATH": "/usr/bin:/bin"},
        capture_output=True, text=True, check=True,
    )
    result: dict[str, float] = json.loads(completed.stdout.strip().splitlines()[-1])
    return result


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--baseline", type=Path, required=True, help="a tree's src folder")
    parser.add_argument("--candidate", type=Path, required=True, help="a tree's src folder")
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--attributes", type=int, default=16)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--json", type=Path, help="write the measurements here too")
    args = parser.parse_args(argv)
    trees = {"baseline": args.baseline, "candidate": args.candidate}
    times: dict[str, list[float]] = {name: [] for name in trees}
    statements: dict[str, set[int]] = {name: set() for name in trees}
    with datagen.duckdb_table(args.rows, args.attributes, args.seed) as dataset:
        database = Path(dataset.location)
        for tree in trees.values():  # warm-up: the file into the page cache
            time_once(tree, database, dataset.table)
        for round_index in range(args.repeats):
            order = list(trees) if round_index % 2 == 0 else list(reversed(trees))
            for name in order:
                result = time_once(trees[name], database, dataset.table)
                times[name].append(result["seconds"])
                statements[name].add(int(result["statements"]))
    medians = {name: statistics.median(values) for name, values in times.items()}
    report = {
        "rows": args.rows, "attributes": args.attributes, "repeats": args.repeats,
        "median_seconds": medians,
        "ratio": medians["candidate"] / medians["baseline"],
        "statements": {name: sorted(counts) for name, counts in statements.items()},
        "seconds": times,
    }
    print(f"{args.rows:,} rows x {args.attributes} attributes, DuckDB, median of "
          f"{args.repeats}: baseline {medians['baseline']:.3f} s, candidate "
          f"{medians['candidate']:.3f} s, ratio {report['ratio']:.3f}; statements "
          f"{report['statements']['baseline']} vs {report['statements']['candidate']}")
    if args.json:
        args.json.write_text(json.dumps(report, indent=2) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
