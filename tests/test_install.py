"""A non-editable install from a built wheel finds its SQL templates and ranks a table.

The wheel is built from this checkout (``pip wheel --no-deps --no-build-isolation``, the build
backend comes from the test environment) and installed with ``pip --no-deps`` into a fresh
venv made in a temporary folder. The runtime dependencies (duckdb, sqlglot...) are not
downloaded again: a ``.pth`` file in the fresh venv appends the test environment's
site-packages to ``sys.path``. Lines of a ``.pth`` file are only added to the path, the
folders they name are not scanned for ``.pth`` files of their own, so the editable install of
this checkout stays invisible and ``bitsift`` can only come from the wheel.
"""

from __future__ import annotations

import json
import subprocess
import sys
import sysconfig
import zipfile
from pathlib import Path

import duckdb
import pytest

ROOT = Path(__file__).resolve().parents[1]


def run(*args: str | Path, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    done = subprocess.run([str(a) for a in args], capture_output=True, text=True, cwd=cwd,
                          timeout=300, check=False)
    assert done.returncode == 0, f"{args}\n{done.stdout}\n{done.stderr}"
    return done


@pytest.fixture(scope="module")
def wheel(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """The wheel of this checkout, its SQL templates compiled first (as make does)."""
    from bitsift.sql.precompile import write_all

    write_all()
    wheels = tmp_path_factory.mktemp("wheels")
    run(sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "--quiet",
        "--wheel-dir", wheels, ROOT)
    (built,) = wheels.glob("bitsift-*.whl")
    return built


@pytest.fixture(scope="module")
def installed(tmp_path_factory: pytest.TempPathFactory, wheel: Path) -> Path:
    """A fresh venv with the wheel of this checkout installed; returns the venv folder."""
    work = tmp_path_factory.mktemp("install")
    venv = work / "venv"
    run(sys.executable, "-m", "venv", "--without-pip", venv)
    python = venv / "bin" / "python"
    site = Path(run(python, "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])")
                .stdout.strip())
    run(sys.executable, "-m", "pip", "--python", python, "install", "--no-deps", "--quiet",
        "--no-index", wheel)
    (site / "bitsift_test_dependencies.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    return venv


@pytest.fixture(scope="module")
def table_file(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("install_data") / "plots.parquet"
    with duckdb.connect() as con:
        con.execute(
            f"COPY (SELECT i % 4 AS soil, i % 3 AS shade, "
            f"CASE WHEN i % 4 < 2 THEN 'tall' ELSE 'short' END AS growth "
            f"FROM range(240) r(i)) TO '{path}' (FORMAT parquet)"
        )
    return path


@pytest.mark.slow
def test_wheel_ships_templates_and_type_marker(wheel: Path) -> None:
    with zipfile.ZipFile(wheel) as archive:
        names = archive.namelist()
    assert "bitsift/templates/rank.sql.j2" in names
    # The SQL templates compiled ahead (bitsift.sql.templates), one module each.
    assert "bitsift/sql/precompiled/rank.py" in names
    # PEP 561: without py.typed, type checkers ignore the package's annotations.
    assert "bitsift/py.typed" in names


INSPECT = """
import json, sys
import bitsift
from bitsift.sql.templates import compiled_template, templates_dir
ranking = bitsift.rank(sys.argv[1], target="growth")
print(json.dumps({
    "module": bitsift.__file__,
    "templates": str(templates_dir()),
    "rank_template": compiled_template("rank.sql.j2").filename,
    "gains": {a.attribute: a.information_gain for a in ranking.attributes},
}))
"""


@pytest.mark.slow
def test_wheel_install_finds_templates_and_ranks(installed: Path, table_file: Path,
                                                 tmp_path: Path) -> None:
    python = installed / "bin" / "python"
    # Run from an empty folder so the checkout is not on the path by accident.
    done = run(python, "-c", INSPECT, table_file, cwd=tmp_path)
    report = json.loads(done.stdout)
    venv = installed.resolve()
    module, templates = Path(report["module"]).resolve(), Path(report["templates"]).resolve()
    assert venv in module.parents, module
    assert ROOT not in module.parents
    assert venv in templates.parents and (templates / "rank.sql.j2").is_file()
    assert ROOT not in templates.parents
    # The installed templates match their compiled modules, which are used.
    assert Path(report["rank_template"]).resolve() == module.parent / "sql/precompiled/rank.py"
    # soil decides growth (1 bit); shade (period 3, independent over 240 rows) tells nothing.
    assert report["gains"]["soil"] == pytest.approx(1.0, abs=1e-12)
    assert report["gains"]["shade"] == pytest.approx(0.0, abs=1e-9)


@pytest.mark.slow
def test_installed_console_script(installed: Path, table_file: Path, tmp_path: Path) -> None:
    script = installed / "bin" / "bitsift"
    assert script.is_file()
    assert str(installed / "bin" / "python") in script.read_text().splitlines()[0]
    done = run(script, "rank", table_file, "--target", "growth", "--format", "json",
               cwd=tmp_path)
    payload = json.loads(done.stdout)
    assert [a["attribute"] for a in payload["attributes"]] == ["soil", "shade"]
    version = run(script, "--version", cwd=tmp_path)
    assert "0.1.0" in version.stdout
