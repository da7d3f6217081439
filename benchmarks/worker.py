"""Run one contender in this (fresh) process and print one JSON line: time, RSS, metrics.

Usage (by measure.py, not by hand): ``python benchmarks/worker.py '<task as JSON>'``.
Imports happen before the clock starts, and so does Spark's session (connections.prepare:
a JVM per worker); the timed region opens the connection, runs the contender and has its
metrics in hand. Peak RSS is read by the parent with ``wait4``: this process only, so neither
a server's memory nor Spark's JVM (a child of this process) is counted.
"""

from __future__ import annotations

import importlib
import json
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from connections import finish, prepare  # noqa: E402
from contenders import CONTENDERS  # noqa: E402
from datagen import Dataset  # noqa: E402

#: Modules each contender needs, imported before the clock starts (its driver comes per engine).
#: bitsift imports scipy.special lazily, for the p-value (bitsift.run.metrics.p_value): an
#: import, not ranking work, like the others (0.7 s on a loaded machine, measured 2026-12-05).
PRELOAD: dict[str, tuple[str, ...]] = {
    "bitsift": ("bitsift", "bitsift.run.api", "sqlalchemy", "scipy.special"),
    "export": ("pandas", "sqlalchemy", "bitsift.run.reference"),
    "handwritten": ("bitsift.run.reference",),
    "floor": (),
    "bound": ("bitsift.run.reference",),
    "strategy": ("bitsift", "bitsift.run.api", "sqlalchemy", "bitsift.run.concurrent",
                 "scipy.special"),
}
#: Per engine: its driver, and the sqlglot dialect module bitsift writes for (sqlglot imports
#: a dialect's module on first use: 0.07 s, an import like the others, not ranking work).
DRIVERS: dict[str, tuple[str, ...]] = {
    "duckdb": ("duckdb", "sqlglot.dialects.duckdb"),
    "postgres": ("psycopg", "sqlglot.dialects.postgres"),
    "mariadb": ("pymysql", "sqlglot.dialects.mysql"),
    "sqlite": ("sqlite3", "sqlglot.dialects.sqlite"),
    "spark": ("pyarrow", "sqlglot.dialects.spark", "bitsift.engines.spark_engine"),
    # chdb imports pandas on a session's first query, whatever the output format (0.5-1 s).
    "clickhouse": ("chdb.session", "pandas", "pyarrow", "sqlglot.dialects.clickhouse",
                   "bitsift.engines.chdb_engine"),
}


def rss_kib() -> int:
    """Current resident set size of this process, from /proc."""
    for line in Path("/proc/self/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    return 0


def main(argv: list[str]) -> None:
    task = json.loads(argv[1])
    contender = task["contender"]
    dataset = Dataset.from_json(task["dataset"])
    for module in PRELOAD[contender] + DRIVERS[dataset.engine]:
        importlib.import_module(module)
    run = CONTENDERS[contender]
    prepare(dataset)
    before = rss_kib()
    start = time.perf_counter()
    metrics = run(dataset, **task.get("params", {}))
    seconds = time.perf_counter() - start
    finish(dataset)
    print(json.dumps({"seconds": seconds, "rss_before_kib": before, "metrics": metrics}))


if __name__ == "__main__":
    main(sys.argv)
