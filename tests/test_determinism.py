"""Same data, same bytes: every run of a ranking prints exactly the same output.

The tables are invented for these tests, generated inside each engine from the row number by
integer arithmetic (no random source): a 3-class target, an attribute with thousands of
values and its identical copy, a small categorical, a binned float and a segment column.
Enough cells that a parallel DOUBLE SUM adds them in a different order from run to run (on
400,000 rows DuckDB's IG moved by up to 6e-13 bits between runs, identical columns apart).
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator
from typing import Any

import duckdb
import pytest
import sqlalchemy as sa
from click.testing import CliRunner
from conftest import MARIADB_URL, POSTGRES_URL
from helpers import quoted

from bitsift.analysis.redundancy import read_pairs
from bitsift.cli import cli
from bitsift.jobs.drift import DriftThresholds, compare
from bitsift.run.metrics import RESOLUTION_DIGITS, score, snap, sort_scores
from bitsift.spec.rankspec import Thresholds

RUNS = 5
FORMATS = ("json", "csv", "table", "markdown")
#: The columns, from the row number i (the same arithmetic in every engine's SQL).
COLUMNS = {
    "y": "(i * 7 + i / 11) % 3",
    "a": "(i * 7919) % {values}",
    "a_copy": "(i * 7919) % {values}",
    "b": "(i / 3) % 5",
    "x": "((i * 37) % 1000) / 8.0",
    "seg": "i % 2",
}


def _select(values: int) -> str:
    return ", ".join(f"{expr.format(values=values)} AS {name}" for name, expr in COLUMNS.items())


@pytest.fixture
def duckdb_table(tmp_path: Any) -> Iterator[tuple[str, str]]:
    path = str(tmp_path / "det.duckdb")
    with duckdb.connect(path) as con:
        # // is DuckDB's integer division; the others divide integers with /.
        select = _select(20000).replace(" / ", " // ").replace(" // 8.0", " / 8.0")
        con.execute(f"CREATE TABLE t AS SELECT {select} FROM range(200000) r(i)")
    yield path, "t"


def _server_table(url: str, engine: str, schema: str, source_rows: str) -> tuple[str, str]:
    writer = sa.create_engine(url, poolclass=sa.pool.NullPool)
    table = quoted(engine, schema, "t")
    select = _select(5000)
    if engine == "mariadb":
        select = select.replace(" / ", " DIV ").replace(" DIV 8.0", " / 8.0")
    try:
        with writer.begin() as connection:
            # no_parameters: the drivers would read the modulo's % as a placeholder.
            connection.exec_driver_sql(f"CREATE TABLE {table} AS SELECT {select} "
                                       f"FROM {source_rows}",
                                       execution_options={"no_parameters": True})
    finally:
        writer.dispose()
    return url, table


@pytest.fixture
def postgres_table(pg_schema: str) -> tuple[str, str]:
    return _server_table(POSTGRES_URL, "postgres", pg_schema,
                         "generate_series(0, 59999) AS r(i)")


@pytest.fixture
def mariadb_table(mariadb_database: str) -> tuple[str, str]:
    return _server_table(MARIADB_URL, "mariadb", mariadb_database,
                         "(SELECT seq AS i FROM seq_0_to_59999) AS r")


def _outputs(source: str, table: str, fmt: str, *extra: str) -> list[str]:
    args = ["rank", source, "--table", table, "--target", "y", "--attributes",
            "a,a_copy,b,x", "--numeric", "x", "--bins", "5", "--format", fmt, *extra]
    outputs = []
    for _ in range(RUNS):
        result = CliRunner().invoke(cli, args)
        assert result.exit_code == 0, result.output
        outputs.append(result.output)
    return outputs


def _assert_identical_twins(payload: dict[str, Any]) -> None:
    """a and a_copy hold the same values: the same metrics, next to each other, a first."""
    rankings = payload.get("segments") or [payload]
    for ranking in rankings:
        names = [a["attribute"] for a in ranking["attributes"]]
        first = names.index("a")
        assert names[first + 1] == "a_copy", names
        twin, copy = ranking["attributes"][first], ranking["attributes"][first + 1]
        assert {**twin, "attribute": "a_copy"} == copy


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres", "mariadb"])
def test_rank_prints_the_same_bytes_on_every_run(engine: str,
                                                 request: pytest.FixtureRequest) -> None:
    source, table = request.getfixturevalue(f"{engine}_table")
    for extra in ((), ("--by", "seg")):
        for fmt in FORMATS:
            outputs = _outputs(source, table, fmt, *extra)
            assert len(set(outputs)) == 1, (engine, fmt, extra)
            if fmt == "json":
                _assert_identical_twins(json.loads(outputs[0]))


# --- the Python side: rows that differ in the last bits give one result ------------------


def _row(ig: float, h_x: float, h_y: float = 1.0, rows: int = 1000,
         distinct: int = 7) -> dict[str, Any]:
    return {"distinct_values": distinct, "rows_used": rows, "dof": (distinct - 1),
            "information_gain": ig, "target_entropy": h_y, "attribute_entropy": h_x,
            "conditional_entropy": h_y - ig, "gain_ratio": ig / h_x,
            "symmetric_uncertainty": 2 * ig / (h_x + h_y),
            # One G for both rows: the statement's exact sums make G repeat on one engine.
            "g_statistic": 2 * rows * math.log(2) * round(ig, 9)}


# The values reported in issue 16: one identical column measured twice, in two runs.
NOISY_PAIRS = ((0.0, 3.99e-15), (0.19292975178524840, 0.19292975178525296))


@pytest.mark.parametrize(("one", "other"), NOISY_PAIRS)
def test_scores_of_noisy_rows_are_identical(one: float, other: float) -> None:
    thresholds = Thresholds()
    first = score(_row(one, 2.5), "a", "categorical", thresholds)
    second = score(_row(other, 2.5 + 4e-16, 1.0 - 2e-16), "a", "categorical", thresholds)
    assert first == second
    assert first.information_gain == round(one, RESOLUTION_DIGITS)


def test_a_gain_that_is_only_rounding_is_zero_everywhere() -> None:
    scored = score(_row(3.99e-15, 2.5), "a", "categorical", Thresholds())
    assert (scored.information_gain, scored.gain_ratio, scored.symmetric_uncertainty,
            scored.g_statistic, scored.p_value) == (0.0, 0.0, 0.0, 0.0, 1.0)
    assert scored.conditional_entropy == scored.target_entropy == 1.0


def test_tied_attributes_are_ordered_by_name() -> None:
    thresholds = Thresholds()
    scores = [score(_row(0.19292975178525296, 2.5), "b", "categorical", thresholds),
              score(_row(0.19292975178524840, 2.5), "a", "categorical", thresholds)]
    assert [s.attribute for s in sort_scores(scores, "information_gain")] == ["a", "b"]


def test_snap_is_documented_resolution() -> None:
    assert snap(0.1234567890123456) == 0.123456789012
    assert snap(-1e-13) == 0.0 and math.copysign(1.0, snap(-1e-13)) == 1.0


def test_pair_scores_of_noisy_rows_are_identical() -> None:
    def pair_row(mi: float, left: float) -> dict[str, Any]:
        return {"pair_index": 1, "mutual_information": mi, "left_entropy": left,
                "right_entropy": 1.5, "symmetric_uncertainty": 2 * mi / (left + 1.5),
                "rows_used": 100}

    one = read_pairs([pair_row(0.19292975178524840, 2.0)], [("a", "b")])
    other = read_pairs([pair_row(0.19292975178525296, 2.0 + 4e-16)], [("a", "b")])
    assert one == other


def _history_row(attribute: str, position: int, ig: float) -> dict[str, Any]:
    return {"ranking": "r", "segment": "", "attribute": attribute, "position": position,
            "information_gain": ig, "flags": "", "options": "{}"}


def test_tied_attributes_trading_places_is_not_drift() -> None:
    # History written before snapping: b and c tie but came out in either order.
    old = [_history_row("a", 1, 0.5), _history_row("b", 2, 0.3),
           _history_row("c", 3, 0.3 + 4e-15), _history_row("d", 4, 0.1)]
    new = [_history_row("a", 1, 0.5), _history_row("c", 2, 0.3 + 4e-15),
           _history_row("b", 3, 0.3), _history_row("d", 4, 0.1)]
    assert compare(old, new, DriftThresholds(ig_change=0, rank_change=0,
                                             ig_rule="change")) == ([], [])
    # A real move past a tie is still one.
    moved = [_history_row("d", 1, 0.6), _history_row("a", 2, 0.5),
             _history_row("b", 3, 0.3), _history_row("c", 4, 0.3)]
    changes, _ = compare(old, moved, DriftThresholds(ig_change=1, rank_change=0))
    assert [(c.kind, c.attribute) for c in changes] == [("rank", "a"), ("rank", "d")]
