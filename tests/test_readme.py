"""What the README tells a newcomer holds on the demo data (issue 21 item 10)."""

from __future__ import annotations

import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest
from helpers import run_main

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text()
#: The demo's size as the Makefile makes it (ROWS ?= ...).
DEMO_ROWS = int(re.search(r"^ROWS \?= (\d+)$", (ROOT / "Makefile").read_text(), re.M)[1])


def readme_command(name: str) -> list[str]:
    """The arguments of the README's first ``bitsift NAME ...`` line on the demo data."""
    for line in README.splitlines():
        if line.startswith(f"bitsift {name} examples/data/greenhouse.duckdb"):
            return shlex.split(line.split("#")[0])[1:]
    raise AssertionError(f"no `bitsift {name}` example on the demo in the README")


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo")
    subprocess.run([sys.executable, str(ROOT / "examples" / "make_demo.py"), "--rows",
                    str(DEMO_ROWS), "--out", str(out)], check=True, capture_output=True,
                   timeout=600)
    return out / "greenhouse.duckdb"


def _on(demo: Path, arguments: list[str]) -> list[str]:
    return [str(demo) if a == "examples/data/greenhouse.duckdb" else a for a in arguments]


@pytest.mark.slow
def test_the_readme_check_example_agrees_on_the_demo(
        demo: Path, capsys: pytest.CaptureFixture[str]) -> None:
    example = readme_command("check")
    outcome = run_main(capsys, *_on(demo, example))
    assert outcome.code == 0, outcome.err
    assert "on the whole table" in outcome.out
    assert outcome.out.endswith("result: database and reference agree (tolerance 1e-09)\n")
    # The default sample is smaller than the demo: said so, with the way to compare it all.
    without = [a for a in example if a != "--sample-rows" and not a.isdigit()]
    sampled = run_main(capsys, *_on(demo, without))
    assert sampled.code == 0
    assert sampled.out.endswith(
        "result: sample only: the differences are the sample's, informative (no exact "
        f"comparison); --sample-rows {DEMO_ROWS} compares the whole table\n")


def test_the_readme_says_how_to_install_extras_and_run_the_venv() -> None:
    assert ".venv/bin/pip install -e '.[postgres]'" in README
    assert "pip install 'bitsift[" not in README
    assert "source .venv/bin/activate" in README and "`.venv/bin/bitsift`" in README
    assert "examples/data/greenhouse_history.duckdb" in README
    for command in ("report", "profile"):
        assert readme_command(command)
    using_it = README.split("## Using it", 1)[1].split("\n## ", 1)[0]
    assert "bitsift report " in using_it and "bitsift profile " in using_it
