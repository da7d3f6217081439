"""How bitsift's time and memory grow with the rows N and the attributes K (DuckDB by default).

    python benchmarks/scaling.py    # N = 1M 3M 10M 30M at K = 16, then K = 4 16 64 at N = 10M
    python benchmarks/scaling.py --rows 1000000 3000000 --attributes 16 --k-rows 1000000

For each size: bitsift.rank and the scan floor, interleaved, medians (see run.py). Prints a
Markdown table; ``--json`` keeps everything.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from datagen import DEFAULT_POSTGRES_URL, generated_table  # noqa: E402
from measure import Measurement, Task, interleaved, summarize  # noqa: E402


@dataclass(frozen=True)
class ScalingRow:
    """bitsift and the scan floor at one size."""

    rows: int
    attributes: int
    bitsift_seconds: float
    bitsift_peak_rss_mib: float
    floor_seconds: float
    floor_peak_rss_mib: float
    load_average: float

    @property
    def ratio(self) -> float:
        return self.bitsift_seconds / self.floor_seconds

    @property
    def nanoseconds_per_cell(self) -> float:
        """bitsift's time per attribute value read: flat when time is linear in N and K."""
        return self.bitsift_seconds / (self.rows * self.attributes) * 1e9


def parse_args(argv: Sequence[str] | None) -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--engine", choices=("duckdb", "postgres"), default="duckdb")
    parser.add_argument("--rows", type=int, nargs="+",
                        default=[1_000_000, 3_000_000, 10_000_000, 30_000_000])
    parser.add_argument("--attributes", type=int, default=16, help="K of the N series")
    parser.add_argument("--k-values", type=int, nargs="+", default=[4, 16, 64])
    parser.add_argument("--k-rows", type=int, default=10_000_000, help="N of the K series")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--warmup", type=int, default=1)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--postgres-url", default=DEFAULT_POSTGRES_URL)
    parser.add_argument("--json", type=Path, default=None)
    parser.add_argument("--quiet", action="store_true")
    return parser.parse_args(argv)


def measure_size(args: argparse.Namespace, rows: int, k: int) -> ScalingRow:
    """Generate one table, run bitsift and the floor on it, and drop it."""
    with generated_table(args.engine, rows, k, args.seed, args.postgres_url) as dataset:
        tasks = [Task("a", "bitsift", dataset), Task("d", "floor", dataset)]
        load = os.getloadavg()[0]
        measurements = interleaved(tasks, args.repeats, args.warmup, _progress(args.quiet))
    summaries = summarize(tasks, measurements)
    return ScalingRow(
        rows=rows,
        attributes=k,
        bitsift_seconds=summaries["a"].median_seconds,
        bitsift_peak_rss_mib=summaries["a"].median_peak_rss_mib,
        floor_seconds=summaries["d"].median_seconds,
        floor_peak_rss_mib=summaries["d"].median_peak_rss_mib,
        load_average=max(load, os.getloadavg()[0]),
    )


def _progress(quiet: bool) -> object:
    def show(m: Measurement) -> None:
        if not quiet:
            print(f"    {m.label} round {m.round + 1}: {m.seconds:.3f} s, {m.peak_rss_mib:.0f} MiB",
                  file=sys.stderr, flush=True)

    return show


def sizes(args: argparse.Namespace) -> list[tuple[int, int]]:
    """The N series at K = --attributes, then the K series at N = --k-rows, without repeats."""
    wanted = [(n, args.attributes) for n in args.rows] + [(args.k_rows, k) for k in args.k_values]
    return list(dict.fromkeys(wanted))


def markdown(rows: Sequence[ScalingRow]) -> str:
    lines = [
        "| N rows | K | bitsift s | floor s | bitsift / floor | ns per value | "
        "bitsift peak RSS MiB | floor peak RSS MiB | load |",
        "|---:|---:|---:|---:|---:|---:|---:|---:|---:|",
    ]
    for r in rows:
        lines.append(
            f"| {r.rows:,} | {r.attributes} | {r.bitsift_seconds:.2f} | {r.floor_seconds:.2f} | "
            f"{r.ratio:.1f} | {r.nanoseconds_per_cell:.1f} | {r.bitsift_peak_rss_mib:.0f} | "
            f"{r.floor_peak_rss_mib:.0f} | {r.load_average:.1f} |"
        )
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    args = parse_args(argv)
    results = []
    for rows, k in sizes(args):
        if not args.quiet:
            print(f"{args.engine}: {rows:,} rows x {k} attributes", file=sys.stderr, flush=True)
        results.append(measure_size(args, rows, k))
    print(markdown(results))
    if args.json is not None:
        payload = [{**asdict(r), "ratio": r.ratio} for r in results]
        args.json.write_text(json.dumps(payload, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
