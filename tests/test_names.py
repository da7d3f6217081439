"""Column names that are hard to tell apart or unsafe to print (issue 16, "Trust").

Item 1: case twins (``Y`` and ``y``), NFC/NFD twins and non-ASCII case resolve by one rule (exact,
else a unique match apart from case and Unicode form), and a data file whose reader renames a
twin is refused. Item 13: names holding control characters are escaped in text outputs and
errors. Item 14: ``--where`` oddities, SQLite URLs and ``=`` in names. All data is invented.
"""

from __future__ import annotations

import csv
import io
import json
import sqlite3
import unicodedata
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
import sqlalchemy as sa

import bitsift
from bitsift.cli import main
from bitsift.errors import ColumnError, SourceError

NFC_E = "\u00e9"  # é as one code point
NFD_E = unicodedata.normalize("NFD", NFC_E)  # e + combining acute accent

# Two twins that carry different information: "Y" follows "k" exactly, "y" does not at all.
TWIN_ROWS = {"Y": ["a", "a", "b", "b"], "y": ["p", "q", "p", "q"], "k": ["u", "u", "v", "v"]}


def run_main(capsys: pytest.CaptureFixture[str], *args: object) -> tuple[int, str, str]:
    """Exit code, stdout and stderr of the console entry point."""
    code: int | str | None = 0
    try:
        main([str(a) for a in args])
    except SystemExit as exited:
        code = exited.code
    out, err = capsys.readouterr()
    return (code if isinstance(code, int) else 1), out, err


def error_line(capsys: pytest.CaptureFixture[str], *args: object) -> str:
    """The one error line of a failing command (exit 1, nothing on stdout, no traceback)."""
    code, out, err = run_main(capsys, *args)
    assert code == 1, err
    assert out == ""
    assert err.count("\n") == 1 and err.startswith("Error: ") and "unexpected" not in err, err
    return err


def gains(ranking: bitsift.Ranking) -> dict[str, float]:
    return {a.attribute: round(a.information_gain, 6) for a in ranking.attributes}


# --- item 1: case twins in data files ------------------------------------------------------


@pytest.fixture
def twin_files(tmp_path: Path) -> dict[str, Path]:
    """The same twin columns as Parquet, CSV, NDJSON and a JSON array."""
    parquet = tmp_path / "twins.parquet"
    pq.write_table(pa.table(TWIN_ROWS), parquet)
    rows = [dict(zip(TWIN_ROWS, values, strict=True)) for values in zip(*TWIN_ROWS.values(),
                                                                           strict=True)]
    csv = tmp_path / "twins.csv"
    csv.write_text("Y,y,k\n" + "".join(f"{r['Y']},{r['y']},{r['k']}\n" for r in rows))
    ndjson = tmp_path / "twins.ndjson"
    ndjson.write_text("".join(json.dumps(r) + "\n" for r in rows))
    array = tmp_path / "twins.json"
    array.write_text(json.dumps(rows))
    return {"parquet": parquet, "csv": csv, "ndjson": ndjson, "json": array}


@pytest.mark.parametrize("kind", ["parquet", "csv", "ndjson", "json"])
@pytest.mark.parametrize("target", ["y", "Y", "k"])
def test_a_file_with_case_twins_is_refused(twin_files: dict[str, Path], kind: str,
                                           target: str) -> None:
    # DuckDB reads Y, y as Y, y_1: --target y used to rank against Y without a word.
    with pytest.raises(SourceError) as caught:
        bitsift.rank(twin_files[kind], target)
    message = str(caught.value)
    assert "'Y', 'y' differ only in case" in message
    assert "reads them as 'Y', 'y_1'" in message


def test_case_twins_error_is_one_line_in_the_cli(twin_files: dict[str, Path],
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    line = error_line(capsys, "rank", twin_files["parquet"], "--target", "y", "--by", "k")
    assert "differ only in case" in line


def test_a_real_column_named_like_a_renamed_twin_is_read(tmp_path: Path) -> None:
    # "y_1" that is in the file is not a renamed twin: no false refusal.
    path = tmp_path / "suffix.parquet"
    pq.write_table(pa.table({"Y": ["a", "a", "b", "b"], "y_1": ["a", "a", "b", "b"],
                             "k": ["u", "v", "u", "v"]}), path)
    assert gains(bitsift.rank(path, "Y")) == {"y_1": 1.0, "k": 0.0}


# --- item 1: Unicode twins and non-ASCII case ----------------------------------------------


@pytest.fixture
def unicode_file(tmp_path: Path) -> Path:
    """NFC and NFD twins, non-ASCII case twins, and a decomposed-only column."""
    path = tmp_path / "unicode.parquet"
    pq.write_table(pa.table({
        NFC_E: ["a", "a", "b", "b"],
        NFD_E: ["p", "q", "p", "q"],
        "\u00c9x": ["a", "b", "a", "b"],  # Éx
        "\u00e9x": ["a", "a", "b", "b"],  # éx
        "Stra\u00dfe": ["u", "u", "v", "v"],  # Straße
        "caf" + NFD_E: ["a", "a", "b", "b"],  # café, decomposed
        "target": ["a", "a", "b", "b"],
    }), path)
    return path


def test_exact_spelling_wins_among_unicode_twins(unicode_file: Path) -> None:
    every = [NFC_E, NFD_E, "\u00c9x", "\u00e9x"]
    for wanted in every:
        ranking = bitsift.rank(unicode_file, wanted, attributes=[n for n in every if n != wanted])
        assert ranking.target == wanted
        assert {a.attribute for a in ranking.attributes} == set(every) - {wanted}


def test_a_unique_match_apart_from_case_and_form_resolves(unicode_file: Path) -> None:
    # NFC typed for a decomposed name, and ß case-folded: both used to be "unknown column".
    ranking = bitsift.rank(unicode_file, "target", attributes=["CAF\u00c9", "STRASSE"])
    assert gains(ranking) == {"caf" + NFD_E: 1.0, "Stra\u00dfe": 1.0}


@pytest.mark.parametrize("typed", ["\u00c9", "\u00c9X"])
def test_an_ambiguous_loose_match_is_refused_naming_both(unicode_file: Path,
                                                         typed: str) -> None:
    with pytest.raises(ColumnError, match="spell it exactly"):
        bitsift.rank(unicode_file, "target", attributes=[typed])


# --- item 1: databases that keep case twins ---------------------------------------------------


def _twin_rows() -> list[tuple[str, str, str]]:
    return list(zip(*TWIN_ROWS.values(), strict=True))


def test_postgres_quoted_case_twins(postgres_engine: sa.Engine, pg_schema: str) -> None:
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(
            f'CREATE TABLE "{pg_schema}".t ("Y" text, "y" text, "k" text)')
        connection.exec_driver_sql(f'INSERT INTO "{pg_schema}".t VALUES (%s, %s, %s)',
                                   _twin_rows())
    table = f"{pg_schema}.t"
    url = postgres_engine.url.render_as_string(hide_password=False)
    assert gains(bitsift.rank(url, "Y", table=table)) == {"y": 0.0, "k": 1.0}
    assert gains(bitsift.rank(url, "y", table=table)) == {"Y": 0.0, "k": 0.0}
    segmented = bitsift.rank(url, "k", table=table, by="y", where="\"Y\" = 'a' OR y = 'q'")
    assert [s.segment for s in segmented.segments] == [{"y": "p"}, {"y": "q"}]


def test_sqlite_non_ascii_case_twins(tmp_path: Path) -> None:
    # SQLite folds ASCII case only: "É" and "é" are two columns there.
    path = tmp_path / "twins.sqlite"
    with sqlite3.connect(path) as connection:
        connection.execute('CREATE TABLE t ("\u00c9" TEXT, "\u00e9" TEXT, "k" TEXT)')
        connection.executemany("INSERT INTO t VALUES (?, ?, ?)", _twin_rows())
    url = f"sqlite:///{path}"
    assert gains(bitsift.rank(url, "\u00c9", table="t")) == {"\u00e9": 0.0, "k": 1.0}
    assert gains(bitsift.rank(url, "\u00e9", table="t")) == {"\u00c9": 0.0, "k": 0.0}
    with pytest.raises(ColumnError, match="spell it exactly"):
        bitsift.rank(url, "k", table="t", attributes=["E\u0301"])


# --- item 13: names holding control characters ------------------------------------------------

#: Retitles an xterm (OSC 0), rings the bell, starts a forged row, and reverses what follows.
EVIL = "evil\x1b]0;owned\x07\nforged | row\u202e"
EVIL_SHOWN = "evil\\x1b]0;owned\\x07\\x0aforged | row\\u202e"
#: Switches the terminal's colour to red (SGR 31).
RED = "seg\x1b[31m"


def unsafe(text: str) -> list[str]:
    """Characters in ``text`` that act on a terminal (line breaks between lines excepted)."""
    return sorted({ch for line in text.split("\n") for ch in line if not ch.isprintable()})


@pytest.fixture
def evil_file(tmp_path: Path) -> Path:
    path = tmp_path / "evil.parquet"
    pq.write_table(pa.table({EVIL: ["a", "a", "b", "b"], f"{EVIL}price": [1.0, 2.0, 3.0, 4.0],
                             RED: ["s", "s", "s", "t"], "t": ["x", "x", "y", "y"]}), path)
    return path


@pytest.mark.parametrize("fmt", ["table", "markdown"])
@pytest.mark.parametrize("by", [[], ["--by", RED]])
def test_text_formats_escape_control_characters(evil_file: Path, fmt: str, by: list[str],
                                                capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = run_main(capsys, "rank", evil_file, "--target", "t", "--format", fmt, *by)
    assert code == 0, err
    assert unsafe(out) == []
    shown = EVIL_SHOWN if fmt == "table" else EVIL_SHOWN.replace("|", "\\|")
    rows = [line for line in out.splitlines() if shown in line]
    # The ranking row, plus the cut-point line of the numeric one in the table format.
    per_ranking = 3 if fmt == "table" else 2
    assert len(rows) == per_ranking * (2 if by else 1)
    assert not any(line.startswith("forged") for line in out.splitlines())
    if by:
        assert "seg\\x1b[31m" in out


def test_json_and_csv_keep_names_exact(evil_file: Path,
                                       capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run_main(capsys, "rank", evil_file, "--target", "t", "--format", "json")
    assert code == 0
    names = {a["attribute"] for a in json.loads(out)["attributes"]}
    assert names == {EVIL, f"{EVIL}price", RED}
    code, out, _ = run_main(capsys, "rank", evil_file, "--target", "t", "--format", "csv")
    assert code == 0
    assert {r["attribute"] for r in csv.DictReader(io.StringIO(out))} == names


def test_html_report_shows_escapes(evil_file: Path, tmp_path: Path,
                                   capsys: pytest.CaptureFixture[str]) -> None:
    page = tmp_path / "report.html"
    code, _, err = run_main(capsys, "report", evil_file, "--target", "t", "--out", page, "-q")
    assert code == 0, err
    html = page.read_text(encoding="utf-8")
    assert unsafe(html) == []
    assert EVIL_SHOWN in html


@pytest.mark.parametrize("command", [
    ["profile", "--attribute", EVIL, "--by", RED],
    ["redundancy"],
    ["select", "--k", "2"],
])
def test_other_text_outputs_escape_control_characters(evil_file: Path, command: list[str],
                                                      capsys: pytest.CaptureFixture[str]
                                                      ) -> None:
    name, *options = command
    if name == "profile":
        options = options[:2]
    code, out, err = run_main(capsys, name, evil_file, "--target", "t", *options)
    assert code == 0, err
    assert unsafe(out) == [] and unsafe(err) == []
    assert EVIL_SHOWN in out


@pytest.mark.parametrize("options", [
    ["--target", "t\x1b[2J\nError: forged"],
    ["--target", "t", "--binning-for", "price\n\x1b[2J=nope"],
    ["--target", "t", "--date-part", "x\x1b[2J\n=year"],
    ["--target", "t", "--where", "\"x\x1b[2J\nforged\" = 1"],
])
def test_error_lines_escape_control_characters(evil_file: Path, options: list[str],
                                               capsys: pytest.CaptureFixture[str]) -> None:
    line = error_line(capsys, "rank", evil_file, *options)
    assert unsafe(line) == [], line
    assert "\\x1b[2J" in line
