"""The SQL templates' compiled modules (bitsift/sql/precompiled/, see bitsift.sql.templates):
one per template, each exactly what Jinja2 compiles from the template's current text, used
instead of compiling it, and never used once the template's text differs.

They are build output: ``make`` writes them (``python -m bitsift.sql.precompile``) whenever a
template is newer than the last run, and git ignores them. After changing a SQL template
outside make, run that command (or ``BITSIFT_REGENERATE_TEMPLATES=1`` with this file).
"""

from __future__ import annotations

import importlib
import os
import subprocess
import sys
from pathlib import Path

import pytest

from bitsift.sql import template_runtime, templates
from bitsift.sql.precompile import PRECOMPILED_DIR, module_path, sql_templates, write_all
from bitsift.sql.templates import (
    compiled_template,
    environment,
    precompiled_module,
    precompiled_source,
    render,
    source_digest,
)

ROOT = Path(__file__).resolve().parents[1]
if os.environ.get("BITSIFT_REGENERATE_TEMPLATES") == "1":
    write_all()
SQL_TEMPLATES = sql_templates()


@pytest.mark.parametrize("name", SQL_TEMPLATES)
def test_every_sql_template_has_its_current_compiled_module(name: str) -> None:
    path = module_path(name)
    assert path.exists(), f"{path.name} missing: run make (python -m bitsift.sql.precompile)"
    assert path.read_text(encoding="utf-8") == precompiled_source(name), (
        f"{path.name} is stale: run make (python -m bitsift.sql.precompile)")


def test_no_compiled_module_without_its_template() -> None:
    modules = {p.name for p in PRECOMPILED_DIR.glob("*.py")} - {"__init__.py"}
    assert modules == {module_path(n).name for n in SQL_TEMPLATES}
    assert len(SQL_TEMPLATES) >= 10  # the folder was found


def test_the_compiled_modules_are_build_output_that_git_ignores() -> None:
    """Generated code is not source: git tracks only the package's __init__.py, and ignores
    every module make writes."""
    tracked = subprocess.run(["git", "ls-files", str(PRECOMPILED_DIR)], cwd=ROOT,
                             capture_output=True, text=True, check=True).stdout.split()
    assert tracked == ["src/bitsift/sql/precompiled/__init__.py"]
    rank = module_path("rank.sql.j2")
    ignored = subprocess.run(["git", "check-ignore", "-q", str(rank)], cwd=ROOT, check=False)
    assert ignored.returncode == 0, f"{rank} is not ignored by git"


def test_write_all_rewrites_a_stale_module_and_removes_a_stray(tmp_path: Path) -> None:
    path = module_path("sums.sql.j2")
    stray = PRECOMPILED_DIR / "no_such_template.py"
    original = path.read_text(encoding="utf-8")
    try:
        path.write_text(original + "\n# edited\n", encoding="utf-8")
        stray.write_text("SOURCE_DIGEST = ''\n", encoding="utf-8")
        written = write_all()
        assert written == [path]
        assert path.read_text(encoding="utf-8") == original
        assert not stray.exists()
        assert write_all() == []  # nothing changed: nothing written
    finally:
        path.write_text(original, encoding="utf-8")
        stray.unlink(missing_ok=True)


def test_the_command_writes_them(tmp_path: Path) -> None:
    done = subprocess.run([sys.executable, "-m", "bitsift.sql.precompile"], cwd=tmp_path,
                          env={**os.environ, "PYTHONPATH": str(ROOT / "src")},
                          capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    assert "compiled SQL template(s) written to" in done.stderr


def test_sql_templates_render_from_their_compiled_modules() -> None:
    template = compiled_template("rank.sql.j2")
    assert template is not None
    assert template.filename == str(module_path("rank.sql.j2"))
    assert environment(html=True).get_template("report.html.j2").filename.endswith(
        "report.html.j2")


@pytest.mark.parametrize("field", ["SOURCE_DIGEST", "JINJA2_VERSION"])
def test_a_stale_module_is_never_used(monkeypatch: pytest.MonkeyPatch, field: str) -> None:
    """A module compiled from other text (or by a Jinja2 whose generated code the runtime
    was not checked against) is passed over: Jinja2 compiles the template from its text,
    and it renders the same."""
    name = "quantile_ranges.sql.j2"
    context = {"attributes": [{"raw": '"x"', "index": 1}], "source": '"t"'}
    compiled = render(name, **context)
    module = importlib.import_module(precompiled_module(name))
    stale = source_digest("some other text") if field == "SOURCE_DIGEST" else "0.0"
    monkeypatch.setattr(module, field, stale)
    monkeypatch.setattr(templates, "_SQL_TEMPLATES",
                        template_runtime.SqlEnvironment(templates._current_module))
    assert compiled_template(name) is None
    assert render(name, **context) == compiled
    assert "MIN(CAST(\"x\" AS DOUBLE)) AS lo1" in compiled


def test_a_stale_imported_module_makes_jinja2_render_the_whole_template(
        monkeypatch: pytest.MonkeyPatch) -> None:
    """rank.sql.j2's module is current but that of sums.sql.j2, which it imports, is not:
    the runtime stops at the import, and Jinja2 renders rank.sql.j2 from its text instead."""
    from helpers import paste_sql

    current = paste_sql("duckdb", "default")
    module = importlib.import_module(precompiled_module("sums.sql.j2"))
    monkeypatch.setattr(module, "SOURCE_DIGEST", source_digest("some other text"))
    fresh = template_runtime.SqlEnvironment(templates._current_module)
    monkeypatch.setattr(templates, "_SQL_TEMPLATES", fresh)
    assert compiled_template("rank.sql.j2") is not None
    with pytest.raises(template_runtime.TemplateNotFound):
        fresh.get_template("sums.sql.j2")
    assert paste_sql("duckdb", "default") == current
