"""Binning numeric attributes on DuckDB: quantile, equal-width, best-split and MDL against
independent NumPy computations, dates as numbers or parts, the options, and the CLI.

MDL: Fayyad & Irani (1993), "Multi-interval discretization of continuous-valued attributes for
classification learning", Proc. 13th IJCAI, pp. 1022-1027. :func:`test_discretize.paper_mdl` is
written from the paper; :func:`numpy_mdl` below is a faster vectorised search (checked against
it on iris) for the demo table's 20,000 rows.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import random
from pathlib import Path
from typing import Any

import duckdb
import numpy as np
import pytest
from click.testing import CliRunner
from helpers import Dataset, fill_duckdb
from sklearn.datasets import load_iris
from test_discretize import paper_mdl

import bitsift
from bitsift.cli import cli, main
from bitsift.errors import ColumnError, SpecError
from bitsift.run import reference
from bitsift.run.api import fetch_mdl_cuts, make_options
from bitsift.run.discretize import MDL_RESOLUTION
from bitsift.run.session import Session

IRIS_FEATURES = ("sepal_length", "sepal_width", "petal_length", "petal_width")


# --- independent NumPy searches --------------------------------------------------------------


def _entropy_nats(counts: np.ndarray) -> np.ndarray:
    """Entropy (nats) of each row of a count matrix, p log p form."""
    totals = counts.sum(axis=-1, keepdims=True)
    p = np.divide(counts, totals, out=np.zeros_like(counts, dtype=float), where=totals > 0)
    logs = np.log(p, out=np.zeros_like(p), where=p > 0)
    return -(p * logs).sum(axis=-1)


def _value_class_counts(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    values, value_index = np.unique(x, return_inverse=True)
    _, class_index = np.unique(y, return_inverse=True)
    counts = np.zeros((values.size, class_index.max() + 1))
    np.add.at(counts, (value_index, class_index), 1)
    return values, counts


def brute_force_split(x: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """The threshold (midway between adjacent distinct values) with the highest IG in bits,
    ties to the smallest threshold, and that IG: every candidate evaluated on the raw rows."""
    values = np.unique(x)
    h_y = float(_entropy_nats(_value_class_counts(np.zeros(y.size), y)[1])[0])
    best_t, best_ig = math.nan, -1.0
    for a, b in zip(values[:-1], values[1:], strict=True):
        t = (a + b) / 2
        left, right = y[x < t], y[x >= t]
        sides = [_value_class_counts(np.zeros(s.size), s)[1][0] for s in (left, right)]
        conditional = sum(s.sum() / y.size * float(_entropy_nats(s)) for s in sides)
        ig = (h_y - conditional) / math.log(2)
        if ig > best_ig + 1e-10:
            best_t, best_ig = float(t), ig
    return best_t, best_ig


def numpy_mdl(x: np.ndarray, y: np.ndarray) -> list[float]:
    """Fayyad & Irani's MDL, recursion over (distinct value x class) counts with cumulative
    sums; cuts midway between adjacent distinct values."""
    values, counts = _value_class_counts(x, y)
    cuts: list[float] = []

    def bits(c: np.ndarray) -> np.ndarray:
        return _entropy_nats(c) / math.log(2)

    def split(lo: int, hi: int) -> None:
        block = counts[lo:hi]
        if block.shape[0] < 2:
            return
        n = block.sum()
        left = np.cumsum(block, axis=0)[:-1]
        right = block.sum(axis=0) - left
        n_left, n_right = left.sum(axis=1), right.sum(axis=1)
        e = (n_left * bits(left) + n_right * bits(right)) / n
        k = int(np.argmin(e))
        whole = block.sum(axis=0)
        ent = float(bits(whole))
        gain = ent - e[k]
        k_all, k_left, k_right = (int((c > 0).sum()) for c in (whole, left[k], right[k]))
        delta = math.log2(3 ** k_all - 2) - (
            k_all * ent - k_left * float(bits(left[k])) - k_right * float(bits(right[k])))
        if gain > (math.log2(n - 1) + delta) / n:
            cuts.append(float((values[lo + k] + values[lo + k + 1]) / 2))
            split(lo, lo + k + 1)
            split(lo + k + 1, hi)

    split(0, values.size)
    return sorted(cuts)


def pairs(dataset: Dataset, column: str, target: str = "y") -> tuple[np.ndarray, np.ndarray]:
    """The (value, class) rows a binning reads: both present."""
    kept = [(v, t) for v, t in zip(dataset.column(column), dataset.column(target), strict=True)
            if v is not None and t is not None]
    return np.array([float(v) for v, _ in kept]), np.array([t for _, t in kept], dtype=object)


# --- data --------------------------------------------------------------------------------------


def iris_dataset() -> Dataset:
    """iris (Fisher 1936) as bundled with scikit-learn: four float features, a text target."""
    data = load_iris()
    names = [str(n) for n in data.target_names]
    rows = [(*map(float, features), names[int(label)])
            for features, label in zip(data.data, data.target, strict=True)]
    return Dataset(columns=(*((f, "float") for f in IRIS_FEATURES), ("species", "text")),
                   rows=rows)


def tied_dataset(seed: int, rows: int = 400) -> Dataset:
    """Floats with many ties and NULLs (values and target), a target that depends on them."""
    rng = random.Random(seed)
    data = []
    for _ in range(rows):
        x = rng.randint(0, 25) / 2 if rng.random() > 0.1 else None
        w = rng.gauss(0, 1) if rng.random() > 0.05 else None
        score = (x or 6.0) + rng.gauss(0, 3)
        y = ("hi" if score > 8 else "mid" if score > 4 else "lo") if rng.random() > 0.04 else None
        data.append((y, x, w))
    return Dataset(columns=(("y", "text"), ("x", "float"), ("w", "float")), rows=data)


def duckdb_with(dataset: Dataset, table: str = "t") -> duckdb.DuckDBPyConnection:
    connection = duckdb.connect()
    fill_duckdb(connection, [table], dataset)
    return connection


# --- MDL ---------------------------------------------------------------------------------------


@pytest.mark.slow
def test_numpy_mdl_equals_the_papers_procedure_on_iris() -> None:
    X, y = load_iris(return_X_y=True)
    for feature in range(4):
        assert numpy_mdl(X[:, feature], y) == pytest.approx(paper_mdl(X[:, feature], y),
                                                            abs=1e-12)


@pytest.mark.slow
def test_mdl_through_the_database_equals_the_paper_on_iris() -> None:
    dataset = iris_dataset()
    with duckdb_with(dataset, "iris") as connection:
        ranking = bitsift.rank(connection, table="iris", target="species", binning="mdl")
    labels = np.array(dataset.column("species"))
    for feature in IRIS_FEATURES:
        scored = ranking[feature]
        expected = paper_mdl(np.array(dataset.column(feature)), labels)
        assert scored.binning == "mdl" and scored.cuts is not None
        assert scored.cuts == pytest.approx(expected, abs=1e-12), feature
        assert scored.bins == len(expected) + 1
    # Recalled from memory, not from a printed table: petal length cut at 2.45 and 4.75.
    assert ranking["petal_length"].cuts == pytest.approx([2.45, 4.75])


def _fine_bin_reference(x: np.ndarray, y: np.ndarray, resolution: int) -> list[float]:
    """MDL on equal-frequency fine bins made in NumPy as histogram.sql.j2 documents them:
    fine bin = floor((rank of the value's first row - 1) * resolution / rows)."""
    order = np.sort(x)
    first_rank = np.searchsorted(order, x, side="left")  # RANK() - 1
    fine = np.floor(first_rank.astype(float) * resolution / x.size)
    bins = np.unique(fine)
    low = np.array([x[fine == f].min() for f in bins])
    high = np.array([x[fine == f].max() for f in bins])
    _, counts = _value_class_counts(np.searchsorted(bins, fine), y)
    # The same MDL recursion on fine bins: reuse numpy_mdl's search through a stand-in value
    # per bin, then map each cut back to the midpoint between the bins' edges.
    stand_in = np.repeat(np.arange(bins.size, dtype=float), counts.sum(axis=1).astype(int))
    labels = np.concatenate([np.repeat(np.arange(counts.shape[1]), c.astype(int))
                             for c in counts])
    cut_after = [int(c - 0.5) for c in numpy_mdl(stand_in, labels)]
    return [float((high[i] + low[i + 1]) / 2) for i in cut_after]


def test_mdl_on_fine_bins_above_the_resolution() -> None:
    rng = np.random.default_rng(12)
    rows = 1500
    x = np.round(rng.normal(0, 1, rows), 3)
    y = np.where(x + rng.normal(0, 0.6, rows) > 0.4, "b", np.where(x < -0.8, "c", "a"))
    dataset = Dataset(columns=(("y", "text"), ("x", "float")),
                      rows=[(str(a), float(b)) for a, b in zip(y, x, strict=True)])
    distinct = np.unique(x).size
    assert distinct > 64
    with duckdb_with(dataset) as connection, Session.open(connection, "t") as session:
        spec = session.resolve(make_options("y", binning="mdl"))
        coarse = fetch_mdl_cuts(session.engine, spec, resolution=64)["x"]
        exact = fetch_mdl_cuts(session.engine, spec, resolution=distinct)["x"]
    assert coarse == pytest.approx(_fine_bin_reference(x, y.astype(object), 64), abs=1e-12)
    assert exact == pytest.approx(numpy_mdl(x, y), abs=1e-12)
    # Coarse fine bins can only cut between them, so the cuts move (DEVELOPERS.md, "Binning").
    assert coarse != exact


def test_mdl_resolution_is_documented() -> None:
    assert MDL_RESOLUTION == 1024
    assert "1024" in (Path(__file__).parents[1] / "DEVELOPERS.md").read_text(encoding="utf-8")


# --- best split --------------------------------------------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("seed", range(4))
def test_best_split_equals_a_brute_force_search(seed: int) -> None:
    dataset = tied_dataset(seed)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", binning="best-split",
                               missing="drop")
        kept = bitsift.rank(connection, table="t", target="y", binning="best-split")
    for column in ("x", "w"):
        x, y = pairs(dataset, column)
        threshold, gain = brute_force_split(x, y)
        scored = ranking[column]
        assert scored.cuts == [threshold], column
        # --missing drop: the ranking measures exactly the split's rows.
        assert scored.information_gain == pytest.approx(gain, abs=1e-12), column
        assert scored.distinct == 2
        # --missing category: NULL is a third bin, measured like any category.
        values = reference.bin_values(dataset.column(column), [threshold])
        expected = reference.metrics(reference.contingency(values, dataset.column("y")))
        assert kept[column].information_gain == pytest.approx(
            expected["information_gain"], abs=1e-12)
        assert kept[column].distinct == 3


def test_best_split_ties_go_to_the_smallest_threshold() -> None:
    # Cutting at 1.5 or at 2.5 gives the same gain (mirror images): the smaller wins.
    rows = [("a", 1.0), ("a", 1.0), ("b", 2.0), ("b", 2.0), ("a", 3.0), ("a", 3.0)]
    dataset = Dataset(columns=(("y", "text"), ("x", "float")), rows=rows)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", binning="best-split")
    assert ranking["x"].cuts == [1.5]


def test_best_split_of_a_single_value_makes_one_bin() -> None:
    dataset = Dataset(columns=(("y", "text"), ("x", "float")),
                      rows=[("a", 2.0), ("b", 2.0), ("a", None)])
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", binning="best-split",
                               missing="drop")
    assert ranking["x"].cuts == [] and ranking["x"].bins == 1
    assert ranking["x"].information_gain == 0


# --- quantile and equal-width ------------------------------------------------------------------


def test_quantile_cuts_equal_numpy_and_merge_duplicates() -> None:
    dataset = tied_dataset(7)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", bins=40,
                               binning_for="w=quantile:5")
    for column, bins in (("x", 40), ("w", 5)):
        x, _ = pairs(dataset, column)
        levels = [round(j / bins, 12) for j in range(1, bins)]
        expected = sorted(set(np.quantile(x, levels).tolist()))
        assert ranking[column].cuts == pytest.approx(expected, rel=1e-12, abs=1e-12)
    # x has 26 values: of its 39 quantiles many coincide, and are merged.
    assert len(ranking["x"].cuts or []) < 39


def test_equal_width_cuts_from_min_and_max() -> None:
    dataset = tied_dataset(8)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", binning="equal-width", bins=6)
    for column in ("x", "w"):
        x, _ = pairs(dataset, column)
        lo, hi = float(x.min()), float(x.max())
        expected = [lo + (hi - lo) * j / 6 for j in range(1, 6)]
        assert ranking[column].cuts == expected, column
        assert ranking[column].binning == "equal-width" and ranking[column].bins == 6


@pytest.mark.slow
@pytest.mark.parametrize("binning", ["quantile", "equal-width", "best-split", "mdl"])
@pytest.mark.parametrize("missing", ["category", "drop"])
def test_every_binning_matches_the_reference(binning: str, missing: str) -> None:
    # Whatever the cut points, the metrics are those of the binned values (NULL per --missing).
    dataset = tied_dataset(3)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", binning=binning, bins=5,
                               missing=missing)
    for scored in ranking.attributes:
        values = reference.bin_values(dataset.column(scored.attribute), scored.cuts or [])
        expected = reference.metrics(reference.contingency(values, dataset.column("y"),
                                                           missing))
        assert scored.information_gain == pytest.approx(expected["information_gain"],
                                                        abs=1e-12)
        assert scored.distinct == expected["distinct"]


# --- dates -------------------------------------------------------------------------------------


def dated_dataset(seed: int, rows: int = 500) -> Dataset:
    rng = random.Random(seed)
    start = dt.datetime(2024, 12, 20, 0, 0, 0)
    data = []
    for _ in range(rows):
        moment = start + dt.timedelta(seconds=rng.randint(0, 400 * 86400))
        day = moment.date() if rng.random() > 0.05 else None
        y = "late" if moment.month in (1, 2) or moment.hour > 20 else "ok"
        data.append((y, day, moment if rng.random() > 0.05 else None))
    return Dataset(columns=(("y", "text"), ("day", "date"), ("at", "timestamp")), rows=data)


def epoch(value: Any) -> float | None:
    if value is None:
        return None
    moment = value if isinstance(value, dt.datetime) else dt.datetime.combine(value, dt.time())
    return (moment - dt.datetime(1970, 1, 1)).total_seconds()


def date_part(value: Any, part: str) -> int | None:
    if value is None:
        return None
    if part == "dow":
        return (value.weekday() + 1) % 7  # Sunday = 0
    return int(getattr(value, part))


@pytest.mark.slow
def test_dates_as_epoch_seconds_under_any_binning() -> None:
    dataset = dated_dataset(1)
    with duckdb_with(dataset) as connection:
        for binning in ("quantile", "best-split", "mdl"):
            ranking = bitsift.rank(connection, table="t", target="y", numeric="day,at",
                                   binning=binning, bins=4)
            for column in ("day", "at"):
                values = [epoch(v) for v in dataset.column(column)]
                kept = [(v, t) for v, t in zip(values, dataset.column("y"), strict=True)
                        if v is not None]
                x = np.array([v for v, _ in kept])
                scored = ranking[column]
                assert scored.kind == "numeric"
                if binning == "quantile":
                    expected = sorted(set(np.quantile(x, [0.25, 0.5, 0.75]).tolist()))
                    assert scored.cuts == pytest.approx(expected, rel=1e-12)
                elif binning == "best-split":
                    threshold, _ = brute_force_split(x, np.array([t for _, t in kept]))
                    assert scored.cuts == [threshold]
                else:
                    assert scored.cuts == pytest.approx(
                        numpy_mdl(x, np.array([t for _, t in kept])), abs=1e-9)
                binned = reference.bin_values(values, scored.cuts or [])
                expected_ig = reference.metrics(
                    reference.contingency(binned, dataset.column("y")))["information_gain"]
                assert scored.information_gain == pytest.approx(expected_ig, abs=1e-12)


def test_date_parts_as_categories() -> None:
    dataset = dated_dataset(2)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y", date_part="at=hour,month")
    assert ranking["at"].kind == "categorical" and ranking["at"].cuts is None
    for column, part in (("at", "hour"), ("day", "month")):
        values = [date_part(v, part) for v in dataset.column(column)]
        expected = reference.metrics(reference.contingency(values, dataset.column("y")))
        assert ranking[column].information_gain == pytest.approx(
            expected["information_gain"], abs=1e-12), column
        assert ranking[column].distinct == expected["distinct"]


def test_dates_are_binned_as_time_by_default_and_categorical_when_asked() -> None:
    # Issue 21, item 2 (was: dates stay categorical by default).
    dataset = dated_dataset(3, rows=60)
    with duckdb_with(dataset) as connection:
        ranking = bitsift.rank(connection, table="t", target="y")
        exact = bitsift.rank(connection, table="t", target="y", categorical="day")
    assert ranking["day"].kind == "numeric" and ranking["day"].temporal == "date"
    assert exact["day"].kind == "categorical"
    assert exact["day"].distinct == len(set(dataset.column("day")))


# --- options -----------------------------------------------------------------------------------


def test_options_are_checked() -> None:
    with pytest.raises(SpecError, match="^binning must be one of"):
        make_options("y", binning="kmeans")
    with pytest.raises(SpecError, match="bins must be between 2 and 1000"):
        make_options("y", binning_for="x=quantile:1")
    with pytest.raises(SpecError, match="bins must be a whole number"):
        make_options("y", binning_for="x=quantile:many")
    with pytest.raises(SpecError, match="COLUMN=VALUE"):
        make_options("y", binning_for="mdl")
    with pytest.raises(SpecError, match="the part must be one of"):
        make_options("y", date_part="day=week")
    with pytest.raises(SpecError, match="both date_part and numeric"):
        make_options("y", date_part="day=month", numeric="day")


def test_columns_named_in_binning_options_are_checked() -> None:
    dataset = Dataset(columns=(("y", "text"), ("x", "float"), ("n", "integer"), ("s", "text")),
                      rows=[("a", 1.0, 1, "p"), ("b", 2.0, 2, "q")])
    with duckdb_with(dataset) as connection:
        with pytest.raises(ColumnError, match="'xx'"):
            bitsift.rank(connection, table="t", target="y", binning_for="xx=mdl")
        with pytest.raises(SpecError, match="not binned.*: n"):
            bitsift.rank(connection, table="t", target="y", binning_for="n=mdl")
        with pytest.raises(ColumnError, match="^date_part needs date"):
            bitsift.rank(connection, table="t", target="y", date_part="s=year")
        with pytest.raises(ColumnError, match="^numeric needs number columns .or dates"):
            bitsift.rank(connection, table="t", target="y", numeric="s")
        # An integer named in --numeric is binned, with its own method.
        ranking = bitsift.rank(connection, table="t", target="y", numeric="n",
                               binning_for="n=best-split")
    assert ranking["n"].binning == "best-split" and ranking["n"].cuts == [1.5]
    assert ranking["x"].binning == "quantile"


# --- CLI ---------------------------------------------------------------------------------------


@pytest.mark.slow
def test_cli_mdl_on_the_demo_shows_cuts_a_numpy_search_confirms(demo_db: Path) -> None:
    args = ["rank", str(demo_db), "--table", "trays", "--target", "outcome", "--binning", "mdl"]
    shown = CliRunner().invoke(cli, args)
    assert shown.exit_code == 0, shown.output
    as_json = CliRunner().invoke(cli, [*args, "--format", "json"])
    payload = json.loads(as_json.stdout)
    # Numbers only: dates are binned too, their cuts shown as ISO dates (tests/test_guard_rails).
    numeric = {a["attribute"]: a for a in payload["attributes"] if a["kind"] == "numeric"
               and not any(isinstance(c, str) for c in a["cuts"] or [])}
    assert {"moisture_pct", "light_hours"} <= set(numeric)
    with duckdb.connect(str(demo_db), read_only=True) as connection:
        for name, attribute in numeric.items():
            rows = connection.execute(
                f'SELECT CAST("{name}" AS DOUBLE), outcome FROM trays '  # names from the catalog
                f'WHERE outcome IS NOT NULL AND "{name}" IS NOT NULL').fetchall()
            x = np.array([r[0] for r in rows])
            y = np.array([r[1] for r in rows], dtype=object)
            expected = numpy_mdl(x, y)
            assert attribute["binning"] == "mdl"
            assert attribute["cuts"] == pytest.approx(expected, abs=1e-9), name
            assert attribute["bins"] == len(expected) + 1
    assert numeric["moisture_pct"]["cuts"], "moisture should be cut"
    lines = shown.stdout.splitlines()
    at = lines.index("cut points (bin k holds cut[k-1] <= x < cut[k]):")
    moisture = next(line for line in lines[at:] if line.strip().startswith("moisture_pct"))
    first = numeric["moisture_pct"]["cuts"][0]
    assert "mdl" in moisture and f"{first:.4g}" in moisture


def test_cli_sql_mdl_needs_a_source(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exited:
        main(["sql", "--table", "t", "--target", "y", "--numeric", "x", "--binning", "mdl"])
    assert exited.value.code == 1
    error = capsys.readouterr().err
    assert error.startswith("Error: --binning mdl ('x') needs the data")
    assert "Python step" in error and "SOURCE" in error


@pytest.mark.slow
def test_cli_sql_mdl_with_a_source_inlines_the_cuts(tmp_path: Path) -> None:
    dataset = iris_dataset()
    path = tmp_path / "iris.duckdb"
    with duckdb.connect(str(path)) as connection:
        fill_duckdb(connection, ["iris"], dataset)
    args = [str(path), "--table", "iris", "--target", "species", "--binning", "mdl",
            "--binning-for", "sepal_width=best-split"]
    result = CliRunner().invoke(cli, ["sql", *args])
    assert result.exit_code == 0, result.output
    header = [line for line in result.stdout.splitlines() if line.startswith("--")]
    assert any("petal_length mdl (cut points computed by bitsift from the table and inlined: "
               "2.45, 4.75)" in line for line in header)
    assert any("sepal_width best-split" in line for line in header)
    ranking = bitsift.rank(str(path), table="iris", target="species", binning="mdl",
                           binning_for={"sepal_width": "best-split"})
    with duckdb.connect(str(path), read_only=True) as connection:
        cursor = connection.execute(result.stdout)
        names = [d[0] for d in cursor.description]
        rows = {r["attribute"]: r for r in (dict(zip(names, row, strict=True))
                                            for row in cursor.fetchall())}
    for scored in ranking.attributes:
        assert rows[scored.attribute]["information_gain"] == pytest.approx(
            scored.information_gain, abs=1e-12)
        assert rows[scored.attribute]["distinct_values"] == scored.distinct


@pytest.mark.slow
def test_cli_binning_options_reach_the_ranking(tmp_path: Path) -> None:
    dataset = tied_dataset(5)
    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as connection:
        fill_duckdb(connection, ["t"], dataset)
    result = CliRunner().invoke(cli, ["rank", str(path), "--table", "t", "--target", "y",
                                      "--binning", "equal-width", "--bins", "3",
                                      "--binning-for", "w=best-split", "--format", "csv"])
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    header = lines[0].split(",")
    records = {line.split(",")[0]: dict(zip(header, line.split(","), strict=True))
               for line in lines[1:]}
    assert records["x"]["binning"] == "equal-width" and records["x"]["bins"] == "3"
    assert len(records["x"]["cuts"].split(";")) == 2
    assert records["w"]["binning"] == "best-split" and records["w"]["bins"] == "2"
