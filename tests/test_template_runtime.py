"""The SQL templates' own runtime (bitsift/sql/template_runtime.py) renders what Jinja2 renders.

Two ways: small templates exercising each construct (loops, macros, imports, filters, tests,
undefined names) compiled by Jinja2 and run on both runtimes, the text or the error compared;
and every SQL template render of a spread of real commands (rank on DuckDB and SQLite with
every kind of attribute and option, pasted statements for every dialect and variant, profile,
redundancy, selection, stored counts) rendered again by Jinja2 and compared.
"""

from __future__ import annotations

import re
import sqlite3
import types
from pathlib import Path
from typing import Any

import duckdb
import jinja2
import pytest
from click.testing import CliRunner
from helpers import GOLDEN_VARIANTS, PASTE_DIALECTS, paste_sql

from bitsift.cli import cli
from bitsift.sql import template_runtime, templates
from bitsift.sql.templates import JINJA2_RUNTIME_IMPORT, RUNTIME_IMPORT


def _both(sources: dict[str, str]) -> tuple[jinja2.Environment,
                                             template_runtime.SqlEnvironment]:
    """Jinja2's environment over ``sources`` (as the SQL one is set up) and the runtime's,
    over the same templates compiled by Jinja2 and imported from the runtime."""
    reference = jinja2.Environment(loader=jinja2.DictLoader(sources),
                                   undefined=jinja2.StrictUndefined, keep_trailing_newline=True)
    modules: dict[str, types.ModuleType] = {}
    for name, source in sources.items():
        code = reference.compile(source, name, name, raw=True, defer_init=True)
        module = types.ModuleType(name)
        module.__file__ = name
        exec(code.replace(JINJA2_RUNTIME_IMPORT, RUNTIME_IMPORT), module.__dict__)  # noqa: S102
        modules[name] = module
    return reference, template_runtime.SqlEnvironment(modules.get)


def _outcome(render: Any, **context: Any) -> tuple[str, str]:
    try:
        return "text", render(**context)
    except Exception as error:  # noqa: BLE001 - the error itself is compared
        return type(error).__name__, str(error)


MACROS = """
{%- macro pair(a, b="B", c=none) -%}[{{ a }}|{{ b }}|{{ c is none }}]{%- endmacro -%}
{%- set greeting = "hi" -%}
"""

CASES: dict[str, tuple[str, dict[str, Any]]] = {
    "loop attributes": (
        "{% for x in xs %}{{ loop.index }}/{{ loop.index0 }}/{{ loop.length }}/"
        "{{ loop.revindex }}/{{ loop.revindex0 }}/{{ loop.first }}/{{ loop.last }}/"
        "{{ loop.depth }}:{{ x }}{% if not loop.last %}, {% endif %}{% endfor %}",
        {"xs": ["a", "b", "c"]}),
    "neighbours": (
        "{% for x in xs %}{{ loop.previtem is defined }}{{ loop.nextitem is defined }}"
        "{% if loop.previtem is defined %}<{{ loop.previtem }}{% endif %}{% endfor %}",
        {"xs": [1, 2, 3]}),
    "empty loop and else": ("{% for x in xs %}{{ x }}{% else %}none{% endfor %}", {"xs": []}),
    "nested loops and outer": (
        "{% for a in xs %}{% set outer = loop %}{% for b in ys %}{{ outer.index }}{{ b }}"
        "{% if not (outer.last and loop.last) %},{% endif %}{% endfor %}{% endfor %}",
        {"xs": [1, 2], "ys": "pq"}),
    "loop filter": ("{% for a in xs if a.keep %}{{ a.name }}{% endfor %}",
                    {"xs": [{"keep": True, "name": "x"}, {"keep": False, "name": "y"}]}),
    "range and arithmetic": ("{% for j in range(1, n + 1) %}c{{ j }}{% endfor %}", {"n": 3}),
    "attribute then item": ("{{ d.items is defined }} {{ d.index }} {{ o.real }}",
                            {"d": {"index": 7}, "o": 3}),
    "filters": ("{{ xs | join(', ') }} {{ xs | length }} {{ xs | join }}",
                {"xs": ["a", "b"]}),
    "tests": ("{{ a is none }} {{ b is none }} {{ c is defined }} {{ zzz is defined }}",
              {"a": None, "b": 0, "c": 1}),
    "concatenation": ("{{ 'x' ~ n ~ none }}", {"n": 2}),
    "set block": ("{% set block %}a{{ n }}b{% endset %}[{{ block }}]", {"n": 1}),
    "list append": ("{% set parts = [] %}{% set _ = parts.append('p' ~ n) %}{{ parts }}",
                    {"n": 1}),
    "macros: defaults, keywords": (
        MACROS + "{{ pair(1) }}{{ pair(1, 2) }}{{ pair(1, c=3) }}{{ pair(b=5, a=4) }}", {}),
    "macro: too many arguments": (MACROS + "{{ pair(1, 2, 3, 4) }}", {}),
    "macro: unknown keyword": (MACROS + "{{ pair(1, d=4) }}", {}),
    "macro: missing argument used": (MACROS + "{{ pair() }}", {}),
    "undefined name": ("{{ nothing }}", {}),
    "undefined name in a loop": ("{% for x in nothing %}{% endfor %}", {}),
    "undefined attribute": ("{{ d.missing }}", {"d": {"a": 1}}),
    "undefined attribute of an object": ("{{ n.missing }}", {"n": 1}),
    "undefined in a condition": ("{% if nothing %}x{% endif %}", {}),
    "undefined compared": ("{% if nothing == 1 %}x{% endif %}", {}),
    "undefined in arithmetic": ("{{ nothing + 1 }}", {}),
    "membership": ("{{ 'a' in xs }} {{ 'z' in xs }}", {"xs": ["a"]}),
    "import as": ('{% import "lib" as lib %}{{ lib.pair("x") }}{{ lib.greeting }}', {}),
    "from import": ('{% from "lib" import pair, greeting %}{{ pair(greeting) }}', {}),
    "from import of a missing name": ('{% from "lib" import nothing %}{{ nothing() }}', {}),
    "whitespace control": ("a\n  {%- if x %}\n  b\n  {%- endif %}\nc\n", {"x": True}),
}


@pytest.mark.parametrize("case", list(CASES))
def test_each_construct_renders_as_jinja2_renders_it(case: str) -> None:
    source, context = CASES[case]
    reference, runtime = _both({"lib": MACROS, "main": source})
    want = _outcome(reference.get_template("main").render, **context)
    got = _outcome(runtime.get_template("main").render, **context)
    assert got == want  # the same text, or the same error with the same message


def test_the_constructs_cover_both_outcomes() -> None:
    """The cases above can fail: some render text, some raise."""
    kinds = set()
    for source, context in CASES.values():
        reference, _ = _both({"lib": MACROS, "main": source})
        kinds.add(_outcome(reference.get_template("main").render, **context)[0])
    assert {"text", "UndefinedError", "TypeError"} <= kinds


def test_an_imported_template_runs_once() -> None:
    _, runtime = _both({"lib": MACROS, "main": '{% import "lib" as lib %}{{ lib.pair(1) }}'})
    main = runtime.get_template("main")
    assert main.render() == main.render() == "[1|B|True]"
    lib = runtime.get_template("lib")
    assert lib._get_default_module() is lib._get_default_module()


def test_a_template_without_a_module_is_not_found() -> None:
    runtime = template_runtime.SqlEnvironment(lambda name: None)
    with pytest.raises(template_runtime.TemplateNotFound):
        runtime.get_template("rank.sql.j2")


def test_the_pinned_jinja2_is_a_supported_one() -> None:
    """The compiled modules are written by the installed Jinja2; the runtime must have been
    checked against its generated code (this file), or every template is compiled again."""
    assert jinja2.__version__ in template_runtime.SUPPORTED_JINJA2
    pinned = re.search(r"^Jinja2==(\S+)$", (Path(__file__).resolve().parents[1]
                                            / "constraints.txt").read_text(), re.M)
    assert pinned is not None and pinned.group(1) in template_runtime.SUPPORTED_JINJA2


def _same(seen: list[tuple[str, dict[str, Any]]], plain: Any) -> set[str]:
    reference = templates.environment()
    for name, variables in seen:
        template = templates.compiled_template(name)
        assert template is not None
        assert plain(template, **variables) == reference.get_template(name).render(
            **variables), name
    return {name for name, _ in seen}


@pytest.mark.slow
def test_every_statement_of_the_commands_renders_as_jinja2_renders_it(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    plain = template_runtime.Template.render
    seen: list[tuple[str, dict[str, Any]]] = []

    def capturing(self: template_runtime.Template, **variables: Any) -> str:
        seen.append((self.name, variables))
        return plain(self, **variables)

    monkeypatch.setattr(template_runtime.Template, "render", capturing)
    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute(
            "CREATE TABLE t AS SELECT i % 6 AS a, ('v' || (i % 4))::VARCHAR AS b, "
            "(i % 2) * 3 + hash(i) % 1000 / 250.0 AS x, "
            "DATE '2026-01-01' + (i % 40)::INTEGER AS d, (i % 7) * 1.5 AS w, "
            "['p', 'q', 'r'][1 + i % 3] AS seg, "
            "CASE WHEN i % 11 = 0 THEN NULL ELSE i % 2 END AS y FROM range(240) r(i)")
    lite = tmp_path / "t.sqlite"
    with sqlite3.connect(lite) as con:
        con.execute("CREATE TABLE t (a INTEGER, b TEXT, x REAL, y INTEGER)")
        con.executemany("INSERT INTO t VALUES (?, ?, ?, ?)",
                        [(i % 3, f"v{i % 5}", i * 0.37 % 11, i % 2) for i in range(120)])
    runner = CliRunner()
    commands = [
        ["rank", str(path), "-t", "t", "-y", "y"],
        ["rank", str(path), "-t", "t", "-y", "y", "--by", "seg", "--weight", "w"],
        ["rank", str(path), "-t", "t", "-y", "y", "--binning", "best-split"],
        ["rank", str(path), "-t", "t", "-y", "y", "--binning", "mdl", "--missing", "drop"],
        ["rank", str(path), "-t", "t", "-y", "y", "--binning", "equal-width",
         "--where", "a <> 1", "--date-part", "d=month"],
        ["sql", str(path), "-t", "t", "-y", "y", "--dialect", "postgres"],
        ["profile", str(path), "-t", "t", "-y", "y", "--attribute", "b"],
        ["redundancy", str(path), "-t", "t", "-y", "y"],
        ["select", str(path), "-t", "t", "-y", "y", "--k", "2"],
        ["rank", f"sqlite:///{lite}", "-t", "t", "-y", "y"],
        ["sql", str(path), "-t", "t", "-y", "y", "--dialect", "mysql", "--counts",
         "--partition", "d", "--grain", "week"],
        ["counts", str(path), "-t", "t", "-y", "y", "--partition", "d",
         "--into", str(tmp_path / "counts.duckdb")],
        ["rank", str(tmp_path / "counts.duckdb"), "--from-counts", "--since", "2026-01-05"],
    ]
    for args in commands:
        done = runner.invoke(cli, args)
        assert done.exit_code == 0, (args, done.output)
    for dialect in PASTE_DIALECTS:
        for variant in GOLDEN_VARIANTS:
            paste_sql(dialect, variant)
    names = _same(seen, plain)
    # Every SQL template is rendered above, but the three macro libraries the others import.
    every = {p.name for p in (Path(__file__).resolve().parents[1] / "templates").glob("*.sql.j2")}
    assert every - names == {"bounds.sql.j2", "measured.sql.j2", "sums.sql.j2"}
    assert {"rank.sql.j2", "bounds_query.sql.j2", "histogram.sql.j2", "pairs.sql.j2",
            "profile.sql.j2", "quantile_ranges.sql.j2", "quantile_cells.sql.j2",
            "quantile_splits.sql.j2", "value_counts.sql.j2", "stored_counts.sql.j2"} <= names, names
