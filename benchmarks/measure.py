"""Run contenders in worker processes, interleaved, and summarize them (medians).

Each measurement is a fresh process (``worker.py``), so peak RSS is that contender's alone:
``os.wait4`` returns the child's own ``ru_maxrss``, whatever else ran before it.
"""

from __future__ import annotations

import json
import os
import statistics
import subprocess
import sys
import tempfile
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from datagen import Dataset

WORKER = Path(__file__).resolve().parent / "worker.py"


@dataclass(frozen=True)
class Task:
    """One contender on one dataset; ``label`` names it in the output."""

    label: str
    contender: str
    dataset: Dataset
    params: dict[str, Any] = field(default_factory=dict)
    #: Rows the measured time stands for (> dataset.rows: the time is scaled linearly).
    stands_for_rows: int | None = None
    #: The worker's PYTHONPATH (another bitsift tree's src: ``run.py --before``); None: this
    #: process's.
    pythonpath: str | None = None

    def to_json(self) -> str:
        return json.dumps(
            {"contender": self.contender, "dataset": self.dataset.to_json(), "params": self.params}
        )


@dataclass(frozen=True)
class Measurement:
    """One run of one task."""

    label: str
    round: int
    seconds: float
    #: CPU time of the whole worker process (user + system), imports included.
    cpu_seconds: float
    peak_rss_mib: float
    rss_before_mib: float
    metrics: dict[str, dict[str, float]]


class WorkerError(RuntimeError):
    """A worker process failed; its stderr is in the message."""


def run_task(task: Task, round_number: int) -> Measurement:
    """Run ``task`` in a fresh worker process and measure its time and peak RSS."""
    # stderr goes to a file so a chatty worker cannot block on a full pipe; the parent reaps
    # the child itself with wait4 (Popen.wait would discard the child's resource usage).
    with tempfile.TemporaryFile(mode="w+") as errors:
        env = None if task.pythonpath is None else {**os.environ, "PYTHONPATH": task.pythonpath}
        process = subprocess.Popen(
            [sys.executable, str(WORKER), task.to_json()],
            stdout=subprocess.PIPE,
            stderr=errors,
            text=True,
            env=env,
        )
        try:
            stdout = process.stdout.read()  # type: ignore[union-attr]
        except BaseException:
            # Ctrl-C: stop the worker first, so the caller can drop its tables at once.
            process.kill()
            process.wait()
            raise
        process.stdout.close()  # type: ignore[union-attr]
        _, status, usage = os.wait4(process.pid, 0)
        process.returncode = os.waitstatus_to_exitcode(status)
        if process.returncode != 0:
            errors.seek(0)
            raise WorkerError(
                f"{task.label} failed (exit {process.returncode}):\n{errors.read()[-4000:]}"
            )
    report = json.loads(stdout.strip().splitlines()[-1])
    return Measurement(
        label=task.label,
        round=round_number,
        seconds=report["seconds"],
        cpu_seconds=usage.ru_utime + usage.ru_stime,
        peak_rss_mib=usage.ru_maxrss / 1024,  # ru_maxrss is in KiB on Linux
        rss_before_mib=report["rss_before_kib"] / 1024,
        metrics=report["metrics"],
    )


def interleaved(tasks: Sequence[Task], repeats: int, warmup: int = 1,
                progress: Callable[[Measurement], None] | None = None) -> list[Measurement]:
    """A B C D A B C D …: ``warmup`` rounds (numbered < 0, left out later), then ``repeats``."""
    measurements = []
    for round_number in range(-warmup, repeats):
        for task in tasks:
            measurement = run_task(task, round_number)
            if progress is not None:
                progress(measurement)
            measurements.append(measurement)
    return measurements


@dataclass(frozen=True)
class Summary:
    """Medians over the measured (non-warm-up) rounds of one task."""

    label: str
    runs: int
    median_seconds: float
    min_seconds: float
    max_seconds: float
    median_peak_rss_mib: float
    median_rss_before_mib: float
    measured_rows: int
    #: Rows the time stands for; ``scaled_seconds`` = median × stands_for / measured.
    stands_for_rows: int

    @property
    def scale(self) -> float:
        return self.stands_for_rows / self.measured_rows

    @property
    def scaled_seconds(self) -> float:
        return self.median_seconds * self.scale

    @property
    def scaled_peak_rss_mib(self) -> float:
        """Peak RSS extrapolated linearly in the part that grew during the run."""
        grown = self.median_peak_rss_mib - self.median_rss_before_mib
        return self.median_rss_before_mib + grown * self.scale


def summarize(tasks: Sequence[Task], measurements: Sequence[Measurement]) -> dict[str, Summary]:
    """One :class:`Summary` per task label, warm-up rounds left out."""
    summaries = {}
    for task in tasks:
        runs = [m for m in measurements if m.label == task.label and m.round >= 0]
        seconds = [m.seconds for m in runs]
        summaries[task.label] = Summary(
            label=task.label,
            runs=len(runs),
            median_seconds=statistics.median(seconds),
            min_seconds=min(seconds),
            max_seconds=max(seconds),
            median_peak_rss_mib=statistics.median(m.peak_rss_mib for m in runs),
            median_rss_before_mib=statistics.median(m.rss_before_mib for m in runs),
            measured_rows=task.dataset.rows,
            stands_for_rows=task.stands_for_rows or task.dataset.rows,
        )
    return summaries


def max_differences(reference: dict[str, dict[str, float]], other: dict[str, dict[str, float]],
                    ) -> dict[str, float]:
    """Largest relative difference per metric between two contenders' results."""
    worst: dict[str, float] = {}
    for attribute, expected in reference.items():
        got = other.get(attribute)
        if got is None:
            worst["missing attributes"] = worst.get("missing attributes", 0) + 1
            continue
        for metric, value in expected.items():
            diff = abs(got[metric] - value) / max(1.0, abs(value))
            worst[metric] = max(worst.get(metric, 0.0), diff)
    return worst
