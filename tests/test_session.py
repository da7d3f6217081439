"""The session (issue 17): one opened source and one resolved spec per command, engines used
only through their base class, one helper per job.

Test data is invented here (small DuckDB tables built from ``range``).
"""

from __future__ import annotations

import ast
from pathlib import Path

import duckdb
import pytest

from bitsift.engines.base import Engine
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.sources import open_source

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "src" / "bitsift"


@pytest.fixture
def small_db(tmp_path: Path) -> Path:
    """A DuckDB file: t(a, b, n, s, y) of 240 invented rows."""
    path = tmp_path / "small.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 4 AS a, i % 3 AS b, (i * 7) % 50 + 0.5 AS n, "
                    "i % 2 AS s, (i % 4 < 2) AS y FROM range(240) r(i)")
    return path


# --- engines: run mode uses the base class only ---------------------------------------------------


def _bitsift_imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("bitsift"):
            found.add(node.module)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name.startswith("bitsift"))
    return found


def test_run_mode_knows_no_concrete_engine() -> None:
    engines = {m for m in _bitsift_imports(PACKAGE / "run" / "concurrent.py")
               if m.startswith("bitsift.engines")}
    assert engines == {"bitsift.engines.base"}


def test_a_sibling_session_logs_into_its_engines_statements(small_db: Path) -> None:
    opened = open_source(str(small_db), "t")
    with opened.engine as engine:
        assert engine.can_open_siblings()
        with engine.open_sibling(None) as sibling:
            assert isinstance(sibling, Engine) and sibling is not engine
            sibling.fetch("SELECT 42 AS answer")
        assert any("42" in s for s in engine.statements)


def test_a_callers_connection_gets_no_sibling() -> None:
    con = duckdb.connect()
    engine = DuckDBEngine.wrap(con)
    assert not engine.owned and not engine.can_open_siblings()
    with pytest.raises(TypeError):
        Engine._new_session(engine)


def test_one_helper_for_an_errors_first_line() -> None:
    """The first line of an error's message is taken by errors.first_line only (there were
    five private copies of it)."""
    copies = []
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.FunctionDef) and "splitlines()[0]" in ast.unparse(node) \
                    and "type(error).__name__" in ast.unparse(node):
                copies.append(f"{path.relative_to(PACKAGE)}:{node.name}")
    assert copies == ["errors.py:first_line"]


def _renumbers(node: ast.AST) -> bool:
    """An assignment of ``attribute_index`` computed from another number (a row numbered by
    its own statement mapped to the whole spec); building a row with its position is not."""
    if isinstance(node, ast.Subscript) and isinstance(node.ctx, ast.Store):
        return "'attribute_index'" in ast.unparse(node)
    if isinstance(node, ast.Dict):
        return any(isinstance(key, ast.Constant) and key.value == "attribute_index"
                   and isinstance(value, ast.Subscript | ast.BinOp | ast.Call)
                   for key, value in zip(node.keys, node.values, strict=True))
    return False


def test_parts_are_renumbered_in_one_place() -> None:
    """Rows of a ranking computed in parts get their attribute numbers back in
    parts.merge_parts only (api, concurrent and quantile_counts each had a copy)."""
    renumbering = []
    for path in sorted(PACKAGE.rglob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if not isinstance(node, ast.FunctionDef):
                continue
            if any(_renumbers(n) for n in ast.walk(node)):
                renumbering.append(f"{path.relative_to(PACKAGE)}:{node.name}")
    assert renumbering == ["run/parts.py:merge_parts"]


def test_one_session_runs_the_parts_serially(small_db: Path, monkeypatch: pytest.MonkeyPatch,
                                             ) -> None:
    """On one session (a caller's connection) a table wider than a statement's share is ranked
    in parts one after another, with the numbers of the one-statement ranking. (DuckDB's run
    policy counts each attribute in the client: the ranking statement is forced here.)"""
    from helpers import rank_with

    from bitsift.run import api

    con = duckdb.connect(str(small_db), read_only=True)
    statement = {"run_counts": "statement"}
    whole = rank_with(con, "t", "y", policy=statement)
    monkeypatch.setattr(api, "MAX_ATTRIBUTES_PER_STATEMENT", 1)
    parts = rank_with(con, "t", "y", policy=statement)
    ranking_statements = [s for s in parts.statements if "information_gain" in s]
    # One statement per attribute ranked in SQL (quantile-counted ones get their metrics in
    # the client from their cells): several statements, each of one attribute.
    assert len(ranking_statements) >= 2
    assert all(" AS a1" in s and " AS a2" not in s for s in ranking_statements)
    assert [(a.attribute, a.information_gain, a.cuts) for a in parts.attributes] == [
        (a.attribute, a.information_gain, a.cuts) for a in whole.attributes]
    assert (parts.rows, parts.classes) == (whole.rows, whole.classes)


# --- every command opens its source and resolves its request once -------------------------------


class Calls:
    """How often ``sources.open_source`` and ``spec.resolve`` ran, wherever they were imported."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        import sys

        from bitsift.engines import sources
        from bitsift.spec import rankspec as spec

        self.opened = 0
        self.resolved = 0
        real_open, real_resolve = sources.open_source, spec.resolve

        def counted_open(*args: object, **kwargs: object) -> object:
            self.opened += 1
            return real_open(*args, **kwargs)  # type: ignore[arg-type]

        def counted_resolve(*args: object, **kwargs: object) -> object:
            self.resolved += 1
            return real_resolve(*args, **kwargs)  # type: ignore[arg-type]

        # Every module holding the functions by name, so that no caller escapes the count.
        for name, module in list(sys.modules.items()):
            if not name.startswith("bitsift") or module is None:
                continue
            for attribute, value in list(vars(module).items()):
                if value is real_open:
                    monkeypatch.setattr(module, attribute, counted_open)
                elif value is real_resolve:
                    monkeypatch.setattr(module, attribute, counted_resolve)


def _job(folder: Path, source: Path) -> Path:
    path = folder / "job.toml"
    path.write_text(f'''job = "nightly"
source = "{source}"

[results]
destination = "{folder / 'history.duckdb'}"

[[ranking]]
name = "all"
table = "t"
target = "y"
''', encoding="utf-8")
    return path


def _counts_job(folder: Path, source: Path) -> Path:
    """A job keeping stored counts only (no rankings, no history)."""
    path = folder / "counts_job.toml"
    path.write_text(f'''job = "counting"
source = "{source}"

[counts]
table = "t"
target = "y"
partition = "s"
grain = "value"
into = "{folder / 'job_counts.duckdb'}"
''', encoding="utf-8")
    return path


#: Every command, with how often it opens a source and resolves a request: once each where
#: it reads a source; ``sql`` without a source resolves declared columns; ``drift`` reads only
#: the history (it needs two runs: see ``_two_runs``).
COMMANDS: dict[str, tuple[list[str], tuple[int, int]]] = {
    "rank": (["rank", "{db}", "-t", "t", "-y", "y"], (1, 1)),
    "rank --by": (["rank", "{db}", "-t", "t", "-y", "y", "--by", "s"], (1, 1)),
    "rank --limit --timeout": (["rank", "{db}", "-t", "t", "-y", "y", "--limit", "1",
                                "--timeout", "30"], (1, 1)),
    "check": (["check", "{db}", "-t", "t", "-y", "y"], (1, 1)),
    "sql": (["sql", "{db}", "-t", "t", "-y", "y"], (1, 1)),
    "sql without a source": (["sql", "-t", "t", "-y", "y", "--attributes", "a"], (0, 1)),
    "profile": (["profile", "{db}", "-t", "t", "-y", "y", "--attribute", "a,n"], (1, 1)),
    "report": (["report", "{db}", "-t", "t", "-y", "y", "-o", "{out}"], (1, 1)),
    "report --select": (["report", "{db}", "-t", "t", "-y", "y", "-o", "{out}", "--select", "2",
                         "--include-flagged"], (1, 1)),
    "report --by --select": (["report", "{db}", "-t", "t", "-y", "y", "-o", "{out}", "--by", "s",
                              "--select", "2", "--include-flagged"], (1, 1)),
    "redundancy": (["redundancy", "--include-flagged", "{db}", "-t", "t", "-y", "y"], (1, 1)),
    "select": (["select", "--include-flagged", "{db}", "-t", "t", "-y", "y", "--k", "2"], (1, 1)),
    "run": (["run", "{job}"], (1, 1)),
    "run --dry-run": (["run", "{job}", "--dry-run"], (1, 1)),
    "models": (["models", "{job}", "--out", "{models}"], (1, 1)),
    "drift": (["drift", "{job}"], (0, 0)),
    "counts": (["counts", "{db}", "-t", "t", "-y", "y", "--partition", "s", "--grain", "value",
                "--into", "{counts}"], (1, 1)),
    # Ranked from stored counts (built first, see ``_stored_counts``): nothing to resolve.
    "rank --from-counts": (["rank", "{counts}", "--from-counts"], (1, 0)),
    "report --from-counts": (["report", "{counts}", "--from-counts", "-o", "{out}"], (1, 0)),
    # Two windows (partitions 1 and 0) ranked on one session; exit 3 when they differ.
    "drift --from-counts": (["drift", "{counts}", "--from-counts", "--since", "1", "--until",
                             "2"], (1, 0)),
    # A job with a [counts] section: checked, then counted, on one session.
    "run [counts]": (["run", "{counts_job}"], (1, 1)),
    "run [counts] --dry-run": (["run", "{counts_job}", "--dry-run"], (1, 1)),
    "models [counts]": (["models", "{counts_job}", "--out", "{models}"], (1, 1)),
}


def _stored_counts(db: str, counts: str) -> None:
    """Counts of the small table stored in ``counts``, for ``rank --from-counts``."""
    from click.testing import CliRunner

    from bitsift.cli import cli

    result = CliRunner().invoke(cli, ["counts", db, "-t", "t", "-y", "y", "--partition", "s",
                                      "--grain", "value", "--into", counts])
    assert result.exit_code == 0, result.output


def _two_runs(job: str) -> None:
    """Two runs of the job in its history, for ``drift`` to compare."""
    from click.testing import CliRunner

    from bitsift.cli import cli

    for _ in range(2):
        result = CliRunner().invoke(cli, ["run", job])
        assert result.exit_code == 0, result.output


def test_every_command_is_counted() -> None:
    """A new command joins COMMANDS (or the count would not cover it)."""
    import click

    from bitsift.cli import cli

    listed = cli.list_commands(click.Context(cli))
    assert set(listed) == {args[0] for args, _ in COMMANDS.values()}


@pytest.mark.parametrize("command", list(COMMANDS))
def test_each_command_opens_and_resolves_its_source_once(
        command: str, small_db: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from click.testing import CliRunner

    from bitsift.cli import cli

    places = {"db": str(small_db), "out": str(tmp_path / "report.html"),
              "job": str(_job(tmp_path, small_db)), "models": str(tmp_path / "models"),
              "counts": str(tmp_path / "counts.duckdb"),
              "counts_job": str(_counts_job(tmp_path, small_db))}
    template, expected = COMMANDS[command]
    args = [a.format(**places) for a in template]
    if command == "drift":
        _two_runs(places["job"])
    if "--from-counts" in template:
        _stored_counts(places["db"], places["counts"])
    calls = Calls(monkeypatch)
    result = CliRunner().invoke(cli, args)
    assert result.exit_code in ((0, 3) if command == "drift --from-counts" else (0,)), \
        result.output
    assert (calls.opened, calls.resolved) == expected, command


def test_a_session_passed_in_stays_open_and_is_reused(small_db: Path,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    import bitsift
    from bitsift.analysis.profile import rank_and_profile
    from bitsift.analysis.selection import select_for_runs
    from bitsift.run.session import Session

    calls = Calls(monkeypatch)
    with Session.open(str(small_db), "t") as session:
        ranked = bitsift.rank(session, "y")
        runs = [rank_and_profile(session, "y")]
        select_for_runs(session, runs, "y", k=2, include_flagged=True)
        assert session.engine.fetch("SELECT 1 AS one").rows == [(1,)]  # still open
    assert (calls.opened, calls.resolved) == (1, 1)
    assert runs[0].selection is not None
    assert [a.attribute for a in ranked.attributes] == [
        a.attribute for a in runs[0].ranking.attributes]
    # Each result lists the statements sent for it, not those of earlier calls on the session.
    drilled = runs[0].ranking.statements
    # (sorted: on a file bitsift opened, parts of a ranking run on two sessions at once)
    assert sorted(drilled[:len(ranked.statements)]) == sorted(ranked.statements)
    assert len(drilled) > len(ranked.statements) + 1  # + the drill-down and the pairs
    assert runs[0].selection.statements == drilled[-len(runs[0].selection.statements):]


def test_models_open_each_rankings_source_once(small_db: Path, tmp_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    """`bitsift models` checks a ranking, then writes its statement, on one opened source and
    one resolved request: the job's limit and timeout do not make the statement a second
    request to resolve."""
    from click.testing import CliRunner

    from bitsift.cli import cli

    job = _job(tmp_path, small_db)
    job.write_text(job.read_text(encoding="utf-8") + "limit = 1\ntimeout = 30\n",
                   encoding="utf-8")
    calls = Calls(monkeypatch)
    result = CliRunner().invoke(cli, ["models", str(job), "--out", str(tmp_path / "models")])
    assert result.exit_code == 0, result.output
    assert (calls.opened, calls.resolved) == (1, 1)
    assert "SELECT" in (tmp_path / "models" / "nightly__all.sql").read_text(encoding="utf-8")


# --- provenance: the session records statements and notes once; results are built with them --


def _provenance_assignments(tree: ast.AST) -> list[str]:
    """Assignments to a ``statements`` or ``notes`` attribute (a result stamped after it was
    built), as source text."""
    found = []
    for node in ast.walk(tree):
        targets: list[ast.expr] = []
        if isinstance(node, ast.Assign):
            targets = list(node.targets)
        elif isinstance(node, ast.AugAssign | ast.AnnAssign):
            targets = [node.target]
        for target in targets:
            parts = target.elts if isinstance(target, ast.Tuple) else [target]
            found += [ast.unparse(p) for p in parts
                      if isinstance(p, ast.Attribute) and p.attr in ("statements", "notes")]
    return found


def test_no_result_gets_its_statements_or_notes_after_it_was_built() -> None:
    """Entry points build results with the session's record (Session.record, Record.stamp)
    instead of assigning statements and notes afterwards (there were 12 such assignments)."""
    assigned = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        found = _provenance_assignments(ast.parse(path.read_text(encoding="utf-8")))
        if found:
            assigned[str(path.relative_to(PACKAGE))] = found
    # The engine's own log, shared with the sibling sessions it opens; drift's report is
    # not a ranking's result (it compares history rows).
    # The notes a file source gets when opened (text columns holding numbers) are the
    # engine's own too, set before any result exists.
    assert assigned == {"engines/base.py": ["sibling.statements"],
                        "engines/sources.py": ["engine.notes"],
                        "jobs/drift.py": ["report.notes"]}


def test_each_statement_is_recorded_for_one_result(small_db: Path) -> None:
    """Two rankings on one session: each lists its own statements (the first also those sent
    on opening the session), none twice; together they are every statement sent."""
    import bitsift
    from bitsift.run.session import Session

    with Session.open(str(small_db), "t") as session:
        first = bitsift.rank(session, "y")
        second = bitsift.rank(session, "y", numeric="b")
        sent = list(session.engine.statements)
        assert session.record().statements == []  # nothing left unrecorded
    assert sent == [*first.statements, *second.statements]
    for ranking in (first, second):
        # DuckDB counts each attribute by a bare GROUP BY (run/value_counts.py).
        assert any(s.startswith('SELECT src."a" AS v') for s in ranking.statements)


def test_the_session_notes_come_first_once(small_db: Path) -> None:
    """A ranking's notes are the session's, then its own (fractional weights: no p-value),
    each once, however many results the session has built."""
    import bitsift
    from bitsift.run.session import Session

    with Session.open(str(small_db), "t") as session:
        session.engine.notes.append("a note of the session")
        rankings = [bitsift.rank(session, "y", weight="n", attributes="a,b") for _ in range(2)]
    for ranking in rankings:
        assert ranking.notes[0] == "a note of the session"
        assert len(ranking.notes) == 2 and "weight" in ranking.notes[1]
