"""The HTML report: context, escaping, self-containment, sensitive marks, cautions, CLI."""

from __future__ import annotations

import dataclasses
import datetime as dt
import doctest
import json
import re
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import duckdb
import pytest
from click.testing import CliRunner

import bitsift.analysis.profile
import bitsift.output.report
from bitsift.analysis.profile import rank_and_profile
from bitsift.analysis.profile_model import ProfiledRun
from bitsift.cli import cli
from bitsift.output.report import (
    CAUTIONS,
    CLASS_COLOURS,
    format_metric,
    render_report,
    report_context,
)

NOW = dt.datetime(2026, 1, 2, 3, 4, tzinfo=dt.UTC)


class Elements(HTMLParser):
    """Every start tag with its attributes, and the text inside elements with a data-value."""

    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.texts: list[tuple[dict[str, str | None], str]] = []
        self._open: list[dict[str, str | None]] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append((tag, dict(attrs)))
        if tag in ("td", "text"):
            self._open.append(dict(attrs))

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "text") and self._open:
            self._open.pop()

    def handle_data(self, data: str) -> None:
        if self._open and data.strip():
            self.texts.append((self._open[-1], data.strip()))

    def with_class(self, tag: str, css: str) -> list[dict[str, str | None]]:
        return [a for t, a in self.tags if t == tag and css in (a.get("class") or "").split()]


def parse(html: str) -> Elements:
    elements = Elements()
    elements.feed(html)
    return elements


@pytest.fixture(scope="module")
def connection() -> Any:
    con = duckdb.connect()
    con.execute(
        "CREATE TABLE visits AS SELECT i AS visit_id, "
        "CASE WHEN i % 4 = 0 THEN 'north' WHEN i % 4 = 1 THEN 'south' ELSE 'east' END AS region, "
        "CASE WHEN i % 3 = 0 THEN 'f' ELSE 'm' END AS sex, "
        "(i * 37) % 101 + 0.25 AS waited_min, "
        "'same' AS clinic, "
        "CASE WHEN i % 7 < 2 THEN 'no-show' WHEN i % 4 = 0 THEN 'late' ELSE 'kept' END AS outcome "
        "FROM range(600) r(i)"
    )
    yield con
    con.close()


@pytest.fixture(scope="module")
def run(connection: Any) -> ProfiledRun:
    return rank_and_profile(connection, target="outcome", table="visits", sensitive="sex",
                            bins=4, top=3)


@pytest.mark.slow
def test_module_examples_hold() -> None:
    for module in (bitsift.output.report, bitsift.analysis.profile):
        outcome = doctest.testmod(module)
        assert outcome.attempted > 0 and outcome.failed == 0, module.__name__


def test_context_has_one_chart_row_per_attribute_with_the_ranking_values(run: ProfiledRun
                                                                         ) -> None:
    context = report_context([run], now=NOW)
    (first,) = context["runs"]
    rows = first["chart"]["rows"]
    assert [r["attribute"] for r in rows] == [s.attribute for s in run.ranking.attributes]
    assert [r["value"] for r in rows] == [s.information_gain for s in run.ranking.attributes]
    widths = [r["bar_width"] for r in rows]
    assert widths == sorted(widths, reverse=True) and widths[0] > 0
    assert [r["attribute"] for r in rows if r["flagged"]] == ["visit_id", "clinic"]
    assert [r["attribute"] for r in rows if r["sensitive"]] == ["sex"]
    assert len(first["drilldowns"]) == 3 and first["not_profiled"] == 2
    assert context["generated"] == "2026-01-02 03:04 UTC"


def test_drilldown_contributions_add_up_to_the_conditional_entropy(run: ProfiledRun) -> None:
    for scored, found in run.profiled():
        assert abs(sum(v.contribution for v in found.values)
                   - scored.conditional_entropy) <= 1e-9, scored.attribute
        assert found.rows == run.ranking.rows
    waited = run.profiles.attributes.get("waited_min")
    if waited is not None:  # numeric: its drill-down lists the ranking's bins
        assert waited.cuts == tuple(run.ranking["waited_min"].cuts or ())


def test_html_shows_the_numbers_of_the_ranking(run: ProfiledRun) -> None:
    html = render_report([run], now=NOW)
    elements = parse(html)
    bars = elements.with_class("rect", "bar")
    assert [b["data-attribute"] for b in bars] == [s.attribute for s in run.ranking.attributes]
    assert [float(b["data-value"] or "nan") for b in bars] == [
        s.information_gain for s in run.ranking.attributes
    ]
    shown = {(a.get("data-key"), a.get("data-value")): text for a, text in elements.texts
             if a.get("data-key")}
    for scored in run.ranking.attributes:
        for key in ("information_gain", "gain_ratio", "p_value", "g_statistic"):
            value = getattr(scored, key)
            assert shown[(key, repr(value))] == format_metric(key, value)
    assert elements.with_class("rect", "flagged")
    assert len(elements.with_class("article", "drill")) == 3


def test_html_is_self_contained_and_carries_the_cautions(connection: Any) -> None:
    every = rank_and_profile(connection, target="outcome", table="visits", sensitive="sex")
    html = render_report([every], now=NOW)
    assert not re.search(r"https?://|<script|<link|@import|<img|<iframe", html, re.IGNORECASE)
    assert "association in this data, not cause" in html
    assert "unlawful or unfair" in html and "local law" in html
    assert 'id="caution"' in html and 'id="glossary"' in html
    # Sensitive columns are marked in the chart, the table, the drill-down and the note.
    assert html.count("◆ sensitive") == 4
    drill = re.search(r'<article class="drill"[^>]*data-attribute="sex">.*?</article>', html,
                      re.DOTALL)
    assert drill is not None and '<span class="badge sensitive">' in drill.group(0)
    assert 'id="sensitive-note"' in html
    for colour in CLASS_COLOURS[:3]:
        assert colour in html


def test_names_and_values_are_escaped() -> None:
    con = duckdb.connect()
    con.execute(
        'CREATE TABLE t AS SELECT CASE WHEN i % 2 = 0 THEN \'<b>bold</b>\' ELSE \'a & "b"\' END '
        'AS "<script>alert(1)</script>", CASE WHEN i % 3 = 0 THEN \'x<y\' ELSE \'y\' END AS y '
        'FROM range(30) r(i)'
    )
    run = rank_and_profile(con, target="y", table="t")
    con.close()
    html = render_report([run], now=NOW)
    assert "<script" not in html and "<b>bold" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "&lt;b&gt;bold&lt;/b&gt;" in html and "a &amp; &#34;b&#34;" in html
    assert "x&lt;y" in html


def test_no_sensitive_note_without_sensitive_columns(run: ProfiledRun) -> None:
    plain = dataclasses.replace(run, sensitive=())
    html = render_report([plain], now=NOW)
    assert "◆ sensitive" not in html
    assert all(c.split(". ")[0] in html for c in CAUTIONS)


def test_several_runs_render_as_segments_with_unique_ids(run: ProfiledRun) -> None:
    runs = [dataclasses.replace(run, segment="clinic A"),
            dataclasses.replace(run, segment="clinic B")]
    html = render_report(runs, now=NOW)
    elements = parse(html)
    ids = [a["id"] for _, a in elements.tags if a.get("id")]
    assert len(ids) == len(set(ids))
    assert "Segment: clinic A" in html and "Segment: clinic B" in html
    assert len(elements.with_class("rect", "bar")) == 2 * len(run.ranking.attributes)
    with pytest.raises(ValueError):
        report_context([])


def _database(tmp_path: Path) -> Path:
    path = tmp_path / "visits.duckdb"
    con = duckdb.connect(str(path))
    con.execute(
        "CREATE TABLE visits AS SELECT CASE WHEN i % 4 = 0 THEN 'north' ELSE 'south' END AS "
        "region, CASE WHEN i % 3 = 0 THEN 'f' ELSE 'm' END AS sex, (i * 37) % 101 + 0.5 AS "
        "waited, CASE WHEN i % 5 < 2 THEN 'late' ELSE 'kept' END AS outcome FROM range(200) r(i)"
    )
    con.close()
    return path


@pytest.mark.slow
def test_report_command_writes_the_file(tmp_path: Path) -> None:
    source = _database(tmp_path)
    out = tmp_path / "report.html"
    result = CliRunner().invoke(cli, ["report", str(source), "-t", "visits", "-y", "outcome",
                                      "--out", str(out), "--top", "2", "--sensitive", "sex",
                                      "--title", "Visits & outcomes"], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    assert result.stdout == ""
    assert result.stderr == f"wrote {out} (3 attributes ranked, 2 drilled into)\n"
    html = out.read_text(encoding="utf-8")
    assert "<title>Visits &amp; outcomes</title>" in html
    assert len(parse(html).with_class("article", "drill")) == 2

    quiet = CliRunner().invoke(cli, ["report", str(source), "-t", "visits", "-y", "outcome",
                                     "--out", "-", "--quiet", "--sort", "gain_ratio"])
    assert quiet.exit_code == 0 and quiet.stderr == ""
    assert quiet.stdout.startswith("<!DOCTYPE html>")
    assert 'data-metric="gain_ratio"' in quiet.stdout

    json_out = CliRunner().invoke(cli, ["rank", str(source), "-t", "visits", "-y", "outcome",
                                        "--format", "json"])
    ranking = json.loads(json_out.stdout)
    bars = parse(quiet.stdout).with_class("rect", "bar")
    assert len(bars) == len(ranking["attributes"])


def test_report_command_rejects_a_negative_top(tmp_path: Path) -> None:
    source = _database(tmp_path)
    result = CliRunner().invoke(cli, ["report", str(source), "-t", "visits", "-y", "outcome",
                                      "--out", str(tmp_path / "r.html"), "--top", "-1"])
    assert result.exit_code == 2 and "--top" in result.output
    assert not (tmp_path / "r.html").exists()


def test_the_chart_draws_each_interval_and_shades_overlapping_ranks(run: ProfiledRun) -> None:
    # Issue 18: a whisker from the interval's low to its high end per attribute, and a shaded
    # row where the rank range overlaps the one above.
    context = report_context([run], now=NOW)
    (first,) = context["runs"]
    rows = first["chart"]["rows"]
    scores = run.ranking.attributes
    ticks = first["chart"]["ticks"]
    assert ticks[-1]["x"] >= max(r["whisker"]["x2"] for r in rows if r["whisker"])
    for r, s in zip(rows, scores, strict=True):
        assert r["whisker"] is not None and r["whisker"]["x1"] <= r["whisker"]["x2"]
        assert s.information_gain_high is not None and s.information_gain_low is not None
    expected = [i > 0 and scores[i].rank_low is not None
                and scores[i].rank_low <= (scores[i - 1].rank_high or 0)
                and (scores[i - 1].rank_low or 0) <= (scores[i].rank_high or 0)
                for i in range(len(scores))]
    assert [r["overlaps_above"] for r in rows] == expected and any(expected)
    assert not rows[0]["overlaps_above"]
    html = parse(render_report([run], now=NOW))
    shaded = [a["data-attribute"] for a in html.with_class("rect", "overlap")]
    assert shaded == [r["attribute"] for r in rows if r["overlaps_above"]]
    whiskers = [a["data-attribute"] for a in html.with_class("g", "whisker")]
    assert whiskers == [s.attribute for s in scores]


def test_no_whiskers_on_a_chart_of_another_metric(connection: Any) -> None:
    by_ratio = rank_and_profile(connection, target="outcome", table="visits", bins=4, top=1,
                                sort="gain_ratio")
    rows = report_context([by_ratio], now=NOW)["runs"][0]["chart"]["rows"]
    assert all(r["whisker"] is None for r in rows)
