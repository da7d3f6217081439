"""The drill-down (``bitsift profile``): value x class counts computed in the database.

Counts are checked against a plain Python count of the same generated rows (helpers'
``random_dataset``: NULLs, case and trailing-space variants, skewed classes) on DuckDB, SQLite,
PostgreSQL and MariaDB, with every count strategy, and the per-value contributions must add up
to the ranking's H(Y|X) to 1e-9.
"""

from __future__ import annotations

import dataclasses
import io
import json
import math
from collections import Counter
from typing import Any

import duckdb
import pytest
from click.testing import CliRunner
from helpers import (
    ENGINES,
    PASTE_DIALECTS,
    Dataset,
    fill_duckdb,
    invalid_constructs,
    loaded,
    random_dataset,
)

from bitsift.analysis.profile import profile, rank_and_profile
from bitsift.analysis.profile_model import MISSING_LABEL, AttributeProfile, ProfiledRun
from bitsift.analysis.profile_read import bin_label, class_label, fetch_profiles
from bitsift.cli import cli, main
from bitsift.cli.cli_report import progress_printer
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.sources import parse_table_name
from bitsift.errors import ColumnError, SpecError
from bitsift.run import reference
from bitsift.run.api import make_options, run_ranking
from bitsift.spec.rankspec import resolve
from bitsift.spec.schema import Column
from bitsift.sql.dialects import capabilities
from bitsift.sql.sqlstatements import profile_statement

ATTRIBUTES = "word,level,score,noise"


def expected_counts(dataset: Dataset, attribute: str, cuts: list[float] | None,
                    missing: str = "category") -> dict[str, Counter[str]]:
    """Label -> class label -> rows, counted in Python from the generated rows."""
    values = dataset.column(attribute)
    if cuts is not None:
        values = reference.bin_values(values, cuts)
    table: dict[str, Counter[str]] = {}
    for value, y in zip(values, dataset.column("y"), strict=True):
        if y is None or (value is None and missing == "drop"):
            continue
        if value is None:
            label = MISSING_LABEL
        elif cuts is not None:
            label = bin_label(value, cuts)[0]
        else:
            label = class_label(value)
        table.setdefault(label, Counter())[class_label(y)] += 1
    return table


def assert_profile_matches(found: AttributeProfile, want: dict[str, Counter[str]],
                           context: str) -> None:
    """Listed values have exactly their Python counts; the merged row holds all the rest."""
    listed = {v.label for v in found.values if v.kind != "other"}
    assert len(listed) == len([v for v in found.values if v.kind != "other"]), context
    for value in found.values:
        if value.kind == "other":
            rest = [label for label in want if label not in listed]
            assert value.merged_values == len(rest), context
            merged: Counter[str] = sum((want[label] for label in rest), Counter())
            assert dict(zip(found.classes, value.counts, strict=True)) == {
                c: merged[c] for c in found.classes
            }, context
        else:
            assert value.label in want, f"{context}: unexpected value {value.label!r}"
            assert value.counts == tuple(want[value.label][c] for c in found.classes), (
                f"{context}: {value.label!r}"
            )
    assert found.distinct == len(want), context
    assert found.rows == sum(sum(c.values()) for c in want.values()), context


def assert_agrees_with_ranking(run: ProfiledRun, context: str) -> None:
    for scored, found in run.profiled():
        where = f"{context} {scored.attribute}"
        assert found.distinct == scored.distinct, where
        assert found.rows == scored.rows, where
        assert abs(found.conditional_entropy - scored.conditional_entropy) <= 1e-9, where
        assert abs(found.information_gain - scored.information_gain) <= 1e-9, where
        assert math.isclose(math.fsum(v.share for v in found.values), 1.0, abs_tol=1e-12), where


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_counts_match_python_on_every_engine(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=71, rows=700)
    with loaded(engine, dataset, request) as where:
        run = profile(where.source, target="y", attributes=ATTRIBUTES, table=where.table,
                      numeric="score", max_values=4)
    assert set(run.profiles.attributes) == set(ATTRIBUTES.split(","))
    # Case and trailing-space variants of the target are classes of their own everywhere.
    assert set(run.profiles.classes) == {"yes", "no", "No", "no ", "maybe"}, engine
    assert_agrees_with_ranking(run, engine)
    for name, found in run.profiles.attributes.items():
        cuts = list(found.cuts) if found.cuts is not None else None
        assert_profile_matches(found, expected_counts(dataset, name, cuts), f"{engine} {name}")
    word = run.profiles.attributes["word"]
    assert [v.kind for v in word.values][-1] == "other"  # 12 values, 4 listed
    score = run.profiles.attributes["score"]
    assert [v.kind for v in score.values] == ["bin"] * (len(score.cuts or ()) + 1) + ["missing"]


@pytest.mark.slow
@pytest.mark.parametrize("strategy", ["grouping_sets", "union_all", "cross_join", "union_scans"])
@pytest.mark.parametrize("missing", ["category", "drop"])
def test_every_count_strategy_gives_the_same_counts(strategy: str, missing: str) -> None:
    dataset = random_dataset(seed=5, rows=400)
    connection = duckdb.connect()
    fill_duckdb(connection, ["t"], dataset)
    engine = DuckDBEngine.wrap(connection)
    engine.caps = dataclasses.replace(engine.caps, count_strategy=strategy)
    columns = engine.columns(parse_table_name("t", "duckdb"), "t")
    spec = resolve(make_options("y", attributes=ATTRIBUTES, numeric="score,level",
                                missing=missing, bins=4),
                   columns, parse_table_name("t", "duckdb"), "t", "duckdb")
    ranking = run_ranking(engine, spec)
    cuts = {s.attribute: list(s.cuts) for s in ranking.attributes if s.cuts is not None}
    profiles = fetch_profiles(engine, spec, cuts, max_values=3)
    connection.close()
    run = ProfiledRun(ranking=ranking, profiles=profiles, parameters={})
    assert_agrees_with_ranking(run, f"{strategy} {missing}")
    for name, found in profiles.attributes.items():
        want = expected_counts(dataset, name, cuts.get(name), missing)
        assert_profile_matches(found, want, f"{strategy} {missing} {name}")
        if missing == "drop":
            assert MISSING_LABEL not in {v.label for v in found.values}
            assert MISSING_LABEL not in want


def test_merged_rest_keeps_the_conditional_entropy_exact() -> None:
    # One value listed, eleven merged: the merged row's contribution comes from the database's
    # n*log(n) sums, and the total must still equal H(Y|X).
    dataset = random_dataset(seed=9, rows=500)
    connection = duckdb.connect()
    fill_duckdb(connection, ["t"], dataset)
    run = profile(connection, target="y", attributes="word", table="t", max_values=1)
    connection.close()
    word = run.profiles.attributes["word"]
    assert [v.kind for v in word.values] == ["value", "other"]
    assert word.values[1].merged_values == word.distinct - 1
    scored = run.ranking["word"]
    assert abs(word.conditional_entropy - scored.conditional_entropy) <= 1e-9
    # The merged row's entropy is the row-weighted mean of its values' own entropies.
    want = expected_counts(dataset, "word", None)
    total = sum(sum(c.values()) for c in want.values())
    rest = [c for label, c in want.items() if label != word.values[0].label]
    mean = math.fsum(
        sum(c.values()) / total * reference.entropy_bits(list(c.values())) for c in rest
    ) / word.values[1].share
    assert abs(word.values[1].entropy - mean) <= 1e-9


@pytest.mark.slow
def test_statement_is_valid_for_every_dialect() -> None:
    columns = [Column("y", "text"), Column("word", "text"), Column("level", "integer"),
               Column("score", "float")]
    for dialect in PASTE_DIALECTS:
        caps = capabilities(dialect)
        for missing in ("category", "drop"):
            spec = resolve(make_options("y", missing=missing, where="level > 1"), columns,
                           parse_table_name("s.t", caps.sqlglot_dialect), "s.t",
                           caps.sqlglot_dialect)
            statement = profile_statement(spec, caps, {"score": [0.5, 1.5]}, max_values=5)
            assert invalid_constructs(statement.sql, dialect) == [], (dialect, missing)
            assert "0.5" in statement.sql and "1.5" in statement.sql, dialect


def test_statement_quotes_hostile_names_and_needs_cut_points() -> None:
    columns = [Column('y"; DROP TABLE t; --', "text"), Column("it's", "float")]
    caps = capabilities("duckdb")
    spec = resolve(make_options('y"; DROP TABLE t; --'), columns,
                   parse_table_name("t", "duckdb"), "t", "duckdb")
    statement = profile_statement(spec, caps, {"it's": [1.0]})
    assert '"y""; DROP TABLE t; --"' in statement.sql
    assert '"it\'s"' in statement.sql
    with pytest.raises(SpecError, match="no cut points"):
        profile_statement(spec, caps, {})
    with pytest.raises(SpecError, match="^max_values must be at least 1"):
        profile_statement(spec, caps, {"it's": [1.0]}, max_values=0)


def _demo_connection() -> duckdb.DuckDBPyConnection:
    connection = duckdb.connect()
    connection.execute(
        "CREATE TABLE people AS SELECT i, CASE WHEN i % 3 = 0 THEN 'f' ELSE 'm' END AS sex, "
        "20 + (i * 7) % 50 + 0.5 AS age, CASE WHEN i % 5 < 2 THEN 'late' ELSE 'on time' END "
        "AS paid FROM range(300) r(i)"
    )
    return connection


@pytest.mark.slow
def test_sensitive_names_are_resolved_and_checked() -> None:
    connection = _demo_connection()
    run = rank_and_profile(connection, target="paid", table="people", sensitive="SEX",
                           exclude="i", top=1)
    assert run.sensitive == ("sex",)
    assert len(run.profiled()) == 1
    with pytest.raises(ColumnError, match=r"'gender'.*\(sensitive\)"):
        rank_and_profile(connection, target="paid", table="people", sensitive="gender,sex")
    with pytest.raises(SpecError, match="^top must be at least 1"):
        rank_and_profile(connection, target="paid", table="people", top=0)
    connection.close()


def _invoke(args: list[str]) -> Any:
    return CliRunner().invoke(cli, args, catch_exceptions=False)


@pytest.mark.slow
def test_profile_command_table_and_json(tmp_path: Any) -> None:
    path = tmp_path / "people.duckdb"
    connection = duckdb.connect(str(path))
    connection.execute("CREATE TABLE people AS SELECT i, CASE WHEN i % 3 = 0 THEN 'f' ELSE 'm' "
                       "END AS sex, (i * 7) % 50 + 0.5 AS age, CASE WHEN i % 5 < 2 THEN 'late' "
                       "ELSE 'on time' END AS paid FROM range(300) r(i)")
    connection.close()
    base = [str(path), "--table", "people", "--target", "paid"]
    result = _invoke(["profile", *base, "--attribute", "sex,age", "--sensitive", "sex",
                      "--bins", "4"])
    assert result.exit_code == 0, result.output
    text = result.output
    assert "sex (categorical, 2 values)  [SENSITIVE]" in text
    assert "age (numeric, 4 values)" in text and "cut points: " in text
    assert "Caution: Information gain measures association in this data, not cause." in text
    assert "unlawful or unfair" in text
    assert result.stderr == ""  # not a terminal: no progress lines

    result = _invoke(["profile", *base, "--attribute", "sex", "--sensitive", "sex",
                      "--format", "json"])
    data = json.loads(result.output)
    (sex,) = data["attributes"]
    assert sex["sensitive"] is True and "sensitive" in sex["flags"]
    assert data["sensitive"] == ["sex"]
    by_label = {v["label"]: v["counts"] for v in sex["values"]}
    assert by_label == {"m": {"on time": 120, "late": 80}, "f": {"on time": 60, "late": 40}}
    assert sex["conditional_entropy"] == pytest.approx(sex["score"]["conditional_entropy"],
                                                       abs=1e-12)
    assert any("not cause" in c for c in data["cautions"])

    result = CliRunner().invoke(cli, ["profile", *base, "--attribute", "sex",
                                      "--attributes", "age"])
    assert result.exit_code == 2 and "--attribute" in result.output


def test_profile_command_reports_bad_names(tmp_path: Any, capsys: pytest.CaptureFixture[str]
                                           ) -> None:
    path = tmp_path / "t.duckdb"
    connection = duckdb.connect(str(path))
    connection.execute("CREATE TABLE t AS SELECT i % 2 AS a, i % 3 = 0 AS y FROM range(10) r(i)")
    connection.close()
    with pytest.raises(SystemExit) as stopped:
        main(["profile", str(path), "-t", "t", "-y", "y", "--attribute", "b"])
    assert stopped.value.code == 1
    assert "unknown column: 'b'" in capsys.readouterr().err


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


@pytest.mark.slow
def test_progress_only_on_a_terminal_and_never_with_quiet() -> None:
    terminal = _Terminal()
    say = progress_printer(False, terminal)
    assert say is not None
    connection = _demo_connection()
    rank_and_profile(connection, target="paid", table="people", progress=say)
    connection.close()
    lines = terminal.getvalue().splitlines()
    assert len(lines) == 3
    assert all(line.startswith("bitsift [") for line in lines)
    assert "ranking 3 attribute(s)" in lines[1] and "values x classes" in lines[2]
    assert progress_printer(True, _Terminal()) is None
    assert progress_printer(False, io.StringIO()) is None
