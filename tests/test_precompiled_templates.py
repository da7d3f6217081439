"""The SQL templates' compiled modules (bitsift/sql/precompiled/, see bitsift.sql.templates):
one per template, each exactly what Jinja2 compiles from the template's current text, used
instead of compiling it, and never used once the template's text differs.

After changing a SQL template (or moving Jinja2's pinned version), regenerate them with
``BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py``.
"""

from __future__ import annotations

import importlib
import os
from pathlib import Path

import pytest

from bitsift.sql import templates
from bitsift.sql.templates import (
    environment,
    precompiled_module,
    precompiled_source,
    source_digest,
    templates_dir,
)

REGENERATE = os.environ.get("BITSIFT_REGENERATE_TEMPLATES") == "1"
PRECOMPILED = Path(templates.__file__).parent / "precompiled"
SQL_TEMPLATES = sorted(p.name for p in templates_dir().glob("*.sql.j2"))


def _module_path(name: str) -> Path:
    return PRECOMPILED / f"{name.removesuffix('.sql.j2')}.py"


@pytest.mark.parametrize("name", SQL_TEMPLATES)
def test_every_sql_template_has_its_current_compiled_module(name: str) -> None:
    path = _module_path(name)
    text = precompiled_source(name)
    if REGENERATE:
        path.write_text(text, encoding="utf-8")
    assert path.exists(), f"{path.name} missing: run with BITSIFT_REGENERATE_TEMPLATES=1"
    assert path.read_text(encoding="utf-8") == text, (
        f"{path.name} is stale: regenerate with BITSIFT_REGENERATE_TEMPLATES=1")


def test_no_compiled_module_without_its_template() -> None:
    modules = {p.name for p in PRECOMPILED.glob("*.py")} - {"__init__.py"}
    assert modules == {_module_path(n).name for n in SQL_TEMPLATES}
    assert len(SQL_TEMPLATES) >= 10  # the folder was found


def test_the_sql_environment_loads_the_compiled_module() -> None:
    env = environment()
    env.cache.clear()  # type: ignore[union-attr]
    template = env.get_template("rank.sql.j2")
    assert template.filename == str(_module_path("rank.sql.j2"))
    assert environment(html=True).get_template("report.html.j2").filename.endswith(
        "report.html.j2")


def test_a_stale_module_is_never_used(monkeypatch: pytest.MonkeyPatch) -> None:
    """A module compiled from other text (or by another Jinja2) is passed over: the
    template is compiled from its text, and renders the same."""
    env = environment()
    name = "quantile_ranges.sql.j2"
    context = {"attributes": [{"raw": '"x"', "index": 1}], "source": '"t"'}
    env.cache.clear()  # type: ignore[union-attr]
    compiled = env.get_template(name)
    module = importlib.import_module(precompiled_module(name))
    monkeypatch.setattr(module, "SOURCE_DIGEST", source_digest("some other text"))
    env.cache.clear()  # type: ignore[union-attr]
    fresh = env.get_template(name)
    env.cache.clear()  # type: ignore[union-attr]
    assert compiled.filename == str(_module_path(name))
    assert fresh.filename == str(templates_dir() / name)
    assert fresh.render(**context) == compiled.render(**context)
    assert "MIN(CAST(\"x\" AS DOUBLE)) AS lo1" in fresh.render(**context)
