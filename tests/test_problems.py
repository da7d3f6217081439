"""Structured errors: one list of problems, each about an option, rendered for three readers.

The library names options by parameter (``bins``), the CLI by flag (``--bins``), the job loader
by TOML key at the line that sets it. The tiny table is invented for these tests.
"""

from __future__ import annotations

from pathlib import Path

import duckdb
import pytest

import bitsift
from bitsift.cli import main
from bitsift.errors import ColumnError, Option, Problem, SpecError, flag_name
from bitsift.jobs.history import Destination
from bitsift.jobs.job_run import preflight
from bitsift.jobs.jobfile import JobError, load_job


@pytest.fixture
def tiny_db(tmp_path: Path) -> Path:
    path = tmp_path / "tiny.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 3 AS a, 'w' || (i % 2) AS label,"
                    " i % 2 = 0 AS y FROM range(20) r(i)")
    return path


def test_library_errors_list_problems_with_parameter_names(tiny_db: Path) -> None:
    with pytest.raises(SpecError) as caught:
        bitsift.rank(str(tiny_db), table="t", target="y", bins=1, limit=0,
                     categorical="a", numeric="a")
    error = caught.value
    assert [p.key for p in error.problems] == ["bins", "limit", "categorical"]
    assert str(error) == ("bins must be between 2 and 1000, not 1; limit must be at least 1, "
                          "not 0; columns named both categorical and numeric: a")
    assert "--" not in str(error)


def test_problems_found_against_the_table_name_their_parameter(tiny_db: Path) -> None:
    with pytest.raises(SpecError) as caught:
        bitsift.rank(str(tiny_db), table="t", target="y", weight="label", by="label")
    assert [p.key for p in caught.value.problems] == ["weight", "weight"]
    assert str(caught.value) == ("'label' cannot be both a segment (by) and the weight; "
                                 "weight needs a number column; 'label' is VARCHAR")


def test_problem_renders_each_option_for_its_reader() -> None:
    problem = Problem("binning_for", (Option("binning_for"), " x: names ", Option("numeric")))
    assert problem.message == "binning_for x: names numeric"
    assert problem.render(flag_name) == "--binning-for x: names --numeric"
    assert Problem.option("k", " must be at least 1", flag="--select").render(flag_name) == (
        "--select must be at least 1")
    # A message given as text is one problem about no option, unchanged for every reader.
    plain = ColumnError("unknown column 'z'")
    assert [(p.key, p.message) for p in plain.problems] == [(None, "unknown column 'z'")]
    assert plain.render(flag_name) == str(plain) == "unknown column 'z'"


def _error_lines(capsys: pytest.CaptureFixture[str], *args: str) -> list[str]:
    with pytest.raises(SystemExit) as stopped:
        main(list(args))
    assert stopped.value.code == 1
    captured = capsys.readouterr()
    assert captured.out == ""
    return captured.err.splitlines()


def test_cli_renders_the_problems_with_flag_names_on_one_line(
        tiny_db: Path, capsys: pytest.CaptureFixture[str]) -> None:
    lines = _error_lines(capsys, "rank", str(tiny_db), "--table", "t", "--target", "y",
                         "--bins", "1", "--categorical", "a", "--numeric", "a")
    assert lines == ["Error: --bins must be between 2 and 1000, not 1; "
                     "columns named both --categorical and --numeric: a"]
    lines = _error_lines(capsys, "rank", str(tiny_db), "--table", "t", "--target", "y",
                         "--weight", "label", "--by", "label")
    assert lines == ["Error: 'label' cannot be both a segment (--by) and the weight; "
                     "--weight needs a number column; 'label' is VARCHAR"]


JOB = """\
job = "nightly"
source = "tiny.duckdb"

[results]
destination = "history.duckdb"

[defaults]
table = "t"
target = "y"
bins = 1

[[ranking]]
name = "first"
categorical = ["a"]
numeric = ["a"]
limit = 0
"""


def test_job_loader_renders_problems_with_keys_at_their_lines(tiny_db: Path) -> None:
    path = tiny_db.parent / "job.toml"
    path.write_text(JOB, encoding="utf-8")
    with pytest.raises(JobError) as caught:
        load_job(path)
    found = [(p.line, p.message) for p in caught.value.problems]
    assert found == [
        (10, "ranking 1: bins must be between 2 and 1000, not 1"),  # set in [defaults]
        # Both options spelled as keys, at the first one's line (not "categorical and
        # --numeric", as when the loader pulled the option back out of the message).
        (14, "ranking 1: columns named both categorical and numeric: a"),
        (16, "ranking 1: limit must be at least 1, not 0"),
    ]
    assert f"{path}:14: ranking 1: columns named both categorical and numeric: a" in (
        str(caught.value))
    assert [p.key for p in caught.value.problems] == ["bins", "categorical", "limit"]


def test_job_preflight_places_table_problems_at_their_key(tiny_db: Path) -> None:
    path = tiny_db.parent / "job.toml"
    path.write_text(JOB.replace("bins = 1\n", "").replace(
        'categorical = ["a"]\nnumeric = ["a"]\nlimit = 0\n', 'weight = "label"\nby = "label"\n'),
        encoding="utf-8")
    with pytest.raises(JobError) as caught:
        preflight(load_job(path), destination=False)
    assert [(p.line, p.message) for p in caught.value.problems] == [
        (13, "ranking 'first': 'label' cannot be both a segment (by) and the weight"),
        (13, "ranking 'first': weight needs a number column; 'label' is VARCHAR"),
    ]


def test_destination_problems_spell_the_table_option_as_the_results_table(tmp_path: Path) -> None:
    # The table name's problem comes from the library (about "table"); here it is the
    # results table's, spelled so whatever the reader.
    destination = Destination(str(tmp_path / "history.duckdb"), "a.b.c.d")
    assert destination.problems() == ["results table must be [schema.]table, not 'a.b.c.d'"]


def test_results_problems_are_placed_at_their_key_not_by_words_in_the_message(
        tiny_db: Path) -> None:
    # The database is named "timetables": its URL holds the word "table", which once sent
    # the destination's problem to the table key's line.
    path = tiny_db.parent / "job.toml"
    path.write_text(JOB.replace(
        'destination = "history.duckdb"\n',
        'destination = "postgresql+psycopg://u:p@ss@127.0.0.1/timetables"\ntable = "a.b.c"\n'),
        encoding="utf-8")
    with pytest.raises(JobError) as caught:
        load_job(path)
    found = [(p.line, p.message) for p in caught.value.problems if p.line in (5, 6)]
    assert [line for line, _ in found] == [5, 6], found
    assert "contains '@'" in found[0][1]
    assert found[1][1] == "results table must be [schema.]table, not 'a.b.c'"
