"""What users see when something is wrong: one line on stderr, exit 1, no traceback.

The command's entry point (:func:`bitsift.cli.main`) runs in-process here; test_cli.py runs
the installed script for the same contract. The library raises the specific exceptions of
:mod:`bitsift.errors`, checked at the end.
"""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest

import bitsift
from bitsift.cli import main
from bitsift.errors import (
    BitsiftError,
    ColumnError,
    DataError,
    PredicateError,
    SourceError,
    SpecError,
    TableNotFoundError,
)


@pytest.fixture(scope="module")
def shop(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A DuckDB file with a normal table and the degenerate ones the errors are about."""
    path = tmp_path_factory.mktemp("errors") / "shop.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE orders AS SELECT i AS order_id, i % 3 AS region, "
                    "i % 5 AS channel, CASE WHEN i % 2 = 0 THEN 'late' ELSE 'on_time' END "
                    "AS delivery FROM range(40) r(i)")
        con.execute("CREATE TABLE empty_orders (region INTEGER, delivery VARCHAR)")
        con.execute("CREATE TABLE one_class AS SELECT i % 3 AS region, 'late' AS delivery "
                    "FROM range(20) r(i)")
        con.execute("CREATE TABLE null_target AS SELECT i % 3 AS region, "
                    "CAST(NULL AS VARCHAR) AS delivery FROM range(20) r(i)")
        con.execute("CREATE TABLE only_target AS SELECT 'late' AS delivery")
    return path


def run_main(capsys: pytest.CaptureFixture[str], *args: object) -> tuple[int, str, str]:
    """Exit code, stdout and stderr of the console entry point (it returns on success)."""
    code: int | str | None = 0
    try:
        main([str(a) for a in args])
    except SystemExit as exited:
        code = exited.code
    out, err = capsys.readouterr()
    return (code if isinstance(code, int) else 1), out, err


def error_line(capsys: pytest.CaptureFixture[str], *args: object) -> str:
    """Run the command, assert the error contract and return the one line."""
    code, out, err = run_main(capsys, *args)
    assert code == 1, err
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("Error: ") and "unexpected" not in lines[0], err
    assert "Traceback" not in err
    return lines[0]


def test_missing_table_with_suggestion(capsys: pytest.CaptureFixture[str], shop: Path) -> None:
    line = error_line(capsys, "rank", shop, "--table", "order", "--target", "delivery")
    assert "unknown table: 'order'" in line
    assert "did you mean 'orders'?" in line


def test_every_missing_column_is_listed(capsys: pytest.CaptureFixture[str], shop: Path) -> None:
    line = error_line(capsys, "rank", shop, "--table", "orders", "--target", "delivry",
                      "--attributes", "regoin,chanel", "--exclude", "order_idd",
                      "--categorical", "regions")
    for bad, good in [("delivry", "delivery"), ("regoin", "region"), ("chanel", "channel"),
                      ("order_idd", "order_id"), ("regions", "region")]:
        assert f"'{bad}' (did you mean '{good}'?)" in line, line
    assert line.startswith("Error: unknown columns: ")


def test_missing_column_without_close_match(capsys: pytest.CaptureFixture[str],
                                            shop: Path) -> None:
    line = error_line(capsys, "rank", shop, "--table", "orders", "--target", "delivery",
                      "-a", "zzzzzz")
    assert "'zzzzzz'" in line and "did you mean" not in line


def test_column_names_match_case_insensitively(capsys: pytest.CaptureFixture[str],
                                               shop: Path) -> None:
    code, out, err = run_main(capsys, "rank", shop, "--table", "orders", "--target",
                              "DELIVERY", "-a", "Region", "--format", "csv")
    assert code == 0, err
    assert out.splitlines()[1].startswith("region,")


@pytest.mark.slow
@pytest.mark.parametrize(
    ("table", "expected"),
    [
        ("empty_orders", "empty_orders has no rows to rank"),
        ("one_class", "target 'delivery' has a single class in one_class"),
        ("null_target", "every row of null_target has a NULL 'delivery' (20 rows)"),
        ("only_target", "no attributes left to rank in only_target"),
    ],
)
def test_degenerate_tables(capsys: pytest.CaptureFixture[str], shop: Path, table: str,
                           expected: str) -> None:
    line = error_line(capsys, "rank", shop, "--table", table, "--target", "delivery")
    assert expected in line


def test_where_matching_no_rows(capsys: pytest.CaptureFixture[str], shop: Path) -> None:
    line = error_line(capsys, "rank", shop, "--table", "orders", "--target", "delivery",
                      "--where", "region > 100")
    assert "no rows to rank matching --where" in line


@pytest.mark.slow
@pytest.mark.parametrize(
    ("where", "expected"),
    [
        ("1; drop table orders", "one expression"),
        ("region = 1; DELETE FROM orders", "one expression"),
        ("region IN (SELECT region FROM orders)", "subquery"),
        ("region > (SELECT 1)", "subquery"),
        ("sleep_ms(5) > 0", "function sleep_ms()"),
        ("region + 1", "must be a condition"),
        ("regoin = 1", "'regoin' (did you mean 'region'?)"),
        ("orders.region = 1", "bare column names"),
        ("region = ", "does not parse"),
    ],
)
def test_bad_where(capsys: pytest.CaptureFixture[str], shop: Path, where: str,
                   expected: str) -> None:
    line = error_line(capsys, "rank", shop, "--table", "orders", "--target", "delivery",
                      "--where", where)
    assert expected in line, line
    with duckdb.connect(str(shop), read_only=True) as con:
        assert con.execute("SELECT COUNT(*) FROM orders").fetchone() == (40,)


def test_nonexistent_files(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    for name in ("absent.parquet", "absent.csv", "absent.duckdb"):
        path = tmp_path / name
        extra = ["--table", "t"] if name.endswith(".duckdb") else []
        line = error_line(capsys, "rank", path, *extra, "--target", "y")
        assert f"no such file: {path}" in line
        assert not path.exists()  # a database file must not be created by reading it


def test_corrupt_files(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    parquet = tmp_path / "broken.parquet"
    parquet.write_bytes(b"this is not a parquet file" * 10)
    assert "cannot read" in error_line(capsys, "rank", parquet, "--target", "y")
    database = tmp_path / "broken.duckdb"
    database.write_bytes(b"\x00garbage" * 500)
    line = error_line(capsys, "rank", database, "--table", "t", "--target", "y")
    assert "cannot open" in line and "DuckDB database" in line
    binary = tmp_path / "binary.csv"
    binary.write_bytes(bytes(range(256)) * 20)
    assert "cannot read" in error_line(capsys, "rank", binary, "--target", "y")


def test_unreadable_source(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    # A directory where a file is expected cannot be read, even by root.
    folder = tmp_path / "folder.duckdb"
    folder.mkdir()
    line = error_line(capsys, "rank", folder, "--table", "t", "--target", "y")
    assert "cannot open" in line


def test_option_errors_are_one_line(capsys: pytest.CaptureFixture[str], shop: Path) -> None:
    line = error_line(capsys, "rank", shop, "--table", "orders", "--target", "delivery",
                      "--bins", "1", "--limit", "0")
    assert "--bins must be between 2 and 1000, not 1" in line
    assert "--limit must be at least 1, not 0" in line
    line = error_line(capsys, "rank", shop, "--target", "delivery")
    assert "--table is required" in line
    parquet = shop.with_suffix(".parquet")
    with duckdb.connect(str(shop), read_only=True) as con:
        con.execute(f"COPY orders TO '{parquet}' (FORMAT parquet)")
    line = error_line(capsys, "rank", parquet, "--table", "orders", "--target", "delivery")
    assert "--table is not used with a data file" in line
    line = error_line(capsys, "rank", shop, "--table", "orders", "--target", "delivery",
                      "--numeric", "delivery,region", "--categorical", "region")
    assert "both --categorical and --numeric: region" in line


def test_numeric_needs_numbers(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    path = tmp_path / "text.parquet"
    with duckdb.connect() as con:
        con.execute(f"COPY (SELECT 'x' || (i % 4) AS code, i % 2 AS y FROM range(10) r(i)) "
                    f"TO '{path}' (FORMAT parquet)")
    line = error_line(capsys, "rank", path, "--target", "y", "--numeric", "code")
    assert "--numeric needs number columns" in line and "'code'" in line


def test_usage_error_exits_2(capsys: pytest.CaptureFixture[str], shop: Path) -> None:
    code, out, err = run_main(capsys, "rank", shop, "--table", "orders")
    assert code == 2
    assert "Missing option '--target'" in err
    assert "Traceback" not in err


def test_debug_raises_with_traceback(capsys: pytest.CaptureFixture[str], shop: Path) -> None:
    with pytest.raises(TableNotFoundError):
        main(["--debug", "rank", str(shop), "--table", "nope", "--target", "delivery"])


@pytest.mark.slow
@pytest.mark.parametrize(
    ("kwargs", "error"),
    [
        ({"table": "nope"}, TableNotFoundError),
        ({"table": "orders", "attributes": "regoin"}, ColumnError),
        ({"table": "one_class"}, DataError),
        ({"table": "empty_orders"}, DataError),
        ({"table": "orders", "where": "1; drop table orders"}, PredicateError),
        ({"table": "orders", "missing": "ignore"}, SpecError),
        ({"table": None}, SpecError),
    ],
)
def test_library_raises_specific_errors(shop: Path, kwargs: dict[str, object],
                                        error: type[BitsiftError]) -> None:
    with pytest.raises(error):
        bitsift.rank(str(shop), target="delivery", **kwargs)


def test_library_rejects_unknown_sources(tmp_path: Path) -> None:
    with pytest.raises(SourceError, match="no such file"):
        bitsift.rank(str(tmp_path / "absent.parquet"), target="y")
    with pytest.raises(SourceError, match="cannot rank a int"):
        bitsift.rank(42, target="y")
    with pytest.raises(SpecError, match="unknown option"):
        bitsift.rank(str(tmp_path / "absent.parquet"), target="y", sortby="gain_ratio")
