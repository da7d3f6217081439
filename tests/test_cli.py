"""The ``bitsift`` command: the JSON contract, options, formats, ``sql`` and ``check``.

Most tests run the click group in-process with ``CliRunner``; the last ones run the installed
console script in a subprocess, as a user would.
"""

from __future__ import annotations

import csv
import io
import json
import math
import subprocess
import sys
from pathlib import Path
from typing import Any

import duckdb
import pytest
import sqlglot
from click.testing import CliRunner, Result
from sqlglot import exp

from bitsift.cli import cli
from bitsift.run.api import METRICS_CHECKED
from bitsift.run.result import ATTRIBUTE_KEYS

TOP_KEYS = ["target", "table", "rows", "rows_excluded", "target_entropy", "classes", "confidence",
            "attributes"]
#: The gain's uncertainty: two compact columns in the table (interval, rank range).
UNCERTAINTY_KEYS = ("information_gain_se", "information_gain_corrected", "information_gain_low",
                    "information_gain_high", "rank_low", "rank_high")
#: Keys the table and Markdown formats show as columns; the binning (method, bin count, cut
#: points) of numeric attributes is listed below the table instead.
TABLE_KEYS = (*(k for k in ATTRIBUTE_KEYS
                if k not in ("binning", "bins", "cuts", "date_part", *UNCERTAINTY_KEYS)),
              "interval", "rank")
SCRIPT = Path(sys.executable).with_name("bitsift")

# A generated table (values are functions of the row number): an id, a text channel, an
# integer with NULLs, a float (numeric), a boolean, a constant and a target with NULLs.
VISITS_SQL = """
CREATE TABLE visits AS
SELECT
  i AS visit_id,
  ['web', 'phone', 'shop'][i % 3 + 1] AS channel,
  CASE WHEN i % 7 = 0 THEN NULL ELSE i % 4 END AS weekday,
  CAST((i * 37) % 101 AS DOUBLE) / 10 AS amount,
  i % 5 = 0 AS returning,
  'same' AS region,
  CASE WHEN i % 11 = 0 THEN NULL
       WHEN i % 3 = 0 OR (i % 3 = 1 AND i % 4 < 2) THEN 'yes' ELSE 'no' END AS converted
FROM range(600) r(i)
"""
ATTRIBUTES = {"visit_id", "channel", "weekday", "amount", "returning", "region"}


@pytest.fixture(scope="module")
def visits_db(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("cli") / "visits.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute(VISITS_SQL)
        con.execute(f"COPY visits TO '{path.with_suffix('.parquet')}' (FORMAT parquet)")
    return path


def invoke(*args: str) -> Result:
    result = CliRunner().invoke(cli, [str(a) for a in args])
    assert result.exception is None or isinstance(result.exception, SystemExit), result.exception
    return result


def rank_json(*args: str) -> dict[str, Any]:
    result = invoke("rank", *args, "--format", "json")
    assert result.exit_code == 0, result.output
    return json.loads(result.stdout)  # fails on anything but exactly one JSON document


def assert_same_attributes(got: list[dict[str, Any]], expected: list[dict[str, Any]]) -> None:
    """Same attributes in the same order with the same numbers, to rounding.

    DuckDB sums doubles in parallel, so two runs of one statement may differ in the last bit.
    """
    assert [a["attribute"] for a in got] == [a["attribute"] for a in expected]
    for a, b in zip(got, expected, strict=True):
        assert (a["kind"], a["distinct"], a["dof"], a["flags"]) == (
            b["kind"], b["distinct"], b["dof"], b["flags"])
        for metric in (*ATTRIBUTE_KEYS[3:9], "p_value"):
            assert math.isclose(a[metric], b[metric], rel_tol=1e-12, abs_tol=1e-12), metric


def db_args(path: Path) -> list[str]:
    return [str(path), "--table", "visits", "--target", "converted"]


@pytest.mark.slow
def test_json_contract_keys_order_and_types(visits_db: Path) -> None:
    payload = rank_json(*db_args(visits_db))
    assert list(payload) == TOP_KEYS
    assert payload["target"] == "converted" and payload["table"] == "visits"
    assert payload["rows"] == 600 - 55 and payload["rows_excluded"] == 55
    assert payload["classes"] == 2
    assert isinstance(payload["target_entropy"], float) and 0 < payload["target_entropy"] <= 1
    assert {a["attribute"] for a in payload["attributes"]} == ATTRIBUTES
    for attribute in payload["attributes"]:
        assert tuple(attribute) == ATTRIBUTE_KEYS
        assert attribute["kind"] in ("categorical", "numeric")
        assert isinstance(attribute["distinct"], int) and isinstance(attribute["dof"], int)
        assert all(isinstance(attribute[k], float) for k in ATTRIBUTE_KEYS[3:9])
        assert isinstance(attribute["p_value"], float)
        assert isinstance(attribute["flags"], list)
        if attribute["kind"] == "numeric":
            assert attribute["binning"] == "quantile"
            assert attribute["bins"] == len(attribute["cuts"]) + 1
        else:
            assert attribute["binning"] is attribute["bins"] is attribute["cuts"] is None
        assert all(isinstance(f, str) for f in attribute["flags"])
    kinds = {a["attribute"]: a["kind"] for a in payload["attributes"]}
    assert kinds == {"visit_id": "categorical", "channel": "categorical",
                     "weekday": "categorical", "amount": "numeric",
                     "returning": "categorical", "region": "categorical"}
    flags = {a["attribute"]: a["flags"] for a in payload["attributes"]}
    assert "id_like" in flags["visit_id"] and "constant" in flags["region"]


@pytest.mark.slow
def test_parquet_source_gives_the_same_numbers(visits_db: Path) -> None:
    from_db = rank_json(*db_args(visits_db))
    parquet = visits_db.with_suffix(".parquet")
    from_file = rank_json(str(parquet), "--target", "converted")
    assert from_file["table"] == str(parquet)
    assert_same_attributes(from_file["attributes"], from_db["attributes"])


@pytest.mark.slow
@pytest.mark.parametrize("metric", ["information_gain", "gain_ratio", "symmetric_uncertainty"])
def test_sort_orders(visits_db: Path, metric: str) -> None:
    payload = rank_json(*db_args(visits_db), "--sort", metric)
    keys = [(-a[metric], a["attribute"]) for a in payload["attributes"]]
    assert keys == sorted(keys)
    assert len(keys) == len(ATTRIBUTES)


@pytest.mark.slow
def test_default_sort_is_information_gain(visits_db: Path) -> None:
    default = rank_json(*db_args(visits_db))
    explicit = rank_json(*db_args(visits_db), "--sort", "information_gain")
    assert_same_attributes(default["attributes"], explicit["attributes"])
    by_ratio = rank_json(*db_args(visits_db), "--sort", "gain_ratio")
    # The id column leads by IG but not by gain ratio: the two orders really differ.
    assert default["attributes"][0]["attribute"] == "visit_id"
    assert by_ratio["attributes"][0]["attribute"] != "visit_id"


@pytest.mark.slow
def test_limit_keeps_the_top(visits_db: Path) -> None:
    full = rank_json(*db_args(visits_db))
    top = rank_json(*db_args(visits_db), "--limit", "2")
    assert_same_attributes(top["attributes"], full["attributes"][:2])
    assert list(top) == TOP_KEYS
    for key in ("target", "table", "rows", "rows_excluded", "classes"):
        assert top[key] == full[key]


@pytest.mark.slow
def test_attributes_and_exclude(visits_db: Path) -> None:
    picked = rank_json(*db_args(visits_db), "--attributes", "channel,weekday")
    assert {a["attribute"] for a in picked["attributes"]} == {"channel", "weekday"}
    repeated = rank_json(*db_args(visits_db), "-a", "channel", "-a", "amount")
    assert {a["attribute"] for a in repeated["attributes"]} == {"channel", "amount"}
    rest = rank_json(*db_args(visits_db), "--exclude", "visit_id,region")
    assert {a["attribute"] for a in rest["attributes"]} == ATTRIBUTES - {"visit_id", "region"}
    # Excluding from an explicit list.
    both = rank_json(*db_args(visits_db), "-a", "channel,weekday,amount", "-x", "amount")
    assert {a["attribute"] for a in both["attributes"]} == {"channel", "weekday"}


@pytest.mark.slow
def test_categorical_and_numeric_overrides(visits_db: Path) -> None:
    payload = rank_json(*db_args(visits_db), "--categorical", "amount", "--numeric", "weekday",
                        "--bins", "3")
    by_name = {a["attribute"]: a for a in payload["attributes"]}
    assert by_name["amount"]["kind"] == "categorical"
    assert by_name["amount"]["distinct"] == 101  # every value of (i*37) % 101, as a category
    assert by_name["weekday"]["kind"] == "numeric"
    # 3 quantile bins of 0..3 plus the NULL category: at most 4 labels.
    assert by_name["weekday"]["distinct"] <= 4
    default = {a["attribute"]: a for a in rank_json(*db_args(visits_db))["attributes"]}
    assert default["amount"]["kind"] == "numeric" and default["amount"]["distinct"] <= 10
    assert default["weekday"]["kind"] == "categorical" and default["weekday"]["distinct"] == 5


@pytest.mark.slow
def test_missing_drop(visits_db: Path) -> None:
    category = {a["attribute"]: a for a in rank_json(*db_args(visits_db))["attributes"]}
    dropped = {a["attribute"]: a for a in
               rank_json(*db_args(visits_db), "--missing", "drop")["attributes"]}
    # weekday: 4 values plus NULL as a category; 4 values when NULLs are dropped.
    assert (category["weekday"]["distinct"], dropped["weekday"]["distinct"]) == (5, 4)
    assert category["weekday"]["information_gain"] != dropped["weekday"]["information_gain"]
    assert_same_attributes([category["channel"]], [dropped["channel"]])


def test_table_format_is_aligned(visits_db: Path) -> None:
    result = invoke("rank", *db_args(visits_db))
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    assert "converted" in lines[0] and "545 rows" in lines[0] and "55 excluded" in lines[0]
    header_at = next(i for i, line in enumerate(lines) if line.startswith("attribute"))
    rule = lines[header_at + 1]
    assert set(rule) <= {"-", " "}
    spans, start = [], None
    for i, ch in enumerate(rule + " "):
        if ch == "-" and start is None:
            start = i
        elif ch == " " and start is not None:
            spans.append((start, i))
            start = None
    assert len(spans) == len(TABLE_KEYS)
    rows = lines[header_at + 2: header_at + 2 + len(ATTRIBUTES)]
    assert sorted(r.split()[0] for r in rows) == sorted(ATTRIBUTES)
    for row in [lines[header_at], *rows]:
        # Cells stay inside their column and the two-space gutters stay blank.
        for (_, end), (next_start, _) in zip(spans, spans[1:], strict=False):
            assert row[end:next_start].strip() == "", row
    assert "flags:" in lines and any(line.strip().startswith("id_like:") for line in lines)


@pytest.mark.slow
def test_csv_format(visits_db: Path) -> None:
    payload = rank_json(*db_args(visits_db))
    result = invoke("rank", *db_args(visits_db), "--format", "csv")
    assert result.exit_code == 0
    records = list(csv.DictReader(io.StringIO(result.stdout)))
    assert tuple(records[0]) == ATTRIBUTE_KEYS
    assert [r["attribute"] for r in records] == [a["attribute"] for a in payload["attributes"]]
    for record, attribute in zip(records, payload["attributes"], strict=True):
        # Two runs: equal to rounding (see assert_same_attributes).
        assert math.isclose(float(record["information_gain"]), attribute["information_gain"],
                            rel_tol=1e-12, abs_tol=1e-12)
        assert int(record["distinct"]) == attribute["distinct"]
        assert record["flags"] == ";".join(attribute["flags"])


def test_markdown_format(visits_db: Path) -> None:
    result = invoke("rank", *db_args(visits_db), "--format", "markdown")
    assert result.exit_code == 0
    table = [line for line in result.stdout.splitlines() if line.startswith("|")]
    assert len(table) == 2 + len(ATTRIBUTES)
    # Cell separators only: an escaped pipe (the header's H(Y\|X)) is not one.
    widths = {line.replace("\\|", "").count("|") for line in table}
    assert widths == {len(TABLE_KEYS) + 1}
    assert "H(Y\\|X)" in table[0]
    assert set(table[1]) <= {"|", "-", ":"}
    assert {line.split("|")[1].strip() for line in table[2:]} == ATTRIBUTES


def _parse_one(sql: str, dialect: str) -> exp.Expression:
    trees = [t for t in sqlglot.parse(sql, read=dialect) if t is not None]
    assert len(trees) == 1
    assert isinstance(trees[0], exp.Select)
    return trees[0]


@pytest.mark.slow
def test_sql_command_parses_and_matches_rank(visits_db: Path) -> None:
    result = invoke("sql", *db_args(visits_db), "--missing", "drop")
    assert result.exit_code == 0, result.output
    text = result.stdout
    assert text.startswith("-- bitsift ") and text.rstrip().endswith(";")
    tree = _parse_one(text, "duckdb")
    assert not any(isinstance(n, exp.DDL | exp.DML | exp.Command) for n in tree.walk())
    # The pasted statement, run as is, gives what `rank` reports (it computes its own bins).
    with duckdb.connect(str(visits_db), read_only=True) as con:
        cursor = con.execute(text)
        names = [d[0] for d in cursor.description]
        rows = [dict(zip(names, r, strict=True)) for r in cursor.fetchall()]
    pasted = {r["attribute"]: r for r in rows if r["attribute_index"] != 0}
    ranked = {a["attribute"]: a for a in
              rank_json(*db_args(visits_db), "--missing", "drop")["attributes"]}
    assert set(pasted) == set(ranked)
    for name, attribute in ranked.items():
        for metric in ("information_gain", "gain_ratio", "symmetric_uncertainty",
                       "attribute_entropy", "g_statistic"):
            assert math.isclose(pasted[name][metric], attribute[metric],
                                rel_tol=1e-12, abs_tol=1e-12), (name, metric)
        assert pasted[name]["distinct_values"] == attribute["distinct"]


@pytest.mark.slow
@pytest.mark.parametrize("dialect", ["duckdb", "postgres", "sqlite", "mysql"])
def test_sql_command_without_source(dialect: str) -> None:
    result = invoke("sql", "--table", "sales.orders", "--target", "late",
                    "--attributes", "region,channel", "--numeric", "amount",
                    "--dialect", dialect)
    assert result.exit_code == 0, result.output
    tree = _parse_one(result.stdout, dialect)
    tables = {t.name for t in tree.find_all(exp.Table)}
    assert "orders" in tables
    columns = {c.name for c in tree.find_all(exp.Column)}
    assert {"late", "region", "channel", "amount"} <= columns
    assert f"dialect {dialect}" in result.stdout.splitlines()[0]


def test_check_command_agrees(visits_db: Path) -> None:
    result = invoke("check", *db_args(visits_db))
    assert result.exit_code == 0, result.output
    assert "whole table" in result.stdout
    assert "database and reference agree" in result.stdout
    reported = [line for line in result.stdout.splitlines() if "max |difference|" in line]
    assert len(reported) == len(METRICS_CHECKED) == 12
    assert all(float(line.rsplit("=", 1)[1]) <= 1e-9 for line in reported)


def test_check_command_on_a_sample(visits_db: Path) -> None:
    result = invoke("check", *db_args(visits_db), "--sample-rows", "100")
    assert result.exit_code == 0, result.output
    assert "sample of 100 rows" in result.stdout


def test_usage_errors_exit_2(visits_db: Path) -> None:
    missing_target = invoke("rank", str(visits_db), "--table", "visits")
    assert missing_target.exit_code == 2
    bad_choice = invoke("rank", *db_args(visits_db), "--format", "xml")
    assert bad_choice.exit_code == 2


def test_debug_prints_the_statements(visits_db: Path) -> None:
    result = invoke("--debug", "rank", *db_args(visits_db), "--format", "json")
    assert result.exit_code == 0
    # DuckDB counts each attribute by a bare GROUP BY (run/value_counts.py).
    assert "-- sent to duckdb" in result.stderr and 'AS y, COUNT(*) AS n FROM "main"."visits"' \
        in result.stderr
    json.loads(result.stdout)


def run_script(*args: str) -> subprocess.CompletedProcess[str]:
    assert SCRIPT.exists(), f"console script not installed at {SCRIPT}"
    return subprocess.run([str(SCRIPT), *args], capture_output=True, text=True, timeout=120,
                          check=False)


@pytest.mark.slow
def test_installed_script_ranks_a_parquet_file(visits_db: Path) -> None:
    done = run_script("rank", str(visits_db.with_suffix(".parquet")), "--target", "converted",
                      "--format", "json", "--limit", "3")
    assert done.returncode == 0, done.stderr
    payload = json.loads(done.stdout)
    assert list(payload) == TOP_KEYS and len(payload["attributes"]) == 3
    assert done.stderr == ""


@pytest.mark.slow
def test_installed_script_error_is_one_line(visits_db: Path) -> None:
    done = run_script("rank", str(visits_db), "--table", "visits", "--target", "convrted",
                      "-a", "chanel")
    assert done.returncode == 1
    assert done.stdout == ""
    lines = done.stderr.splitlines()
    assert len(lines) == 1, done.stderr
    assert lines[0].startswith("Error: ")
    assert "'convrted' (did you mean 'converted'?)" in lines[0]
    assert "'chanel' (did you mean 'channel'?)" in lines[0]
    assert "Traceback" not in done.stderr


@pytest.mark.slow
def test_installed_script_debug_shows_traceback(visits_db: Path) -> None:
    done = run_script("--debug", "rank", str(visits_db), "--table", "visits",
                      "--target", "convrted")
    assert done.returncode == 1
    assert "Traceback (most recent call last)" in done.stderr
    assert "ColumnError" in done.stderr


@pytest.mark.slow
def test_demo_ranking_shows_every_flag(demo_db: Path) -> None:
    # What `make demo` runs, on the session's 20,000-row demo table.
    result = invoke("rank", demo_db, "--table", "trays", "--target", "outcome")
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    header_at = next(i for i, line in enumerate(lines) if line.startswith("attribute"))
    rows = {line.split()[0]: line for line in lines[header_at + 2:] if line.strip()
            and not line.startswith(("flags:", " "))}
    assert "tray_id" in rows and "id_like" in rows["tray_id"]
    assert "near_perfect" in rows["qa_grade"]
    assert "constant" in rows["site"]
    payload = rank_json(demo_db, "--table", "trays", "--target", "outcome")
    flags = {a["attribute"]: a["flags"] for a in payload["attributes"]}
    seen = {f for names in flags.values() for f in names}
    assert seen == {"id_like", "constant", "near_perfect", "high_cardinality"}
    assert "id_like" in flags["tray_id"]
    assert "near_perfect" in flags["qa_grade"]
    assert flags["site"] == ["constant"]
    # The leak is found without the id column's help: by gain ratio it leads.
    by_ratio = rank_json(demo_db, "--table", "trays", "--target", "outcome",
                         "--sort", "gain_ratio")
    assert by_ratio["attributes"][0]["attribute"] == "qa_grade"
    for flag in seen:
        assert any(line.strip().startswith(f"{flag}:") for line in lines)
