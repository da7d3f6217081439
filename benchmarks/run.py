"""The side-by-side benchmark: bitsift against the export path, hand-written SQL and the scan floor.

    python benchmarks/run.py --rows 10000000 --attributes 16 --engine duckdb
    python benchmarks/run.py --rows 2000000 --attributes 16 --engine postgres
    python benchmarks/run.py --mode strategies --rows 2000000 --engine postgres
    python benchmarks/run.py --rows 1000000 --engine mariadb   # or sqlite, spark, clickhouse

``--mode side-by-side`` (default) measures, interleaved (A B C D A B C D …, after a warm-up):
(a) bitsift.rank, (b) the export to pandas plus NumPy, (b') the same through the engine's
fastest export, (c) K per-attribute GROUP BY queries run sequentially, (d) one query reading
every column once, (e) the counting bound: K bare GROUP BY queries (on two sessions where the
engine allows; on SQLite and MariaDB also (e1) on one session, and the faster is the bound), no
quantile searched, no metric computed. ``--mode strategies`` measures
bitsift's own count strategies against each other. See benchmarks/README.md.
"""

from __future__ import annotations

import argparse
import importlib.metadata
import json
import os
import platform
import resource
import sys
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent))

from connections import FAST_READER, ONE_SESSION_BOUND, bound_sessions  # noqa: E402
from contenders import STRATEGIES  # noqa: E402
from copies import SPARK_SETTINGS  # noqa: E402
from datagen import (  # noqa: E402
    DEFAULT_MARIADB_URL,
    DEFAULT_POSTGRES_URL,
    Dataset,
    EngineName,
    generated_table,
)
from measure import Measurement, Summary, Task, interleaved, max_differences, summarize  # noqa: E402

ENGINES: tuple[EngineName, ...] = ("duckdb", "postgres", "mariadb", "sqlite", "spark",
                                   "clickhouse")
#: Side-by-side contenders: key -> (contender, params); labels from :func:`side_by_side_label`.
SIDE_BY_SIDE: dict[str, tuple[str, dict[str, Any]]] = {
    "a": ("bitsift", {}),
    "b": ("export", {"reader": "dbapi"}),
    "b_fast": ("export", {}),  # the engine's FAST_READER
    "c": ("handwritten", {}),
    "d": ("floor", {}),
    "e": ("bound", {}),  # on bound_sessions(dataset)
    "e1": ("bound", {"workers": 1}),  # on one session, where ONE_SESSION_BOUND lists the engine
}
LABELS: dict[str, str] = {
    "a": "(a) bitsift.rank",
    "c": "(c) K GROUP BY queries, sequential",
    "d": "(d) scan floor: SELECT MIN(each column)",
}
#: The two export readers, per (reader, engine) or reader alone.
EXPORT_LABELS: dict[tuple[str, str | None], str] = {
    ("dbapi", None): "(b) export: pandas.read_sql + NumPy",
    ("dbapi", "spark"): "(b) export: Spark toPandas + NumPy",
    ("dbapi", "clickhouse"): "(b) export: chdb query to DataFrame + NumPy",
    ("arrow", "duckdb"): "(b') export: DuckDB .df() (Arrow) + NumPy",
    ("arrow", "spark"): "(b') export: Spark toPandas, Arrow on + NumPy",
    ("arrow", "clickhouse"): "(b') export: chdb ArrowTable + NumPy",
    ("fetch", None): "(b') no columnar export: fetchall() + NumPy",
}
#: Issue 20: bitsift's median at most this many times the counting bound's, per engine.
BOUND_TARGETS: dict[str, float] = {"duckdb": 1.25, "postgres": 1.05, "mariadb": 1.3,
                                   "sqlite": 1.3, "spark": 1.3, "clickhouse": 1.3}
#: ... and on DuckDB's all-categorical table (3M × 12).
CATEGORICAL_ONLY_BOUND_TARGET = 1.15


@dataclass(frozen=True)
class Ratio:
    """A ratio of two medians, and the issue's target for it where there is one."""

    name: str
    value: float
    target: str = ""
    met: bool | None = None


def parse_args(argv: Sequence[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=10_000_000)
    parser.add_argument("--attributes", type=int, default=16)
    parser.add_argument("--engine", choices=ENGINES, default="duckdb")
    parser.add_argument("--categorical-only", action="store_true",
                        help="every attribute categorical (issue 20: DuckDB 3M x 12)")
    parser.add_argument("--mode", choices=("side-by-side", "strategies"), default="side-by-side")
    parser.add_argument("--repeats", type=int, default=5, help="measured rounds (median)")
    parser.add_argument("--warmup", type=int, default=1, help="discarded rounds first")
    parser.add_argument("--export-rows", type=int, default=None,
                        help="measure the export path on this many rows and scale linearly")
    parser.add_argument("--no-export", action="store_true", help="leave the export path out")
    parser.add_argument("--skip", default="",
                        help="side-by-side contenders to leave out, by key (a0 a b b_fast c d e "
                             "e1), comma-separated: e.g. c where the K queries take minutes")
    parser.add_argument("--strategies", default=",".join(STRATEGIES),
                        help="which strategies --mode strategies runs (comma-separated)")
    parser.add_argument("--workers", type=int, default=2,
                        help="connections for the concurrent per-attribute strategy")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--postgres-url", default=DEFAULT_POSTGRES_URL)
    parser.add_argument("--mariadb-url", default=DEFAULT_MARIADB_URL)
    parser.add_argument("--spark-master", default=SPARK_SETTINGS["spark.master"])
    parser.add_argument("--spark-driver-memory", default=SPARK_SETTINGS["spark.driver.memory"])
    parser.add_argument("--before", type=Path, default=None,
                        help="another bitsift tree's src folder: its bitsift.rank runs as (a0), "
                             "interleaved with the others")
    parser.add_argument("--json", type=Path, default=None, help="also write the results here")
    parser.add_argument("--quiet", action="store_true", help="no progress lines on stderr")
    args = parser.parse_args(argv)
    if args.rows < 1 or args.attributes < 1 or args.repeats < 1 or args.warmup < 0:
        parser.error("--rows, --attributes and --repeats must be positive, --warmup >= 0")
    if args.export_rows is not None and not 1 <= args.export_rows <= args.rows:
        parser.error("--export-rows must be between 1 and --rows")
    args.strategies = [s.strip() for s in args.strategies.split(",") if s.strip()]
    unknown = sorted(set(args.strategies) - set(STRATEGIES))
    if unknown or not args.strategies:
        parser.error(f"--strategies: unknown {', '.join(unknown)}; known: {', '.join(STRATEGIES)}")
    args.skip = {k.strip() for k in args.skip.split(",") if k.strip()}
    essential = {"a", "d", "e"} & args.skip
    if essential or args.skip - set(SIDE_BY_SIDE):
        parser.error(f"--skip: a, d and e are always measured; known: {', '.join(SIDE_BY_SIDE)}")
    return args


def side_by_side_tasks(dataset: Dataset, export_dataset: Dataset | None,
                       before: Path | None = None, skip: frozenset[str] = frozenset(),
                       ) -> list[Task]:
    """(a) (b) (b') (c) (d) (e), in the interleaving order; (a0) first with ``before``."""
    tasks = []
    if before is not None:
        tasks.append(Task(label="a0", contender="bitsift", dataset=dataset,
                          pythonpath=str(before.resolve())))
    for key, (contender, params) in SIDE_BY_SIDE.items():
        if key in skip:
            continue
        on = dataset
        if key == "b_fast":
            params = {"reader": FAST_READER[dataset.engine]}
        elif key == "e":
            params = {"workers": bound_sessions(dataset)}
        elif key == "e1" and dataset.engine not in ONE_SESSION_BOUND:
            continue
        if contender == "export":
            if export_dataset is None:
                continue
            on = export_dataset
        tasks.append(Task(label=key, contender=contender, dataset=on, params=params,
                          stands_for_rows=dataset.rows))
    return tasks


def side_by_side_label(key: str, engine: str) -> str:
    """The report's name of a side-by-side contender on ``engine``."""
    if key in LABELS:
        return LABELS[key]
    if key == "a0":
        return "(a0) bitsift.rank, the --before tree"
    if key == "e":
        sessions = {"spark": "2 jobs at once", "clickhouse": "one at a time"}.get(
            engine, "2 sessions")
        return f"(e) counting bound: K bare GROUP BYs, {sessions}"
    if key == "e1":
        return "(e1) counting bound: K bare GROUP BYs, one session"
    reader = "dbapi" if key == "b" else FAST_READER[engine]
    return EXPORT_LABELS.get((reader, engine)) or EXPORT_LABELS[(reader, None)]


def strategy_tasks(dataset: Dataset, strategies: Sequence[str], workers: int) -> list[Task]:
    """bitsift as shipped, each forced strategy, and the scan floor."""
    tasks = [Task(label="a", contender="bitsift", dataset=dataset)]
    for strategy in strategies:
        params: dict[str, Any] = {"strategy": strategy}
        if strategy.endswith("_concurrent"):
            params["workers"] = workers
        tasks.append(Task(label=strategy, contender="strategy", dataset=dataset, params=params))
    tasks.append(Task(label="d", contender="floor", dataset=dataset))
    return tasks


def label_of(key: str, workers: int = 2, engine: str = "duckdb") -> str:
    if key in SIDE_BY_SIDE or key == "a0":
        return side_by_side_label(key, engine)
    if key == "per_attribute_concurrent":
        return f"per-attribute statements, {workers} sessions"
    if key == "split_concurrent":
        return f"attributes split in {workers} statements, {workers} sessions"
    if key == "counted_concurrent":
        return f"quantile bins counted from cells, {workers} sessions"
    return key.replace("_", " ")


def side_by_side_ratios(s: dict[str, Summary], engine: str, categorical_only: bool = False,
                        ) -> list[Ratio]:
    """a/d, b/a, b'/a, c/a, the memory ratios, e/d and a/e, each with the issue's target where
    it has one."""
    a = s["a"].median_seconds
    ratios = [Ratio("a/d (bitsift / scan floor)", a / s["d"].median_seconds,
                    *(("<= 2.0", a / s["d"].median_seconds <= 2.0) if engine == "duckdb"
                      else ("", None)))]
    if "b" in s:
        b = s["b"].scaled_seconds / a
        ratios.append(Ratio("b/a (export / bitsift)", b,
                            *((">= 50", b >= 50) if engine == "duckdb" else ("", None))))
        rss = s["b"].scaled_peak_rss_mib / s["a"].median_peak_rss_mib
        ratios.append(Ratio("peak RSS b/a", rss,
                            *((">= 10", rss >= 10) if engine == "duckdb" else ("", None))))
    if "b_fast" in s:
        ratios.append(Ratio("b'/a (fastest export / bitsift)", s["b_fast"].scaled_seconds / a))
        ratios.append(Ratio("peak RSS b'/a",
                            s["b_fast"].scaled_peak_rss_mib / s["a"].median_peak_rss_mib))
    if "c" in s:
        c = s["c"].median_seconds / a
        ratios.append(Ratio("c/a (K queries / bitsift)", c,
                            *(("> 1", c > 1) if engine == "postgres" else ("", None))))
    if "e" in s:
        # The counting bound against the scan floor: what the a/d target asks of the counting
        # alone; and how far bitsift (cut points and metrics included) stays above it. Where
        # the bound also ran on one session (e1), the faster of the two is the bound.
        e = min(s[k].median_seconds for k in ("e", "e1") if k in s)
        if "e1" in s:
            ratios.append(Ratio("e1/e (bound: one session / two)",
                                s["e1"].median_seconds / s["e"].median_seconds))
        ratios.append(Ratio("e/d (counting bound / scan floor)", e / s["d"].median_seconds))
        bound = (CATEGORICAL_ONLY_BOUND_TARGET if categorical_only and engine == "duckdb"
                 else BOUND_TARGETS[engine])
        ratio = a / e
        ratios.append(Ratio("a/e (bitsift / counting bound)", ratio, f"<= {bound}",
                            ratio <= bound))
        if "a0" in s:
            before = s["a0"].median_seconds / e
            ratios.append(Ratio("a0/e (the --before tree / counting bound)", before,
                                f"<= {bound}", before <= bound))
    return ratios


def strategy_ratios(s: dict[str, Summary], workers: int) -> list[Ratio]:
    floor = s["d"].median_seconds
    strategies = [k for k in s if k not in ("a", "d")]
    best = min(strategies, key=lambda k: s[k].median_seconds)
    a = s["a"].median_seconds
    return [Ratio(f"{label_of(k, workers)} / scan floor", s[k].median_seconds / floor)
            for k in ["a", *strategies]] + [
        Ratio(f"bitsift / fastest strategy ({best})", a / s[best].median_seconds),
    ]


#: bitsift.run.quantile_counts.EXACT_ROWS (not imported: the harness stays small, see
#: datagen.duckdb_table): above this many rows bitsift's run-mode quantile cut points lie on
#: fine-bucket edges, within one bucket of the exact ones the other contenders compute.
EXACT_QUANTILE_ROWS = 100_000


def _split_by_kind(tasks: Sequence[Task], reference: dict[str, dict[str, float]],
                   ) -> tuple[dict[str, dict[str, float]], dict[str, dict[str, float]]]:
    """bitsift's metrics of the categorical and of the numeric attributes."""
    numeric = {a.name for a in tasks[0].dataset.layout() if a.kind == "numeric"}
    return ({k: v for k, v in reference.items() if k not in numeric},
            {k: v for k, v in reference.items() if k in numeric})


def agreement(tasks: Sequence[Task], measurements: Sequence[Measurement],
              ) -> tuple[dict[str, dict[str, float]], dict[str, dict[str, float]]]:
    """Largest relative difference of each contender's metrics from bitsift's (same data only):
    over every attribute, or, above :data:`EXACT_QUANTILE_ROWS` rows, over the categorical
    ones, the numeric ones (cut on fine-bucket edges by bitsift) in the second mapping."""
    last = {m.label: m for m in measurements}
    reference = last["a"].metrics
    rows = {t.label: t.dataset.rows for t in tasks}
    categorical, numeric = _split_by_kind(tasks, reference)
    near = rows["a"] > EXACT_QUANTILE_ROWS
    found, found_numeric = {}, {}
    for t in tasks:
        if t.label == "a" or not last[t.label].metrics or rows[t.label] != rows["a"]:
            continue
        expected = reference
        if t.contender == "bound" or near:  # the bound counts the categorical ones only
            expected = categorical
        if near and t.contender != "bound" and numeric:
            found_numeric[t.label] = max_differences(numeric, last[t.label].metrics)
        found[t.label] = max_differences(expected, last[t.label].metrics)
    return found, found_numeric


def _meminfo_gib() -> float:
    for line in Path("/proc/meminfo").read_text().splitlines():
        if line.startswith("MemTotal:"):
            return int(line.split()[1]) / 1024**2
    return 0.0


def versions(dataset: Dataset) -> dict[str, str]:
    """Versions of everything measured."""
    import duckdb
    import numpy
    import pandas
    import sqlglot

    import bitsift

    found = {
        "python": platform.python_version(),
        "bitsift": bitsift.__version__,
        "duckdb": duckdb.__version__,
        "sqlglot": sqlglot.__version__,
        "pandas": pandas.__version__,
        "numpy": numpy.__version__,
    }
    if dataset.engine in ("postgres", "mariadb"):
        import sqlalchemy as sa

        engine = sa.create_engine(dataset.location, poolclass=sa.pool.NullPool)
        with engine.connect() as connection:
            found[dataset.engine] = str(connection.exec_driver_sql("SELECT VERSION()").scalar())
        engine.dispose()
    if dataset.engine == "sqlite":
        import sqlite3

        found["sqlite"] = sqlite3.sqlite_version
    # Read from the installed metadata: importing pyspark or chdb here would lift the
    # harness's peak RSS, which every worker inherits.
    package = {"spark": "pyspark", "clickhouse": "chdb", "mariadb": "pymysql"}
    if dataset.engine in package:
        found[package[dataset.engine]] = importlib.metadata.version(package[dataset.engine])
    return found


def machine() -> dict[str, Any]:
    return {
        "cores": os.cpu_count(),
        "memory_gib": round(_meminfo_gib(), 1),
        "platform": platform.platform(),
    }


def describe_dataset(dataset: Dataset) -> str:
    numeric = sum(1 for a in dataset.layout() if a.kind == "numeric")
    return (f"{dataset.engine}, {dataset.rows:,} rows x {dataset.attributes} attributes "
            f"({numeric} numeric, {dataset.attributes - numeric} categorical)")


def format_report(result: dict[str, Any]) -> str:
    """The human-readable report printed at the end."""
    lines = [
        f"bitsift benchmark ({result['mode']}): {result['dataset']}",
        f"{result['repeats']} measured rounds after {result['warmup']} warm-up, interleaved; "
        f"median wall time; peak RSS of each contender's own process",
        f"machine: {result['machine']['cores']} cores, {result['machine']['memory_gib']} GiB; "
        f"load average {result['load_before'][0]:.2f} before, {result['load_after'][0]:.2f} after; "
        f"harness peak RSS {result['harness_peak_rss_mib']:.0f} MiB (no worker reads lower)",
        "versions: " + ", ".join(f"{k} {v}" for k, v in result["versions"].items()),
        "",
        f"{'contender':<52} {'median s':>10} {'min s':>9} {'max s':>9} {'peak RSS MiB':>13}",
    ]
    for key, s in result["summaries"].items():
        scaled = s["stands_for_rows"] != s["measured_rows"]
        lines.append(
            f"{result['labels'][key]:<52} {s['median_seconds']:>10.3f} {s['min_seconds']:>9.3f} "
            f"{s['max_seconds']:>9.3f} {s['median_peak_rss_mib']:>13.0f}"
        )
        if scaled:
            factor = s["stands_for_rows"] / s["measured_rows"]
            note = f"  measured at {s['measured_rows']:,} rows; scaled x{factor:.3g}"
            lines.append(
                f"{note:<52} {s['scaled_seconds']:>10.3f} {'':>9} {'':>9} "
                f"{s['scaled_peak_rss_mib']:>13.0f}"
            )
    lines += ["", "ratios:"]
    for ratio in result["ratios"]:
        verdict = ""
        if ratio["met"] is not None:
            verdict = f"   target {ratio['target']}: {'met' if ratio['met'] else 'MISSED'}"
        lines.append(f"  {ratio['name']:<50} {ratio['value']:>9.2f}{verdict}")
    lines += ["", "agreement with (a), largest relative difference over attributes:"]
    for key, diffs in result["agreement"].items():
        worst = max(diffs.values()) if diffs else 0.0
        lines.append(f"  {result['labels'][key]:<50} {worst:.1e}")
    if result.get("numeric_agreement"):
        lines += [f"  numeric attributes (above {EXACT_QUANTILE_ROWS:,} rows bitsift cuts on "
                  "fine-bucket edges, within one bucket of the exact quantiles):"]
        for key, diffs in result["numeric_agreement"].items():
            worst = max(diffs.values()) if diffs else 0.0
            lines.append(f"  {result['labels'][key]:<50} {worst:.1e}")
    if any(s["stands_for_rows"] != s["measured_rows"] for s in result["summaries"].values()):
        lines.append("  (contenders measured on fewer rows are compared on their own table only)")
    return "\n".join(lines)


def _progress(quiet: bool) -> Any:
    def show(m: Measurement) -> None:
        if not quiet:
            kind = "warm-up" if m.round < 0 else f"round {m.round + 1}"
            print(f"  {kind:<8} {m.label:<26} {m.seconds:8.3f} s {m.peak_rss_mib:8.0f} MiB",
                  file=sys.stderr, flush=True)

    return show


def measure_all(args: argparse.Namespace) -> dict[str, Any]:
    """Generate the table(s), run the rounds, and collect everything reported."""
    spark = {"spark.master": args.spark_master, "spark.driver.memory": args.spark_driver_memory}

    def table(rows: int) -> Any:
        return generated_table(args.engine, rows, args.attributes, args.seed, args.postgres_url,
                               categorical_only=args.categorical_only,
                               mariadb_url=args.mariadb_url, settings=spark)

    with table(args.rows) as dataset:
        export_rows = args.export_rows or args.rows
        exporting = args.mode == "side-by-side" and not args.no_export
        if exporting and export_rows != args.rows:
            with table(export_rows) as export_dataset:
                return _measure(args, dataset, export_dataset)
        return _measure(args, dataset, dataset if exporting else None)


def _measure(args: argparse.Namespace, dataset: Dataset, export_dataset: Dataset | None,
             ) -> dict[str, Any]:
    if args.mode == "side-by-side":
        tasks = side_by_side_tasks(dataset, export_dataset, args.before, frozenset(args.skip))
    else:
        tasks = strategy_tasks(dataset, args.strategies, args.workers)
    load_before = os.getloadavg()
    measurements = interleaved(tasks, args.repeats, args.warmup, _progress(args.quiet))
    load_after = os.getloadavg()
    # Linux carries a parent's peak RSS over into its children's ru_maxrss: this is the floor
    # under every worker's figure (kept small: tables are generated by child processes).
    harness_peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    summaries = summarize(tasks, measurements)
    ratios = (side_by_side_ratios(summaries, args.engine, args.categorical_only)
              if args.mode == "side-by-side" else strategy_ratios(summaries, args.workers))
    agreed, agreed_numeric = agreement(tasks, measurements)
    return {
        "mode": args.mode,
        "engine": args.engine,
        "rows": args.rows,
        "attributes": args.attributes,
        "categorical_only": args.categorical_only,
        "skipped": sorted(args.skip),
        "dataset": describe_dataset(dataset),
        "dataset_table": dataset.table,
        "repeats": args.repeats,
        "warmup": args.warmup,
        "machine": machine(),
        "versions": versions(dataset),
        "load_before": load_before,
        "load_after": load_after,
        "harness_peak_rss_mib": harness_peak,
        "labels": {t.label: label_of(t.label, args.workers, args.engine) for t in tasks},
        "summaries": {
            k: {**asdict(s), "scaled_seconds": s.scaled_seconds,
                "scaled_peak_rss_mib": s.scaled_peak_rss_mib}
            for k, s in summaries.items()
        },
        "ratios": [asdict(r) for r in ratios],
        "agreement": agreed,
        "numeric_agreement": agreed_numeric,
        "measurements": [
            {k: v for k, v in asdict(m).items() if k != "metrics"} for m in measurements
        ],
    }


def main(argv: Sequence[str] | None = None) -> int:
    args = parse_args(argv)
    result = measure_all(args)
    print(format_report(result))
    if args.json is not None:
        args.json.write_text(json.dumps(result, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
