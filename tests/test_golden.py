"""Paste-ready SQL for every dialect: golden files, re-parsed by sqlglot, free of the constructs
design.md lists as invalid, and executed on DuckDB, SQLite, PostgreSQL and MariaDB where it must
return what ``bitsift.rank`` returns.

Regenerate the golden files after an intended change with
``BITSIFT_REGENERATE_GOLDEN=1 .venv/bin/pytest tests/test_golden.py`` and review the diff.
"""

from __future__ import annotations

import os

import pytest
import sqlglot
from click.testing import CliRunner
from helpers import (
    ENGINES,
    GOLDEN_TABLE,
    GOLDEN_VARIANTS,
    PASTE_DIALECTS,
    golden_path,
    invalid_constructs,
    loaded,
    paste_sql,
    random_dataset,
    run_sql,
)
from sqlglot import exp

import bitsift
from bitsift.cli import cli
from bitsift.sql.dialects import capabilities

REGENERATE = os.environ.get("BITSIFT_REGENERATE_GOLDEN") == "1"
CASES = [(d, v) for d in PASTE_DIALECTS for v in GOLDEN_VARIANTS]


@pytest.mark.parametrize(("dialect", "variant"), CASES)
def test_statement_matches_golden_file(dialect: str, variant: str) -> None:
    text = paste_sql(dialect, variant)
    path = golden_path(dialect, variant)
    if REGENERATE:
        path.parent.mkdir(exist_ok=True)
        path.write_text(text, encoding="utf-8")
    assert path.exists(), f"{path.name} missing: run with BITSIFT_REGENERATE_GOLDEN=1"
    assert text == path.read_text(encoding="utf-8"), (
        f"{path.name} differs: review, then regenerate with BITSIFT_REGENERATE_GOLDEN=1"
    )


@pytest.mark.slow
@pytest.mark.parametrize(("dialect", "variant"), CASES)
def test_golden_file_parses_back_as_one_select(dialect: str, variant: str) -> None:
    text = golden_path(dialect, variant).read_text(encoding="utf-8")
    trees = sqlglot.parse(text, read=capabilities(dialect).sqlglot_dialect,
                          error_level=sqlglot.ErrorLevel.RAISE)
    assert len(trees) == 1 and isinstance(trees[0], exp.Select)
    assert trees[0].args.get("with_") or trees[0].args.get("with")
    # The header tells how to get the p-value, which the statement does not compute.
    assert "scipy.stats.chi2.sf(g_statistic, dof)" in text
    uses_sets = any(isinstance(n, exp.GroupingSets) for n in trees[0].walk())
    # Every variant bins a numeric attribute in the statement: the pasted count strategy.
    assert uses_sets == (capabilities(dialect).for_paste.count_strategy == "grouping_sets")


@pytest.mark.slow
@pytest.mark.parametrize(("dialect", "variant"), CASES)
def test_golden_file_has_no_known_invalid_construct(dialect: str, variant: str) -> None:
    text = golden_path(dialect, variant).read_text(encoding="utf-8")
    assert invalid_constructs(text, dialect) == []


def test_invalid_construct_check_catches_the_pitfalls() -> None:
    # The checker itself must be able to fail: sqlglot's own transpilations of these pitfalls.
    assert invalid_constructs("SELECT GROUPING_ID(a, b) FROM t GROUP BY a, b", "postgres")
    assert invalid_constructs("SELECT LOG(x) FROM t", "duckdb")
    assert invalid_constructs("SELECT PERCENTILE_APPROX(x, 0.5) FROM t", "spark")
    assert invalid_constructs("SELECT 1 AS i FROM t GROUP BY GROUPING SETS ((a))", "sqlite")
    assert invalid_constructs("SELECT 1 AS i", "oracle")
    assert invalid_constructs("SELECT CAST(x AS VARBINARY) FROM t", "mysql")
    assert invalid_constructs("SELECT COUNT(*) FROM t", "tsql")


@pytest.mark.slow
@pytest.mark.parametrize("dialect", PASTE_DIALECTS)
def test_sql_command_output_parses_back(dialect: str) -> None:
    result = CliRunner().invoke(cli, [
        "sql", "--dialect", dialect, "--table", 'sales."order lines"', "--target", "late",
        "--attributes", "region,select", "--numeric", "amount",
    ])
    assert result.exit_code == 0, result.output
    trees = sqlglot.parse(result.output, read=capabilities(dialect).sqlglot_dialect)
    assert len(trees) == 1 and isinstance(trees[0], exp.Select)
    tables = {t.name for t in trees[0].find_all(exp.Table)}
    assert "order lines" in tables
    assert invalid_constructs(result.output, dialect) == []


#: Which golden files each engine here executes (MariaDB runs the mysql statement too).
EXECUTED = {"duckdb": ["duckdb"], "sqlite": ["sqlite"], "postgres": ["postgres"],
            "mariadb": ["mariadb", "mysql"]}
COMPARED = ("information_gain", "gain_ratio", "symmetric_uncertainty", "conditional_entropy",
            "attribute_entropy", "target_entropy", "g_statistic", "information_gain_se",
            "information_gain_corrected", "information_gain_low", "information_gain_high")


@pytest.mark.slow
@pytest.mark.parametrize("engine", ENGINES)
def test_golden_sql_executes_and_equals_rank(engine: str, request: pytest.FixtureRequest) -> None:
    dataset = random_dataset(seed=11, rows=900)
    with loaded(engine, dataset, request, table=GOLDEN_TABLE) as where:
        for variant, options in GOLDEN_VARIANTS.items():
            # `bitsift sql` adds --numeric columns to --attributes; `rank` only re-kinds them.
            attributes = f"{options['attributes']},{options['numeric']}"
            ranking = bitsift.rank(where.source, table=where.table, target="y",
                                   **{**options, "attributes": attributes})
            for dialect in EXECUTED[engine]:
                context = f"{dialect}.{variant} on {engine}"
                rows = run_sql(where, golden_path(dialect, variant).read_text(encoding="utf-8"))
                by_name = {r["attribute"]: r for r in rows if r["attribute_index"] != 0}
                assert sorted(by_name) == sorted(a.attribute for a in ranking.attributes)
                target = next(r for r in rows if r["attribute_index"] == 0)
                assert int(target["rows_used"]) == ranking.rows, context
                assert int(target["rows_excluded"]) == ranking.rows_excluded, context
                for scored in ranking.attributes:
                    row = by_name[scored.attribute]
                    assert int(row["distinct_values"]) == scored.distinct, context
                    assert int(row["dof"]) == scored.dof, context
                    # The rank ranges: the statement's self-join, run mode's rank_ranges().
                    assert (int(row["rank_low"]), int(row["rank_high"])) == (
                        scored.rank_low, scored.rank_high), f"{context}: {scored.attribute}"
                    for metric in COMPARED:
                        got, want = float(row[metric]), getattr(scored, metric)
                        assert abs(got - want) <= 1e-9 * max(1.0, abs(want)), (
                            f"{context}: {scored.attribute} {metric} {got} != {want}"
                        )
