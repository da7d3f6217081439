"""Fixed costs: a whole ``bitsift rank`` process on a small DuckDB table, against its floors.

Issue 20's target: a ranking of a 10,000-row table finishes in at most 0.3 s end to end from
the CLI on DuckDB (start-up, imports, metadata). Each round starts fresh processes, interleaved:

- ``python -c pass``: the interpreter's own start-up;
- ``python -c "import duckdb"``: the engine's import, which no ranking on DuckDB avoids;
- ``import bitsift.cli``: the command's imports alone (per tree);
- ``bitsift rank FILE --table bench --target y``: the whole command, output to a pipe (per tree).

    .venv/bin/python benchmarks/startup.py --rows 10000 --attributes 8 --repeats 9 \\
        --tree before=../main/src --tree after=src --json results/startup.json

Wall-clock seconds of each process, from before ``fork`` to after ``wait``; the median of the
rounds is reported. A shared machine adds noise: read the load average the report prints. The
CPU seconds (user + system, every thread of the process) are reported beside them: on a loaded
machine they move less than the wall clock, but they miss what overlaps (a thread importing
while the database works counts in full).
"""

from __future__ import annotations

import argparse
import datetime
import json
import os
import platform
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import datagen  # noqa: E402 - the harness's own module, next to this file

SRC = Path(__file__).resolve().parents[1] / "src"


#: A contender: its command line and the bitsift tree it runs (None: no bitsift).
Contender = tuple[list[str], Path | None]


def commands(trees: dict[str, Path], database: str, table: str) -> dict[str, Contender]:
    """Each contender's command line and the tree it runs."""
    python = sys.executable
    found: dict[str, Contender] = {
        "python -c pass": ([python, "-c", "pass"], None),
        "import duckdb": ([python, "-c", "import duckdb"], None),
    }
    for name, tree in trees.items():
        found[f"{name}: import bitsift.cli"] = ([python, "-c", "import bitsift.cli"], tree)
        found[f"{name}: bitsift rank"] = (
            [python, "-m", "bitsift.cli", "rank", database, "--table", table, "--target",
             datagen.TARGET], tree)
    return found


def _children_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def time_once(command: list[str], tree: Path | None) -> tuple[float, float]:
    """Wall-clock and CPU seconds of one process from start to exit; fails loudly if the
    command fails. The processes run one at a time, so the children's CPU time grows by this
    one's alone."""
    environment = {"PATH": os.environ.get("PATH", "/usr/bin:/bin")}
    if tree is not None:
        environment["PYTHONPATH"] = str(tree.resolve())
    cpu = _children_cpu()
    start = time.perf_counter()
    completed = subprocess.run(command, env=environment, stdout=subprocess.DEVNULL,
                               stderr=subprocess.PIPE, text=True)
    seconds = time.perf_counter() - start
    cpu = _children_cpu() - cpu
    if completed.returncode != 0:
        raise SystemExit(f"{' '.join(command)} failed: {completed.stderr.strip()}")
    return seconds, cpu


def measure(contenders: dict[str, Contender], repeats: int, warmup: int,
            ) -> tuple[dict[str, list[float]], dict[str, list[float]]]:
    """Wall-clock and CPU seconds of every contender once per round, the order reversed every
    other round."""
    seconds: dict[str, list[float]] = {name: [] for name in contenders}
    cpu: dict[str, list[float]] = {name: [] for name in contenders}
    for round_index in range(warmup + repeats):
        names = list(contenders) if round_index % 2 == 0 else list(reversed(contenders))
        for name in names:
            elapsed, used = time_once(*contenders[name])
            if round_index >= warmup:
                seconds[name].append(elapsed)
                cpu[name].append(used)
    return seconds, cpu


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=10_000)
    parser.add_argument("--attributes", type=int, default=8)
    parser.add_argument("--repeats", type=int, default=9, help="measured rounds (median)")
    parser.add_argument("--warmup", type=int, default=1, help="rounds discarded first")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--tree", action="append", default=[], metavar="NAME=SRC",
                        help="a bitsift source folder to time (default: this checkout's src)")
    parser.add_argument("--target", type=float, default=0.3, help="seconds, for the report")
    parser.add_argument("--json", type=Path, help="write the measurements here too")
    args = parser.parse_args(argv)
    trees = dict(t.split("=", 1) for t in args.tree) if args.tree else {"bitsift": str(SRC)}
    tree_paths = {name: Path(path) for name, path in trees.items()}
    load_before = os.getloadavg()
    with datagen.duckdb_table(args.rows, args.attributes, args.seed) as dataset:
        contenders = commands(tree_paths, dataset.location, dataset.table)
        seconds, cpu = measure(contenders, args.repeats, args.warmup)
    load_after = os.getloadavg()
    medians = {name: statistics.median(values) for name, values in seconds.items()}
    cpu_medians = {name: statistics.median(values) for name, values in cpu.items()}
    report = {
        "date": datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds"),
        "machine": {"cores": os.cpu_count(), "python": platform.python_version(),
                    "platform": platform.platform()},
        "load_average_before": load_before, "load_average_after": load_after,
        "rows": args.rows, "attributes": args.attributes, "repeats": args.repeats,
        "warmup": args.warmup, "trees": trees, "target_seconds": args.target,
        "median_seconds": medians, "seconds": seconds,
        "median_cpu_seconds": cpu_medians, "cpu_seconds": cpu,
    }
    print(f"{args.rows:,} rows x {args.attributes} attributes, DuckDB, median of "
          f"{args.repeats} fresh processes (load average {load_before[0]:.2f} before, "
          f"{load_after[0]:.2f} after)")
    for name, median in medians.items():
        values = seconds[name]
        mark = ""
        if name.endswith("bitsift rank"):
            mark = "  target met" if median <= args.target else "  over the target"
        print(f"  {name:<34} {median:7.3f} s  (min {min(values):.3f}, max {max(values):.3f}; "
              f"CPU {cpu_medians[name]:.3f} s){mark}")
    if args.json is not None:
        args.json.write_text(json.dumps(report, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
