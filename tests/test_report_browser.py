"""The demo report opened in headless Chromium: one bar per attribute, the numbers of the JSON.

Needs the Debian package ``chromium`` (``make browser`` installs it when run as root; CI's
``.ci/run`` does, ``make test`` never does). Without it the test skips with a message, except in
CI (CI=true), where it fails.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import struct
import subprocess
import zlib
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner
from conftest import IN_CI

from bitsift.cli import cli
from bitsift.output.report import format_metric

WINDOW = (1280, 2200)
#: Metric columns of the report's table, all of them keys of the JSON contract.
TABLE_KEYS = ("distinct", "information_gain", "gain_ratio", "symmetric_uncertainty",
              "conditional_entropy", "attribute_entropy", "g_statistic", "dof", "p_value")


def chromium() -> str:
    found = shutil.which("chromium") or shutil.which("chromium-browser")
    if found is None and Path("/usr/bin/chromium").exists():
        found = "/usr/bin/chromium"
    if found is None:
        message = ("headless Chromium not found: install the Debian package 'chromium' "
                   "(`make browser` does so when run as root) to run the browser test")
        if IN_CI:
            pytest.fail(message)
        pytest.skip(message)
    return found


def open_in_chromium(binary: str, page: Path, screenshot: Path, profile: Path) -> str:
    """Load ``page``, write a screenshot, return the DOM as Chromium serialises it."""
    command = [
        binary, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
        "--no-first-run", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--disable-dev-shm-usage", "--hide-scrollbars",
        f"--user-data-dir={profile}", f"--window-size={WINDOW[0]},{WINDOW[1]}",
        f"--screenshot={screenshot}", "--dump-dom", page.as_uri(),
    ]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                               text=True, start_new_session=True)
    try:
        out, err = process.communicate(timeout=60)
    except subprocess.TimeoutExpired:
        os.killpg(process.pid, signal.SIGKILL)  # the browser and the helpers it started
        process.communicate()
        pytest.fail("Chromium did not finish within 60 s")
    assert process.returncode == 0, err[-2000:]
    return out


class Dom(HTMLParser):
    """The bars of the chart, the cells of the metrics table, and the flags per row."""

    def __init__(self) -> None:
        super().__init__()
        self.bars: list[dict[str, str | None]] = []
        self.values: list[tuple[str, str, str]] = []  # chart value texts: attribute, repr, text
        self.cells: dict[str, dict[str, tuple[str, str]]] = {}  # attribute -> key -> cell
        self.flags: dict[str, list[str]] = {}
        self._row: str | None = None
        self._chart_row: str | None = None
        self._capture: tuple[str, Any] | None = None
        self._badge = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        classes = (a.get("class") or "").split()
        if tag == "g" and "chart-row" in classes:
            self._chart_row = a["data-attribute"]
        elif tag == "rect" and "bar" in classes:
            self.bars.append(a)
        elif tag == "text" and "value" in classes:
            self._capture = ("value", a.get("data-value"))
        elif tag == "tr" and a.get("data-attribute") is not None:
            self._row = a["data-attribute"]
            self.cells[self._row or ""] = {}
            self.flags[self._row or ""] = []
        elif tag == "td" and self._row is not None and a.get("data-key"):
            self._capture = ("cell", (a["data-key"], a.get("data-value")))
        elif tag == "span" and self._row is not None and "flag" in classes:
            self._badge = True

    def handle_endtag(self, tag: str) -> None:
        if tag == "tr":
            self._row = None
        if tag in ("text", "td"):
            self._capture = None
        if tag == "span":
            self._badge = False

    def handle_data(self, data: str) -> None:
        text = data.strip()
        if not text:
            return
        if self._badge and self._row is not None:
            self.flags[self._row].append(text.removeprefix("⚑").strip())
        elif self._capture is not None:
            kind, info = self._capture
            if kind == "value":
                self.values.append((self._chart_row or "", info, text))
            else:
                key, value = info
                self.cells[self._row or ""][key] = (value, text)


def shown_number(text: str) -> float:
    return float(text.replace(",", ""))


def resolution(text: str) -> float:
    """Half a unit of the last digit shown ('0.1235' -> 5e-5, '2.76e-15' -> 5e-18)."""
    mantissa, _, exponent = text.replace(",", "").partition("e")
    decimals = len(mantissa.partition(".")[2])
    return 0.5 * 10 ** (-decimals) * 10 ** int(exponent or 0)


def png_facts(path: Path) -> tuple[int, int, int]:
    """Width, height and the number of distinct bytes in the decompressed pixel rows."""
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    width, height = struct.unpack(">II", data[16:24])
    position, pixels = 8, b""
    while position < len(data):
        (length,) = struct.unpack(">I", data[position:position + 4])
        kind = data[position + 4:position + 8]
        if kind == b"IDAT":
            pixels += data[position + 8:position + 8 + length]
        position += 12 + length
    return width, height, len(set(zlib.decompress(pixels)))


def test_demo_report_in_headless_chromium(demo_db: Path, tmp_path: Path) -> None:
    binary = chromium()
    page = tmp_path / "report.html"
    runner = CliRunner()
    common = [str(demo_db), "--table", "trays", "--target", "outcome"]
    made = runner.invoke(cli, ["report", *common, "--out", str(page), "--sensitive",
                               "grower_code", "--quiet"], catch_exceptions=False)
    assert made.exit_code == 0, made.output
    ranked = runner.invoke(cli, ["rank", *common, "--format", "json"], catch_exceptions=False)
    expected = json.loads(ranked.stdout)["attributes"]

    screenshot = tmp_path / "report.png"
    dom_text = open_in_chromium(binary, page, screenshot, tmp_path / "chromium-profile")
    dom = Dom()
    dom.feed(dom_text)

    # One bar per attribute, in the JSON's order, each with the JSON's value. The report and
    # the JSON come from two runs, and DuckDB's parallel sums may differ in the last bits.
    assert len(dom.bars) == len(expected) == 15
    assert [b["data-attribute"] for b in dom.bars] == [a["attribute"] for a in expected]
    assert [float(b["data-value"] or "nan") for b in dom.bars] == pytest.approx(
        [a["information_gain"] for a in expected], rel=1e-9, abs=1e-9
    )
    widths = [float(b["width"] or 0) for b in dom.bars]
    assert widths == sorted(widths, reverse=True) and widths[0] > 100
    flagged = [b["data-attribute"] for b in dom.bars if "flagged" in (b["class"] or "")]
    assert flagged == [a["attribute"] for a in expected if a["flags"]]

    # The value printed beside each bar is the JSON's, rounded as shown.
    assert [v[0] for v in dom.values] == [a["attribute"] for a in expected]
    for (_, full, text), want in zip(dom.values, expected, strict=True):
        assert float(full) == pytest.approx(want["information_gain"], rel=1e-9, abs=1e-9)
        assert text == format_metric("information_gain", want["information_gain"])
        assert abs(shown_number(text) - want["information_gain"]) <= resolution(text)

    # Every metric of the table equals the JSON: to 1e-9 in data-value (the suite's
    # tolerance), and to the digits shown in the text.
    assert list(dom.cells) == [a["attribute"] for a in expected]
    for want in expected:
        row = dom.cells[want["attribute"]]
        for key in TABLE_KEYS:
            full, text = row[key]
            assert float(full or "nan") == pytest.approx(want[key], rel=1e-9, abs=1e-9), (
                want["attribute"], key)
            if text.startswith("<"):  # a p-value below the smallest double: an upper bound
                assert 0 <= want[key] < shown_number(text[1:]), (want["attribute"], key, text)
            else:
                assert abs(shown_number(text) - want[key]) <= resolution(text), (
                    want["attribute"], key, text)
        assert row["kind"][1] == want["kind"]
        assert dom.flags[want["attribute"]] == want["flags"]

    # The screenshot is a real rendering of the page, not a blank canvas.
    width, height, distinct_bytes = png_facts(screenshot)
    assert (width, height) == WINDOW
    assert distinct_bytes > 64
    assert screenshot.stat().st_size > 50_000
