"""Fixed costs (issue 20): what a command imports, structurally (never timings: those are in
benchmarks/RESULTS.md, "Fixed costs")."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import duckdb
import pytest

ROOT = Path(__file__).resolve().parents[1]
#: Modules no ranking of a DuckDB file needs at import time.
HEAVY = ("pandas", "scipy", "scipy.stats", "numpy", "sqlalchemy", "pyspark", "chdb", "pyarrow",
         "jinja2", "bitsift.jobs.jobfile", "bitsift.output.report", "bitsift.run.discretize")


def _loaded_after(code: str, *args: str) -> set[str]:
    """The HEAVY modules loaded in a fresh interpreter after running ``code``."""
    probe = code + "\nimport json, sys\nprint(json.dumps(sorted(sys.modules)))\n"
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
    done = subprocess.run([sys.executable, "-c", probe, *args], env=env, capture_output=True,
                          text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    modules = set(json.loads(done.stdout.strip().splitlines()[-1]))
    return {m for m in HEAVY if m in modules}


def test_importing_the_command_line_loads_no_heavy_module() -> None:
    assert _loaded_after("import bitsift.cli") == set()


def test_importing_the_package_loads_no_heavy_module() -> None:
    assert _loaded_after("import bitsift") == set()


def _rank_loads(tmp_path: Path, columns: str) -> set[str]:
    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute(f"CREATE TABLE t AS SELECT {columns}, i % 2 AS y FROM range(60) r(i)")
    code = ("import sys\nfrom bitsift.cli import main\n"
            "try:\n    main(['rank', sys.argv[1], '--table', 't', '--target', 'y'])\n"
            "except SystemExit as exit:\n    assert not exit.code, exit.code\n")
    return _loaded_after(code, str(path))


@pytest.mark.slow
@pytest.mark.parametrize("columns", ["i % 3 AS a, (i % 5)::VARCHAR AS b",
                                     "i % 3 AS a, i * 0.5 AS x"])
def test_a_duckdb_ranking_loads_neither_scipy_nor_numpy(tmp_path: Path, columns: str) -> None:
    """The p-values are computed in pure Python (run/chisquare.py), and so are the metrics of
    numeric attributes counted in buckets (metrics.table_row): nothing on the list."""
    assert _rank_loads(tmp_path, columns) == set()


@pytest.mark.slow
def test_a_duckdb_ranking_renders_every_sql_template_from_its_compiled_module(
        tmp_path: Path) -> None:
    """Every SQL template a ranking renders (numeric attributes counted in buckets too) comes
    from its compiled module (bitsift/sql/precompiled/) on bitsift's own runtime: Jinja2 is
    not even imported (HEAVY above), let alone asked to compile."""
    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 3 AS a, i * 0.5 AS x, i % 2 AS y "
                    "FROM range(60) r(i)")
    probe = (
        "import json, sys\nfrom bitsift.cli import main\n"
        "from bitsift.sql import templates\n"
        "try:\n    main(['rank', sys.argv[1], '--table', 't', '--target', 'y'])\n"
        "except SystemExit as exit:\n    assert not exit.code, exit.code\n"
        "used = sorted(templates._SQL_TEMPLATES._templates)\n"
        "print(json.dumps([used, 'jinja2' in sys.modules]))\n")
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
    done = subprocess.run([sys.executable, "-c", probe, str(path)], env=env,
                          capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    used, jinja2_loaded = json.loads(done.stdout.strip().splitlines()[-1])
    assert not jinja2_loaded
    assert {"value_counts.sql.j2", "quantile_cells.sql.j2", "measured.sql.j2"} <= set(used), used


def test_lazy_commands_name_the_commands_they_load() -> None:
    import click

    from bitsift.cli import LAZY_COMMANDS, cli
    from bitsift.cli.lazy_group import load_command

    for name, where in LAZY_COMMANDS.items():
        assert load_command(name, where).name == name
    listed = cli.list_commands(click.Context(cli))
    assert set(LAZY_COMMANDS) <= set(listed) and {"rank", "sql", "check"} <= set(listed)
    with pytest.raises(TypeError):
        load_command("run", "bitsift.cli.cli_jobs:drift_command")


def test_public_names_load_on_first_use() -> None:
    import bitsift

    assert set(bitsift.__all__) == {*bitsift._PUBLIC, "__version__"}
    for name in bitsift.__all__:
        assert getattr(bitsift, name) is not None
    with pytest.raises(AttributeError):
        bitsift.no_such_name  # noqa: B018 - the attribute access is the test


@pytest.mark.slow
def test_the_startup_benchmark_runs_at_a_small_size(tmp_path: Path) -> None:
    """benchmarks/startup.py at a tiny size, so it never rots."""
    out = tmp_path / "startup.json"
    done = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "startup.py"), "--rows", "500",
         "--attributes", "3", "--repeats", "1", "--warmup", "0", "--json", str(out)],
        capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    result = json.loads(out.read_text())
    assert set(result["median_seconds"]) == {
        "python -c pass", "import duckdb", "bitsift: import bitsift.cli", "bitsift: bitsift rank"}
    assert all(len(v) == 1 and v[0] > 0 for v in result["seconds"].values())
    assert set(result["cpu_seconds"]) == set(result["seconds"])
    assert all(len(v) == 1 and v[0] > 0 for v in result["cpu_seconds"].values())
    assert "bitsift: bitsift rank" in done.stdout


@pytest.mark.slow
def test_the_phases_benchmark_runs_at_a_small_size(tmp_path: Path) -> None:
    """benchmarks/startup_phases.py at a tiny size: every phase measured, the ranking's inside
    the process's total."""
    out = tmp_path / "phases.json"
    done = subprocess.run(
        [sys.executable, str(ROOT / "benchmarks" / "startup_phases.py"), "--rows", "500",
         "--attributes", "3", "--repeats", "1", "--json", str(out)],
        capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    medians = json.loads(out.read_text())["median_seconds"]
    assert medians["statements run"] > 0 and medians["statements built"] > 0
    assert 0 < medians["ranking"] < medians["total"]
    assert "statements built" in done.stdout


@pytest.mark.slow
@pytest.mark.parametrize(("table", "code"), [("t", 0), ("no_such_table", 1)])
def test_the_console_skips_python_teardown_only_after_a_finished_ranking(
        tmp_path: Path, table: str, code: int) -> None:
    """``bitsift rank`` ends the process once its output is flushed (atexit handlers do not
    run: Python's teardown took 45-50 ms); an error exits as Python always does."""
    path = tmp_path / "t.duckdb"
    with duckdb.connect(str(path)) as con:
        con.execute("CREATE TABLE t AS SELECT i % 3 AS a, i * 0.5 AS x, i % 2 AS y "
                    "FROM range(60) r(i)")
    probe = ("import atexit, sys\n"
             "atexit.register(lambda: sys.stderr.write('teardown ran\\n'))\n"
             "from bitsift.cli import console\n"
             "sys.argv = ['bitsift', 'rank', sys.argv[1], '--table', sys.argv[2], "
             "'--target', 'y', '--format', 'json']\n"
             "console()\n")
    env = {**os.environ, "PYTHONPATH": str(ROOT / "src")}
    done = subprocess.run([sys.executable, "-c", probe, str(path), table], env=env,
                          capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == code, done.stderr[-2000:]
    if code == 0:
        assert "teardown ran" not in done.stderr
        assert [a["attribute"] for a in json.loads(done.stdout)["attributes"]] == ["a", "x"]
    else:
        assert "teardown ran" in done.stderr
        assert "Error: unknown table" in done.stderr and not done.stdout
