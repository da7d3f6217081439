"""The shared text outputs: one number/cut formatter, one aligned table, one CSV writer.

The data are invented for these tests: a numeric attribute whose four values differ only in
the sixth decimal, so that neighbouring cut points need seven significant digits to read apart.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import duckdb
import pytest
from click.testing import CliRunner

from bitsift.analysis.profile import profile
from bitsift.analysis.profile_read import bin_label
from bitsift.cli import cli
from bitsift.jobs.drift import Change, DriftReport, DriftThresholds, render_text
from bitsift.numformat import cut_labels, format_cuts, format_metric, format_p_value
from bitsift.output.report import profile_text, render_report
from bitsift.output.texttable import aligned, csv_text

# Four values 1.000000 .. 1.000003; the first two rows in four are class a, the others b.
CLOSE_VALUES_SQL = """
CREATE TABLE t AS
SELECT 1 + (i % 4) * 0.000001 AS x, CASE WHEN i % 4 < 2 THEN 'a' ELSE 'b' END AS y
FROM range(400) r(i)
"""


@pytest.fixture(scope="module")
def close_db(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("output") / "close.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute(CLOSE_VALUES_SQL)
    return path


def _cut_line(text: str, prefix: str, separator: str) -> list[str]:
    line = next(line for line in text.splitlines() if line.lstrip().startswith(prefix))
    return line.split(prefix, 1)[1].split(":", 1)[-1].strip().split(separator)


def _assert_readable_cuts(labels: list[str], cuts: list[float]) -> None:
    """Every cut point shown, distinct from its neighbours and close to the value it names."""
    assert len(labels) == len(cuts) == 3
    assert len(set(labels)) == len(labels), labels
    for label, cut in zip(labels, cuts, strict=True):
        assert abs(float(label) - cut) < 1e-7, (label, cut)


def test_profile_text_keeps_neighbouring_cut_points_apart(close_db: Path) -> None:
    # Regression: the drill-down printed these cut points with 6 digits: "1, 1, 1".
    with duckdb.connect(str(close_db)) as con:
        run = profile(con, target="y", attributes="x", table="t", bins=4)
    cuts = list(run.ranking["x"].cuts or [])
    text = profile_text(run)
    _assert_readable_cuts(_cut_line(text, "cut points:", ", "), cuts)
    # The bin labels of the value table use the same digits as the cut point line.
    assert f"< {cut_labels(cuts)[0]}" in text
    assert bin_label(1, cuts)[0] == f"[{cut_labels(cuts)[0]}, {cut_labels(cuts)[1]})"


def test_profile_command_prints_distinct_cut_points(close_db: Path) -> None:
    result = CliRunner().invoke(cli, ["profile", str(close_db), "--table", "t", "--target", "y",
                                      "--attribute", "x", "--bins", "4", "--quiet"])
    assert result.exit_code == 0, result.output
    labels = _cut_line(result.output, "cut points:", ", ")
    assert len(set(labels)) == 3 and "1" not in labels, labels


def test_report_drilldown_keeps_neighbouring_cut_points_apart(close_db: Path) -> None:
    with duckdb.connect(str(close_db)) as con:
        run = profile(con, target="y", attributes="x", table="t", bins=4)
    html = render_report([run])
    shown = [part.split("</code>")[0] for part in html.split('<p class="cuts">')[1]
             .split("</p>")[0].split("<code>")[1:]]
    _assert_readable_cuts(shown, list(run.ranking["x"].cuts or []))


def test_rank_table_and_profile_agree_on_cut_digits(close_db: Path) -> None:
    result = CliRunner().invoke(cli, ["rank", str(close_db), "--table", "t", "--target", "y",
                                      "--bins", "4"])
    assert result.exit_code == 0, result.output
    table_cuts = _cut_line(result.output, "x  quantile", " | ")
    with duckdb.connect(str(close_db)) as con:
        run = profile(con, target="y", attributes="x", table="t", bins=4)
    assert table_cuts == cut_labels(list(run.ranking["x"].cuts or []))


@pytest.mark.parametrize(("cuts", "min_digits", "want"), [
    ([1.000001, 1.000002], 6, ["1.000001", "1.000002"]),  # 6 digits would print "1", "1"
    ([1.000001, 1.000002], 4, ["1.000001", "1.000002"]),
    ([2.45, 4.75], 4, ["2.45", "4.75"]),
    ([12.3456789], 6, ["12.3457"]),
    ([-0.5, 0.25], 6, ["-0.5", "0.25"]),
    ([1741824000.0, 1741910400.0], 4, ["1741824000", "1741910400"]),  # epoch seconds
    # Neighbouring doubles: only 17 digits tell them apart.
    ([0.1, 0.1 + 2**-55], 4, ["0.10000000000000001", "0.10000000000000003"]),
])
def test_cut_labels_use_the_fewest_digits_that_keep_neighbours_apart(
        cuts: list[float], min_digits: int, want: list[str]) -> None:
    assert cut_labels(cuts, min_digits) == want


def test_format_cuts_without_cuts_names_the_single_bin() -> None:
    assert format_cuts([]) == "(none: one bin)"
    assert format_cuts([], none="none (a single bin)") == "none (a single bin)"


def test_metrics_and_p_values() -> None:
    assert format_p_value(0.0) == "<1e-300"  # the chi-square tail underflowed
    assert format_p_value(5e-324) == "4.94e-324"
    assert format_p_value(0.5) == "0.500"
    assert format_metric("g_statistic", 12345.67) == "12,345.7"
    assert format_metric("g_statistic", 12345.67, grouped=False) == "12345.7"
    assert format_metric("information_gain", 0.99996) == "1.0000"
    assert format_metric("p_value", None) == "None"


def test_aligned_table_escapes_control_characters_and_aligns() -> None:
    lines = aligned([["name", "n"], ["a\x1b]0;x\x07", "1"], ["b\nforged", "10"]], rule=True)
    assert lines == ["name            n",
                     "-------------  --",
                     "a\\x1b]0;x\\x07   1",
                     "b\\x0aforged    10"]
    assert all(line.isprintable() for line in lines)


def test_csv_keeps_exact_text_and_empty_none() -> None:
    text = csv_text(["name", "value"], [["a,\nb", None], ["c", 0.1]])
    assert list(csv.reader(io.StringIO(text))) == [["name", "value"], ["a,\nb", ""],
                                                   ["c", "0.1"]]


def test_drift_text_escapes_names_and_aligns_like_every_table() -> None:
    # An attribute name from the history table holding a terminal escape: shown, not obeyed.
    report = DriftReport(job="nightly", old=None, new=None, thresholds=DriftThresholds(),
                         changes=[Change("rank", "r", "", "a\x1b[2Jb", 1, 5),
                                  Change("information_gain", "r", "", "c", 0.5, 0.25)])
    lines = render_text(report).splitlines()
    assert all(line.isprintable() for line in lines), lines
    assert lines[2:5] == ["ranking  attribute  change            detail",
                          "r        a\\x1b[2Jb  rank              #1 -> #5",
                          "r        c          information gain  0.5000 -> 0.2500 bits (-0.2500)"]
