#!/usr/bin/env python3
"""Generate the bitsift demo table: seedling trays of a fictional greenhouse co-op.

The scenario is invented for bitsift.  A greenhouse cooperative logs one row
per seedling tray, and the categorical target ``outcome`` says whether the
tray ``thrived``, was ``stunted`` or ``failed``.  The other columns are built
so that a ranking by information gain has a known right answer: a planted
target leak at the top, then strong, moderate and weak signals, then pure
noise, an ID-like column and a constant column at the bottom.  See
``examples/README.md`` for what each column is meant to show.

How the rows are made: every tray gets a hidden "vigour" score, which is the
sum of the effects of its causes (seed lot, substrate, the substrate and
watering pairing, moisture, bench zone, grower, light, sowing month, organic
flag) plus noise.  The vigour score is cut at fixed quantiles into the three
outcomes.  ``germination_days`` and ``qa_grade`` are read off the vigour and
the outcome afterwards.  Everything is vectorised with numpy and driven by one
seeded generator, so the same ``--rows`` and ``--seed`` always give the same
table.

The data goes into DuckDB straight from numpy arrays (no pandas or pyarrow
needed), and DuckDB itself writes the Parquet and CSV copies.

Usage::

    python examples/make_demo.py [--rows N] [--seed S] [--out DIR] [--csv]

The functions :func:`generate` and :func:`write_demo` can also be used from
code, for example by tests that load this file by its path.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

import duckdb
import numpy as np
import numpy.typing as npt

DEFAULT_ROWS = 200_000
DEFAULT_SEED = 20261201
DEFAULT_OUT = Path(__file__).resolve().parent / "data"

TABLE_NAME = "trays"
DUCKDB_NAME = "greenhouse.duckdb"
PARQUET_NAME = "greenhouse.parquet"
CSV_NAME = "greenhouse.csv"

OUTCOMES = ("thrived", "stunted", "failed")
# Shares of the outcomes, best first; the vigour score is cut at these quantiles.
OUTCOME_SHARES = (0.60, 0.28, 0.12)
# The post-hoc inspection grade that goes with each outcome (the planted leak).
QA_GRADES = ("A", "B", "C")
SITE = "east-annex"

SEED_LOTS = tuple(f"SL-{i:02d}" for i in range(1, 13))
SUBSTRATES = ("peat", "coir", "rockwool", "compost")
WATERING_PLANS = ("drip", "flood", "mist")
BENCH_ZONES = ("north-1", "north-2", "middle-1", "middle-2", "south-1", "south-2")
SENSOR_BATCHES = tuple(f"SB-{i}" for i in range(1, 9))
N_GROWERS = 3000

SOWING_START = np.datetime64("2025-01-01", "D")
SOWING_DAYS = 365

# Shares of rows set to NULL after generation.
OUTCOME_NULL_SHARE = 0.01
SUBSTRATE_NULL_SHARE = 0.05
MOISTURE_NULL_SHARE = 0.02
# Share of trays whose inspection grade disagrees with their outcome.
QA_MISMATCH_SHARE = 0.003

# Effects on the hidden vigour score (its noise has standard deviation NOISE_SD).
NOISE_SD = 1.0
SEED_LOT_SHARES = (0.14, 0.12, 0.11, 0.10, 0.09, 0.08, 0.08, 0.07, 0.06, 0.06, 0.05, 0.04)
SEED_LOT_EFFECTS = (1.2, 0.95, 0.7, 0.5, 0.3, 0.1, -0.1, -0.4, -0.75, -1.1, -1.5, -2.1)
SUBSTRATE_SHARES = (0.35, 0.25, 0.22, 0.18)
SUBSTRATE_EFFECTS = (0.35, 0.15, 0.0, -0.65)
WATERING_SHARES = (0.45, 0.30, 0.25)
# Extra effect of each (substrate, watering plan) pairing: rows follow SUBSTRATES,
# columns follow WATERING_PLANS.  Flooding suits rockwool but drowns compost and
# peat; mist is too little for rockwool.
PAIRING_EFFECTS = (
    (0.30, -0.60, 0.15),  # peat
    (0.15, 0.05, 0.20),  # coir
    (0.05, 0.45, -0.70),  # rockwool
    (0.25, -0.90, 0.05),  # compost
)
BENCH_ZONE_EFFECTS = (0.2, 0.12, 0.0, 0.0, -0.12, -0.25)
GROWER_EFFECT_SD = 0.12
MOISTURE_MEAN = 36.0
MOISTURE_SD = 9.0
LIGHT_EFFECT_PER_HOUR = 0.05
ORGANIC_SHARE = 0.3
ORGANIC_EFFECT = -0.2
SEASON_AMPLITUDE = 0.15

# germination_days = round(GERMINATION_BASE - GERMINATION_SLOPE * vigour + noise)
GERMINATION_BASE = 9.0
GERMINATION_SLOPE = 1.4
GERMINATION_NOISE_SD = 2.6
GERMINATION_MIN = 3
GERMINATION_MAX = 21

SOURCE_VIEW = "demo_source"
# All SQL below is constant text: no value from the command line is put in it.
_LOAD_SQL = """
CREATE TABLE trays AS
SELECT
    CAST(tray_id AS VARCHAR) AS tray_id,
    CAST(seed_lot AS VARCHAR) AS seed_lot,
    CAST(substrate AS VARCHAR) AS substrate,
    CAST(bench_zone AS VARCHAR) AS bench_zone,
    CAST(watering_plan AS VARCHAR) AS watering_plan,
    CAST(sensor_batch AS VARCHAR) AS sensor_batch,
    CAST(site AS VARCHAR) AS site,
    CAST(qa_grade AS VARCHAR) AS qa_grade,
    CAST(grower_code AS VARCHAR) AS grower_code,
    CAST(moisture_pct AS DOUBLE) AS moisture_pct,
    CAST(light_hours AS DOUBLE) AS light_hours,
    CAST(germination_days AS INTEGER) AS germination_days,
    CAST(tray_weight_g AS DECIMAL(8, 2)) AS tray_weight_g,
    CAST(sown_on AS DATE) AS sown_on,
    CAST(is_organic AS BOOLEAN) AS is_organic,
    CAST(outcome AS VARCHAR) AS outcome
FROM demo_source
"""

Columns = dict[str, npt.NDArray[np.generic]]


def _pick(rng: np.random.Generator, n: int, shares: npt.ArrayLike) -> npt.NDArray[np.intp]:
    """Draw ``n`` category codes ``0 .. len(shares) - 1`` with the given shares."""
    p = np.asarray(shares, dtype=np.float64)
    return rng.choice(len(p), size=n, p=p / p.sum())


def _labels(
    names: Sequence[str],
    codes: npt.NDArray[np.intp],
    null_mask: npt.NDArray[np.bool_] | None = None,
) -> npt.NDArray[np.object_]:
    """Map codes to their names as an object array, with ``None`` where masked."""
    table = np.empty(len(names) + 1, dtype=object)
    table[: len(names)] = names
    table[len(names)] = None
    if null_mask is not None:
        codes = np.where(null_mask, len(names), codes)
    return table[codes]


def _null_mask(rng: np.random.Generator, n: int, share: float) -> npt.NDArray[np.bool_]:
    """Mark about ``share`` of ``n`` rows, at random, as NULL."""
    return rng.random(n) < share


def _tray_ids(n: int) -> npt.NDArray[np.object_]:
    """Return ``T0000001``, ``T0000002``, ... (wider if ``n`` needs more digits)."""
    width = max(7, len(str(n)))
    digits = np.arange(1, n + 1).astype(f"<U{width}")
    return np.strings.add("T", np.strings.zfill(digits, width)).astype(object)


def _grower_codes(
    rng: np.random.Generator, n: int
) -> tuple[npt.NDArray[np.object_], npt.NDArray[np.float64]]:
    """Assign each tray a grower; return the codes and each tray's grower effect.

    There are :data:`N_GROWERS` growers with codes such as ``G-0042`` drawn from
    ``G-0001 .. G-9999``.  Some growers fill more trays than others, and each
    one has a small effect of their own on the trays' vigour.
    """
    numbers = np.sort(rng.choice(9999, size=N_GROWERS, replace=False) + 1)
    names = np.strings.add("G-", np.strings.zfill(numbers.astype("<U4"), 4))
    weights = rng.lognormal(mean=0.0, sigma=0.5, size=N_GROWERS)
    effects = rng.normal(0.0, GROWER_EFFECT_SD, size=N_GROWERS)
    codes = _pick(rng, n, weights)
    return names.astype(object)[codes], effects[codes]


def generate(rows: int, seed: int) -> Columns:
    """Generate the demo table as a dict of numpy arrays, one per column.

    The keys are the column names in table order, with ``outcome`` last.  Text
    columns are object arrays of ``str`` with ``None`` for NULL; float columns
    use ``NaN`` for NULL; ``germination_days`` is ``int32``; ``tray_weight_g``
    is a float rounded to cents; ``sown_on`` is ``datetime64[D]``;
    ``is_organic`` is ``bool``.  The same ``rows`` and ``seed`` always give
    the same arrays.
    """
    if rows < 1:
        raise ValueError("rows must be at least 1")
    rng = np.random.default_rng(seed)
    n = rows

    # Causes of a tray's vigour.
    lot = _pick(rng, n, SEED_LOT_SHARES)
    substrate = _pick(rng, n, SUBSTRATE_SHARES)
    watering = _pick(rng, n, WATERING_SHARES)
    bench = rng.integers(0, len(BENCH_ZONES), size=n)
    growers, grower_effect = _grower_codes(rng, n)
    moisture = np.clip(rng.normal(MOISTURE_MEAN, MOISTURE_SD, size=n), 4.0, 80.0)
    light = np.round(rng.uniform(10.0, 18.0, size=n), 1)
    day = rng.integers(0, SOWING_DAYS, size=n)
    organic = rng.random(n) < ORGANIC_SHARE

    # Drier trays suffer, and below about 25 % moisture they suffer a lot.
    moisture_effect = 0.06 * (moisture - MOISTURE_MEAN) - 1.2 / (
        1.0 + np.exp((moisture - 22.0) / 2.5)
    )
    season_effect = SEASON_AMPLITUDE * np.sin(2.0 * np.pi * (day - 60) / SOWING_DAYS)
    pairing = np.asarray(PAIRING_EFFECTS)[substrate, watering]
    vigour = (
        np.asarray(SEED_LOT_EFFECTS)[lot]
        + np.asarray(SUBSTRATE_EFFECTS)[substrate]
        + pairing
        + np.asarray(BENCH_ZONE_EFFECTS)[bench]
        + grower_effect
        + moisture_effect
        + LIGHT_EFFECT_PER_HOUR * (light - 14.0)
        + season_effect
        + ORGANIC_EFFECT * organic
        + rng.normal(0.0, NOISE_SD, size=n)
    )

    # Cut the vigour into outcomes: best 60 % thrived, worst 12 % failed.
    cuts = np.quantile(vigour, [OUTCOME_SHARES[2], OUTCOME_SHARES[2] + OUTCOME_SHARES[1]])
    outcome = np.where(vigour >= cuts[1], 0, np.where(vigour >= cuts[0], 1, 2))

    # Effects of the vigour and of the outcome.
    spread = float(vigour.std()) or 1.0
    germination = np.rint(
        GERMINATION_BASE
        - GERMINATION_SLOPE * (vigour - vigour.mean()) / spread
        + rng.normal(0.0, GERMINATION_NOISE_SD, size=n)
    )
    germination = np.clip(germination, GERMINATION_MIN, GERMINATION_MAX).astype(np.int32)
    mismatch = rng.random(n) < QA_MISMATCH_SHARE
    grade = np.where(mismatch, (outcome + rng.integers(1, 3, size=n)) % 3, outcome)

    # Columns with no bearing on the outcome.
    sensor = rng.integers(0, len(SENSOR_BATCHES), size=n)
    weight = np.round(rng.normal(850.0, 60.0, size=n), 2)

    moisture = np.round(moisture, 1)
    moisture[_null_mask(rng, n, MOISTURE_NULL_SHARE)] = np.nan
    return {
        "tray_id": _tray_ids(n),
        "seed_lot": _labels(SEED_LOTS, lot),
        "substrate": _labels(SUBSTRATES, substrate, _null_mask(rng, n, SUBSTRATE_NULL_SHARE)),
        "bench_zone": _labels(BENCH_ZONES, bench),
        "watering_plan": _labels(WATERING_PLANS, watering),
        "sensor_batch": _labels(SENSOR_BATCHES, sensor),
        "site": np.full(n, SITE, dtype=object),
        "qa_grade": _labels(QA_GRADES, grade),
        "grower_code": growers,
        "moisture_pct": moisture,
        "light_hours": light,
        "germination_days": germination,
        "tray_weight_g": weight,
        "sown_on": SOWING_START + day.astype("timedelta64[D]"),
        "is_organic": organic,
        "outcome": _labels(OUTCOMES, outcome, _null_mask(rng, n, OUTCOME_NULL_SHARE)),
    }


def _duckdb_inputs(columns: Columns) -> Columns:
    """Adapt the arrays to what DuckDB's numpy scan reads, NULLs made explicit."""
    inputs: Columns = {}
    for name, values in columns.items():
        if values.dtype.kind == "f":
            inputs[name] = np.ma.masked_invalid(values)
        elif values.dtype.kind == "M":
            # The scan reads datetime64 in seconds or finer, not in days.
            inputs[name] = values.astype("datetime64[s]")
        else:
            inputs[name] = values
    return inputs


def write_demo(
    out_dir: str | os.PathLike[str] = DEFAULT_OUT,
    rows: int = DEFAULT_ROWS,
    seed: int = DEFAULT_SEED,
    csv: bool = False,
) -> Path:
    """Write the demo files to ``out_dir`` and return the DuckDB file's path.

    Writes ``greenhouse.duckdb`` (table ``trays``), ``greenhouse.parquet`` and,
    if ``csv`` is true, ``greenhouse.csv``.  Each file is written in a temporary
    folder inside ``out_dir`` and then renamed over any old one, so a reader
    never sees a half-written file.  Prints one line per file written.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    columns = _duckdb_inputs(generate(rows, seed))
    staging = Path(tempfile.mkdtemp(prefix=".greenhouse-", dir=out))
    try:
        names = [DUCKDB_NAME, PARQUET_NAME] + ([CSV_NAME] if csv else [])
        con = duckdb.connect(str(staging / DUCKDB_NAME))
        try:
            con.register(SOURCE_VIEW, columns)
            con.execute(_LOAD_SQL)
            con.unregister(SOURCE_VIEW)
            table = con.table(TABLE_NAME)
            table.write_parquet(str(staging / PARQUET_NAME))
            if csv:
                table.write_csv(str(staging / CSV_NAME), header=True)
            con.execute("CHECKPOINT")
        finally:
            con.close()
        del columns
        for name in names:
            target = out / name
            os.replace(staging / name, target)
            size = target.stat().st_size
            noun = "row" if rows == 1 else "rows"
            print(f"wrote {target} ({rows:,} {noun}, {size / 1e6:.1f} MB)")
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return out / DUCKDB_NAME


def _positive_int(text: str) -> int:
    """Parse a command-line count that must be at least 1."""
    value = int(text)
    if value < 1:
        raise argparse.ArgumentTypeError("must be at least 1")
    return value


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line: parse options, write the files, report the time."""
    parser = argparse.ArgumentParser(
        description="Generate the bitsift greenhouse demo table (DuckDB, Parquet, CSV).",
    )
    parser.add_argument(
        "--rows",
        type=_positive_int,
        default=DEFAULT_ROWS,
        help=f"number of trays (default {DEFAULT_ROWS})",
    )
    parser.add_argument(
        "--seed",
        type=int,
        default=DEFAULT_SEED,
        help=f"random seed (default {DEFAULT_SEED})",
    )
    parser.add_argument(
        "--out",
        type=Path,
        default=DEFAULT_OUT,
        help="output folder (default: examples/data next to this script)",
    )
    parser.add_argument(
        "--csv",
        action="store_true",
        help="also write greenhouse.csv",
    )
    args = parser.parse_args(argv)
    started = time.perf_counter()
    write_demo(args.out, rows=args.rows, seed=args.seed, csv=args.csv)
    print(f"done in {time.perf_counter() - started:.1f} s", file=sys.stderr)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
