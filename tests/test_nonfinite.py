"""NaN and the infinities as data: real segments, typed literals in SQL, strict JSON out.

The data is invented for these tests: four segments of a float column (NaN, +inf, -inf, 1.5)
holding the same 12-row pattern, so every segment must rank exactly alike.
"""

from __future__ import annotations

import decimal
import json
import math
from typing import Any

import duckdb
import pytest
from click.testing import CliRunner
from helpers import Dataset, loaded

import bitsift
from bitsift import jsonout
from bitsift.analysis.profile import rank_and_profile_segments
from bitsift.cli import cli
from bitsift.run.readout import plain_value
from bitsift.sql.sqlbuild import literal, value_literal

SEGMENT_VALUES = (math.nan, math.inf, -math.inf, 1.5)
#: How the segments come out: ascending, NaN after +inf (DuckDB's and PostgreSQL's order).
EXPECTED_ORDER = ("-inf", "1.5", "inf", "nan")
#: Target entropy of the pattern: one class in three rows is "yes" (H(1/3) in bits).
H_THIRD = -(1 / 3) * math.log2(1 / 3) - (2 / 3) * math.log2(2 / 3)


def segmented_dataset() -> Dataset:
    """48 rows: "s" cycles through the four values; within each, "a" decides "y" exactly.
    A float column named "inf" (all 0.0) is a trap for SQL that writes the value inf bare."""
    rows = []
    for i in range(48):
        block = (i // 4) % 3
        rows.append(("yes" if block == 0 else "no", block, SEGMENT_VALUES[i % 4], 0.0,
                     float(i % 5)))
    return Dataset(columns=(("y", "text"), ("a", "integer"), ("s", "float"), ("inf", "float"),
                            ("noise", "float")), rows=rows)


def _no_constants(name: str) -> Any:
    raise AssertionError(f"bare {name} in JSON output")


def strict_loads(text: str) -> Any:
    """Parse JSON as RFC 8259 does: no NaN/Infinity tokens."""
    return json.loads(text, parse_constant=_no_constants)


@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_nan_and_infinite_values_are_real_segments(engine: str,
                                                   request: pytest.FixtureRequest) -> None:
    with loaded(engine, segmented_dataset(), request) as where:
        result = bitsift.rank(where.source, table=where.table, target="y", by="s",
                              attributes="a")
    assert [repr(r.segment["s"]) for r in result.segments] == list(EXPECTED_ORDER)
    assert result.segment(s=float("nan")) is result.segments[-1]
    for ranking in result.segments:
        assert (ranking.status, ranking.rows, ranking.classes) == ("ok", 12, 2), ranking.segment
        scored = ranking["a"]
        assert scored.distinct == 3, ranking.segment
        assert scored.information_gain == pytest.approx(H_THIRD, abs=1e-12), ranking.segment


@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_report_segments_compare_with_typed_literals(engine: str,
                                                     request: pytest.FixtureRequest) -> None:
    # Before: the +inf segment's drill-down compared "s" with the column "inf" (all 0.0).
    with loaded(engine, segmented_dataset(), request) as where:
        runs = rank_and_profile_segments(where.source, "y", where.table, by="s",
                                         attributes="a", top=1)
    assert len(runs) == 4
    for run in runs:
        assert run.ranking.status == "ok", run.segment
        assert sum(run.profiles.class_rows) == 12, run.segment
        values = run.profiles.attributes["a"].values
        assert sorted(sum(v.counts) for v in values) == [4, 4, 4], run.segment


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_segmented_json_is_strict(engine: str, request: pytest.FixtureRequest) -> None:
    with loaded(engine, segmented_dataset(), request, duckdb_file=True) as where:
        result = CliRunner().invoke(cli, ["rank", str(where.source), "--table", where.table,
                                          "--target", "y", "--by", "s", "--attributes",
                                          "a,noise", "--format", "json"])
    assert result.exit_code == 0, result.output
    payload = strict_loads(result.output)
    assert [s["segment"]["s"] for s in payload["segments"]] == [
        "-Infinity", 1.5, "Infinity", "NaN"]


def test_value_literals_round_trip_through_the_engine() -> None:
    values = [math.inf, -math.inf, 1.5, -0.25, 3, True, "it's", None]
    sql = "SELECT " + ", ".join(value_literal(v).sql("duckdb") for v in values)
    got = duckdb.connect().execute(sql).fetchone()
    assert got is not None and list(got) == values
    nan = duckdb.connect().execute(f"SELECT {literal(math.nan)}").fetchone()
    assert nan is not None and math.isnan(nan[0])


def test_no_float_literal_is_written_as_a_name() -> None:
    for value in (math.nan, math.inf, -math.inf):
        text = literal(value)
        assert text.startswith("CAST('") and text.endswith("' AS DOUBLE)"), text


def test_json_writer_refuses_nothing_and_writes_strings_for_non_finite() -> None:
    text = jsonout.dumps({"a": [math.nan, math.inf, -math.inf, 0.5], "b": (1, None)})
    assert strict_loads(text) == {"a": ["NaN", "Infinity", "-Infinity", 0.5], "b": [1, None]}


def test_non_finite_decimal_segment_values_are_floats() -> None:
    # PostgreSQL NUMERIC columns hold 'NaN' and (since 14) '±Infinity'; int() of them failed.
    values = [plain_value(decimal.Decimal(text)) for text in ("Infinity", "-Infinity", "NaN")]
    assert values[:2] == [math.inf, -math.inf] and math.isnan(values[2])
    assert plain_value(decimal.Decimal("2.00")) == 2

