"""Greedy mRMR selection (``bitsift select``) against an independent NumPy implementation.

The oracle follows Peng, Long & Ding, IEEE TPAMI 27(8):1226-1238 (2005): the first attribute is
the most relevant, each next one maximises I(f; c) − mean_{s in S} I(f; s) over the rest (MID),
or I(f; c) / mean_{s in S} I(f; s) (MIQ, with the mean floored at bitsift's documented 1e-12
bits). It is written here with NumPy arrays and gets every mutual information from
``sklearn.metrics.mutual_info_score`` (nats, converted to bits), never from bitsift.

Data: a random table with deliberate near-copies, and the wine data bundled with scikit-learn
(``sklearn.datasets.load_wine``: 178 wines, 13 measurements, 3 cultivars; Forina et al., UCI
repository), every measurement cut into the ranking's quantile bins. DuckDB and PostgreSQL.
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from html.parser import HTMLParser
from typing import Any

import duckdb
import numpy as np
import pytest
from click.testing import CliRunner
from helpers import Dataset, fill_duckdb, loaded
from sklearn.datasets import load_wine
from sklearn.metrics import mutual_info_score

from bitsift.analysis.profile import rank_and_profile, rank_and_profile_segments
from bitsift.analysis.redundancy import RedundancyMatrix, redundancy
from bitsift.analysis.selection import (
    MIQ_FLOOR,
    STEP_KEYS,
    Selection,
    greedy_mrmr,
    matrix_lookup,
    select_attributes,
    select_for_runs,
)
from bitsift.cli import cli
from bitsift.errors import SpecError
from bitsift.output.report import render_report
from bitsift.run import reference
from bitsift.run.result import Ranking

TOLERANCE = 1e-9


# --- the oracle --------------------------------------------------------------------------------

def labels(values: Sequence[Any]) -> list[int]:
    """Integer labels for scikit-learn; NULL is one more label (--missing category)."""
    seen: dict[Any, int] = {}
    return [seen.setdefault(("null",) if v is None else ("value", v), len(seen)) for v in values]


def oracle_information(dataset: Dataset, ranking: Ranking, target: str,
                       ) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Candidates (the ranking's order), relevance I(f; c) and the matrix I(fi; fj), in bits,
    from scikit-learn on the rows with a target, numeric columns cut at the ranking's cuts."""
    names = [s.attribute for s in ranking.attributes]
    y = dataset.column(target)
    keep = [i for i, v in enumerate(y) if v is not None]
    columns = []
    for name in names:
        values = dataset.column(name)
        cuts = ranking[name].cuts
        if cuts is not None:
            values = reference.bin_values(values, cuts)
        columns.append(labels([values[i] for i in keep]))
    classes = labels([y[i] for i in keep])
    bits = 1 / math.log(2)
    relevance = np.array([mutual_info_score(column, classes) * bits for column in columns])
    mi = np.zeros((len(names), len(names)))
    for i in range(len(names)):
        for j in range(i + 1, len(names)):
            mi[i, j] = mi[j, i] = mutual_info_score(columns[i], columns[j]) * bits
    return names, relevance, mi


def numpy_mrmr(relevance: np.ndarray, mi: np.ndarray, k: int, criterion: str,
               ) -> list[tuple[int, float, float]]:
    """Peng et al.'s incremental search: (index, relevance, mean redundancy) per step.
    np.argmax takes the first of equal scores, i.e. the earlier candidate."""
    chosen = [int(np.argmax(relevance))]
    steps = [(chosen[0], float(relevance[chosen[0]]), 0.0)]
    while len(chosen) < min(k, len(relevance)):
        rest = np.array([j for j in range(len(relevance)) if j not in chosen])
        mean = mi[np.ix_(rest, chosen)].mean(axis=1)
        if criterion == "mid":
            score = relevance[rest] - mean
        else:
            score = relevance[rest] / np.maximum(mean, 1e-12)
        best = int(rest[int(np.argmax(score))])
        steps.append((best, float(relevance[best]), float(mean[list(rest).index(best)])))
        chosen.append(best)
    return steps


def assert_selection_matches_oracle(selection: Selection, dataset: Dataset, target: str,
                                    context: str) -> None:
    names, relevance, mi = oracle_information(dataset, selection.ranking, target)
    expected = numpy_mrmr(relevance, mi, selection.k, selection.criterion)
    assert selection.attributes == [names[i] for i, _, _ in expected], context
    for step, (index, rel, red) in zip(selection.steps, expected, strict=True):
        where = f"{context} step {step.position} {step.attribute}"
        assert abs(step.relevance - rel) <= TOLERANCE, where
        assert abs(step.redundancy - red) <= TOLERANCE, where
        # Every pair the search read equals scikit-learn's too.
        for other in selection.attributes[: step.position - 1]:
            got = selection.matrix.mutual_information(step.attribute, other)
            assert abs(got - mi[index, names.index(other)]) <= TOLERANCE, where


# --- data --------------------------------------------------------------------------------------

def near_copies(seed: int, rows: int = 1500) -> Dataset:
    """Random rows where the most relevant attributes come in near-identical twins."""
    rng = np.random.default_rng(seed)
    y = rng.choice(3, size=rows, p=[0.5, 0.3, 0.2])

    def noisy(values: np.ndarray, share: float, levels: int) -> np.ndarray:
        flip = rng.random(rows) < share
        return np.where(flip, rng.integers(0, levels, rows), values)

    strong = noisy(y, 0.25, 3)
    strong_twin = noisy(strong, 0.04, 3)
    flag = noisy((y == 2).astype(int), 0.2, 2)
    number = y + rng.normal(0, 1.0, rows)
    number_twin = number + rng.normal(0, 0.05, rows)
    weak = noisy((y == 1).astype(int), 0.5, 2)
    noise = rng.integers(0, 4, rows)
    data = []
    for i in range(rows):
        data.append((
            None if rng.random() < 0.02 else f"class {y[i]}",
            int(strong[i]), int(strong_twin[i]), "yes" if flag[i] else "no",
            float(number[i]), float(number_twin[i]),
            None if rng.random() < 0.1 else f"w{weak[i]}", int(noise[i]),
        ))
    columns = (("y", "text"), ("strong", "integer"), ("strong_twin", "integer"),
               ("flag", "text"), ("number", "float"), ("number_twin", "float"),
               ("weak", "text"), ("noise", "integer"))
    return Dataset(columns=columns, rows=data)


def wine() -> Dataset:
    """scikit-learn's bundled wine data (no download): 13 float measurements and the cultivar."""
    bunch = load_wine()
    names = [str(n) for n in bunch.feature_names]
    rows = [(int(c), *(float(v) for v in row)) for row, c in zip(bunch.data, bunch.target,
                                                                  strict=True)]
    return Dataset(columns=(("cultivar", "integer"), *((n, "float") for n in names)), rows=rows)


# --- against the NumPy oracle ------------------------------------------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("criterion", ["mid", "miq"])
def test_random_data_selection_equals_numpy(criterion: str,
                                            request: pytest.FixtureRequest) -> None:
    dataset = near_copies(seed=21)
    with loaded("duckdb", dataset, request) as where:
        selection = select_attributes(where.source, target="y", table=where.table, k=5,
                                      criterion=criterion, bins=6, include_flagged=True)
    assert_selection_matches_oracle(selection, dataset, "y", f"random/{criterion}")
    by_relevance = [s.attribute for s in selection.ranking.attributes][:5]
    # The twins are redundant: mRMR departs from the plain relevance order.
    assert selection.attributes != by_relevance
    assert not {"strong", "strong_twin"} <= set(selection.attributes[:2])


@pytest.mark.slow
@pytest.mark.parametrize("engine", ["duckdb", "postgres"])
def test_wine_selection_equals_numpy_with_both_criteria(engine: str,
                                                        request: pytest.FixtureRequest) -> None:
    """Both engines against one oracle at 1e-9: DuckDB/PostgreSQL parity follows."""
    dataset = wine()
    with loaded(engine, dataset, request) as where:
        for criterion in ("mid", "miq"):
            selection = select_attributes(where.source, target="cultivar", table=where.table,
                                          k=8, criterion=criterion, include_flagged=True)
            assert len(selection.steps) == 8 and selection.ranking.rows == 178
            assert all(s.cuts for s in selection.ranking.attributes)  # all 13 were binned
            assert_selection_matches_oracle(selection, dataset, "cultivar",
                                            f"wine/{engine}/{criterion}")


def test_missing_drop_selection_equals_numpy_on_rows_where_both_are_present(
        request: pytest.FixtureRequest) -> None:
    dataset = near_copies(seed=22, rows=800)
    with loaded("duckdb", dataset, request) as where:
        selection = select_attributes(where.source, target="y", table=where.table, k=4,
                                      missing="drop", attributes="strong,flag,weak,noise",
                                          include_flagged=True)
    # The oracle, by hand for --missing drop: relevance on rows where f is present, each
    # redundancy on rows where both are present.
    y = dataset.column("y")
    bits = 1 / math.log(2)

    def mi(first: str, second: str | None) -> float:
        a = dataset.column(first)
        b = y if second is None else dataset.column(second)
        rows = [(u, v) for u, v, t in zip(a, b, y, strict=True)
                if t is not None and u is not None and v is not None]
        return mutual_info_score(labels([u for u, _ in rows]), labels([v for _, v in rows])) * bits

    names = [s.attribute for s in selection.ranking.attributes]
    relevance = np.array([mi(n, None) for n in names])
    matrix = np.array([[0.0 if a == b else mi(a, b) for b in names] for a in names])
    expected = numpy_mrmr(relevance, matrix, 4, "mid")
    assert selection.attributes == [names[i] for i, _, _ in expected]
    for step, (_, rel, red) in zip(selection.steps, expected, strict=True):
        assert abs(step.relevance - rel) <= TOLERANCE and abs(step.redundancy - red) <= TOLERANCE


# --- the greedy search itself ------------------------------------------------------------------

def _lookup(pairs: dict[tuple[str, str], float]) -> Any:
    matrix = {frozenset(k): v for k, v in pairs.items()}
    return lambda chosen, rest: {c: matrix[frozenset((chosen, c))] for c in rest}


def test_ties_go_to_relevance_then_to_the_earlier_candidate() -> None:
    relevance = {"a": 0.5, "b": 0.4, "c": 0.3, "d": 0.3}
    pairs = {("a", "b"): 0.1, ("a", "c"): 0.0, ("a", "d"): 0.0, ("b", "c"): 0.0,
             ("b", "d"): 0.0, ("c", "d"): 0.0}
    # After a: b scores 0.4 − 0.1 = 0.3, c and d 0.3 − 0 = 0.3: b wins on relevance.
    steps = greedy_mrmr(relevance, 4, _lookup(pairs), criterion="mid")
    assert [s.attribute for s in steps] == ["a", "b", "c", "d"]
    reordered = greedy_mrmr(relevance, 4, _lookup(pairs), criterion="mid",
                            order=["a", "b", "d", "c"])
    assert [s.attribute for s in reordered] == ["a", "b", "d", "c"]


def test_step_numbers_and_the_closest_earlier_choice() -> None:
    relevance = {"city": 0.5, "postcode": 0.48, "age": 0.2}
    pairs = {("city", "postcode"): 0.45, ("city", "age"): 0.01, ("postcode", "age"): 0.03}
    steps = greedy_mrmr(relevance, 3, _lookup(pairs), criterion="mid")
    assert [s.attribute for s in steps] == ["city", "age", "postcode"]
    third = steps[2]
    assert third.redundancy == pytest.approx((0.45 + 0.03) / 2)
    assert third.score == pytest.approx(0.48 - 0.24)
    assert (third.most_redundant_with, third.max_redundancy) == ("city", 0.45)
    assert (steps[0].redundancy, steps[0].most_redundant_with) == (0.0, None)
    assert [s.position for s in steps] == [1, 2, 3]


def test_miq_floors_a_zero_redundancy() -> None:
    relevance = {"a": 0.9, "b": 0.1, "c": 0.5}
    pairs = {("a", "b"): 0.0, ("a", "c"): 0.25, ("b", "c"): 0.0}
    steps = greedy_mrmr(relevance, 3, _lookup(pairs), criterion="miq")
    # b shares nothing with a: 0.1 / 1e-12 beats c's 0.5 / 0.25.
    assert [s.attribute for s in steps] == ["a", "b", "c"]
    assert steps[1].score == pytest.approx(0.1 / MIQ_FLOOR)
    assert steps[2].score == pytest.approx(0.5 / 0.125)


def test_the_lookup_is_asked_only_for_pairs_with_the_latest_choice() -> None:
    asked: list[tuple[str, tuple[str, ...]]] = []
    relevance = {n: 1.0 / (i + 1) for i, n in enumerate("abcdef")}

    def lookup(chosen: str, rest: Sequence[str]) -> dict[str, float]:
        asked.append((chosen, tuple(rest)))
        return dict.fromkeys(rest, 0.0)

    steps = greedy_mrmr(relevance, 3, lookup)
    assert [s.attribute for s in steps] == ["a", "b", "c"]
    assert asked == [("a", ("b", "c", "d", "e", "f")), ("b", ("c", "d", "e", "f"))]


def test_bad_requests() -> None:
    with pytest.raises(SpecError, match="^k must be at least 1"):
        greedy_mrmr({"a": 1.0}, 0, _lookup({}))
    with pytest.raises(SpecError, match="^criterion must be one of mid, miq"):
        greedy_mrmr({"a": 1.0}, 1, _lookup({}), criterion="maxrel")
    with pytest.raises(SpecError, match="no relevance for: z"):
        greedy_mrmr({"a": 1.0}, 1, _lookup({}), order=["a", "z"])


@pytest.mark.slow
def test_a_measured_matrix_gives_the_same_steps() -> None:
    con = duckdb.connect()
    fill_duckdb(con, ["t"], near_copies(seed=23, rows=600))
    full = redundancy(con, target="y", table="t", include_flagged=True)
    lazy = select_attributes(con, target="y", table="t", k=4, include_flagged=True)
    relevance = {s.attribute: s.information_gain for s in full.ranking.attributes}
    steps = greedy_mrmr(relevance, 4, matrix_lookup(full.matrix))
    assert [s.attribute for s in steps] == lazy.attributes
    for a, b in zip(steps, lazy.steps, strict=True):
        assert abs(a.score - b.score) <= TOLERANCE
    # 7 candidates, 4 steps: 6 + 5 + 4 pairs measured, not all 21, in one statement per step.
    assert len(lazy.matrix.pairs) == 15
    assert sum("pair_index" in statement for statement in lazy.statements) == 3
    assert isinstance(full.matrix, RedundancyMatrix)


# --- the command -------------------------------------------------------------------------------

@pytest.fixture
def source(tmp_path: Any) -> str:
    path = tmp_path / "select.duckdb"
    with duckdb.connect(str(path)) as con:
        fill_duckdb(con, ["t"], near_copies(seed=24, rows=500))
    return str(path)


@pytest.mark.slow
def test_command_table(source: str) -> None:
    result = CliRunner().invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y",
                                      "y", "--k", "3"])
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    assert lines[0].startswith("t: target 'y', ")
    assert "greedy mRMR (MID) chose 3 of 7 candidate attribute(s)" in lines[0]
    assert lines[2].split()[:5] == ["#", "attribute", "relevance", "redundancy", "mid"]
    api = select_attributes(source, target="y", table="t", k=3, include_flagged=True)
    for line, step in zip(lines[4:7], api.steps, strict=True):
        cells = line.split()
        assert cells[:4] == [str(step.position), step.attribute, f"{step.relevance:.4f}",
                             f"{step.redundancy:.4f}"]
    assert lines[4].split()[-2:] == ["-", "-"]  # the first step has no earlier choice
    assert lines[5].split()[-2] == api.steps[0].attribute


@pytest.mark.slow
def test_command_json_and_csv(source: str) -> None:
    runner = CliRunner()
    out = runner.invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y", "y", "--k",
                              "4",
                              "--criterion", "miq", "-f", "json", "--limit", "5"])
    assert out.exit_code == 0, out.output
    document = json.loads(out.stdout)
    assert (document["criterion"], document["k"], len(document["candidates"])) == ("miq", 4, 5)
    assert [list(s) for s in document["selected"]] == [list(STEP_KEYS)] * 4
    api = select_attributes(source, target="y", table="t", k=4, criterion="miq", limit=5,
                            include_flagged=True)
    assert [s["attribute"] for s in document["selected"]] == api.attributes
    csv_out = runner.invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y", "y",
                                  "--k", "2", "-f", "csv"])
    rows = csv_out.stdout.splitlines()
    assert rows[0].split(",") == list(STEP_KEYS) and len(rows) == 3
    assert rows[1].split(",")[5:] == ["", "0.0"]


@pytest.mark.slow
def test_command_k_beyond_the_candidates_lists_them_all(source: str) -> None:
    result = CliRunner().invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y",
                                      "y", "--k", "9",
                                      "-a", "strong,flag,noise"])
    assert result.exit_code == 0, result.output
    assert "chose 3 of 3 candidate" in result.stdout
    assert "note: --k 9 is more than the 3 candidate attribute(s)" in result.stderr


def test_command_usage_errors(source: str) -> None:
    runner = CliRunner()
    assert runner.invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y",
                               "y"]).exit_code == 2
    zero = runner.invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y", "y",
                               "--k", "0"])
    assert zero.exit_code == 2 and "--k" in zero.output
    bad = runner.invoke(cli, ["select", "--include-flagged", source, "-t", "t", "-y", "y", "--k",
                              "2",
                              "--criterion", "maxrel"])
    assert bad.exit_code == 2


# --- the HTML report ---------------------------------------------------------------------------

class _Elements(HTMLParser):
    """Start tags with their attributes, in document order."""

    def __init__(self) -> None:
        super().__init__()
        self.found: list[tuple[str, dict[str, str]]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.found.append((tag, {k: v or "" for k, v in attrs}))


def elements(html: str) -> list[tuple[str, dict[str, str]]]:
    parser = _Elements()
    parser.feed(html)
    return parser.found


@pytest.mark.slow
def test_report_shows_the_selection_and_every_pair_of_the_heatmap(source: str) -> None:
    run = rank_and_profile(source, target="y", table="t", top=2)
    select_for_runs(source, [run], target="y", table="t", k=3, candidates=6, include_flagged=True)
    selection = run.selection
    assert isinstance(selection, Selection) and len(selection.candidates) == 6
    found = elements(render_report([run]))
    cells = [a for tag, a in found if tag == "g" and a.get("class") == "heat-cell"]
    assert len(cells) == 15  # every pair of the 6 candidates, once
    for cell in cells:
        pair = selection.matrix.pair(cell["data-first"], cell["data-second"])
        assert float(cell["data-mi"]) == pair.mutual_information
        assert float(cell["data-su"]) == pair.symmetric_uncertainty
    rows = [a["data-attribute"] for tag, a in found
            if tag == "tr" and "data-attribute" in a and _inside(found, a, "r1-redundancy")]
    assert rows == selection.attributes
    # The chosen set leads the heatmap: the first column is the first choice.
    assert cells[0]["data-second"] == selection.attributes[0]
    assert any(tag == "polygon" and a.get("class") == "chosen-outline" for tag, a in found)


def _inside(found: list[tuple[str, dict[str, str]]], target: dict[str, str],
            section_id: str) -> bool:
    """True when ``target`` comes after the section's start and before the next card."""
    start = next(i for i, (_, a) in enumerate(found) if a.get("id") == section_id)
    end = next((i for i, (tag, a) in enumerate(found)
                if i > start and tag == "section" and "card" in a.get("class", "")), len(found))
    return any(a is target for _, a in found[start:end])


@pytest.mark.slow
def test_report_command_adds_the_section_only_when_asked(source: str, tmp_path: Any) -> None:
    runner = CliRunner()
    plain = runner.invoke(cli, ["report", source, "-t", "t", "-y", "y", "-o", "-", "-q"])
    assert plain.exit_code == 0, plain.output
    assert 'id="r1-redundancy"' not in plain.stdout
    out = tmp_path / "report.html"
    chosen = runner.invoke(cli, ["report", source, "-t", "t", "-y", "y", "-o", str(out), "-q",
                                 "--select", "2", "--criterion", "miq"])
    assert chosen.exit_code == 0, chosen.output
    html = out.read_text(encoding="utf-8")
    assert 'id="r1-redundancy" data-criterion="miq"' in html
    assert "<script" not in html and "http://" not in html and "https://" not in html
    api = select_attributes(source, target="y", table="t", k=2, criterion="miq",
                            include_flagged=True)
    tags = elements(html)
    assert [a["data-attribute"] for _, a in tags
            if _inside(tags, a, "r1-redundancy") and "data-attribute" in a] == api.attributes


@pytest.mark.slow
def test_report_segments_measure_pairs_within_each_segment(tmp_path: Any) -> None:
    dataset = near_copies(seed=25, rows=600)
    con = duckdb.connect()
    fill_duckdb(con, ["t"], dataset)
    runs = rank_and_profile_segments(con, target="y", table="t", by="flag", top=1,
                                     attributes="strong,strong_twin,number,noise")
    select_for_runs(con, runs, target="y", table="t", k=2, by="flag",
                    attributes="strong,strong_twin,number,noise", include_flagged=True)
    assert sorted(r.ranking.segment["flag"] for r in runs) == ["no", "yes"]
    for run in runs:
        value = run.ranking.segment["flag"]
        # scikit-learn on the segment's rows (target present, flag = value).
        rows = [(a, b) for a, b, f, y in zip(dataset.column("strong"),
                                             dataset.column("strong_twin"),
                                             dataset.column("flag"), dataset.column("y"),
                                             strict=True) if f == value and y is not None]
        want = mutual_info_score([a for a, _ in rows], [b for _, b in rows]) / math.log(2)
        got = run.selection.matrix.mutual_information("strong", "strong_twin")
        assert abs(got - want) <= TOLERANCE, run.segment
        assert run.selection.matrix.pair("strong", "strong_twin").rows == len(rows)
    html = render_report(runs)
    assert 'id="r1-redundancy"' in html and 'id="r2-redundancy"' in html
    assert 'id="r1-heatmap"' in html and 'id="r2-heatmap"' in html


@pytest.mark.slow
def test_flagged_candidates_are_named_in_a_note(tmp_path: Any) -> None:
    path = tmp_path / "flags.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i AS id, 'k' AS fixed, i % 3 AS a, i % 2 AS y "
                    "FROM range(100) r(i)")
    result = CliRunner().invoke(cli, ["select", "--include-flagged", str(path), "-t", "t", "-y",
                                      "y", "--k", "2"])
    assert result.exit_code == 0, result.output
    assert "note: flagged candidates: id_like id (" in result.stderr
    assert "constant fixed (" in result.stderr
    run = rank_and_profile(str(path), target="y", table="t", top=1)
    select_for_runs(str(path), [run], target="y", table="t", k=2, include_flagged=True)
    assert "Note: flagged candidates: id_like id" in render_report([run])
