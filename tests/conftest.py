"""Shared fixtures: real PostgreSQL and MariaDB servers, unique schemas, the demo generator.

Server URLs come from environment variables with this machine's defaults. With CI=true an
unreachable server fails the test; elsewhere it skips with the reason.
"""

from __future__ import annotations

import importlib.util
import os
import uuid
from collections.abc import Iterator
from pathlib import Path
from types import ModuleType

import pytest
import sqlalchemy as sa

ROOT = Path(__file__).resolve().parents[1]
POSTGRES_URL = os.environ.get(
    "BITSIFT_TEST_POSTGRES_URL", "postgresql+psycopg://postgres@127.0.0.1:5432/test"
)
MARIADB_URL = os.environ.get(
    "BITSIFT_TEST_MARIADB_URL", "mysql+pymysql://root@127.0.0.1:3306/test"
)
IN_CI = os.environ.get("CI", "").lower() in ("1", "true", "yes")
#: Fixtures that need a server or an optional stack, and the marker a test using them gets.
FIXTURE_MARKERS: dict[str, str] = {
    "postgres_engine": "postgres",
    "mariadb_engine": "mariadb",
    "spark": "spark",
    "chdb_session": "clickhouse",
}
#: Values of an ``engine`` parameter that are servers: the test gets the server's marker.
SERVER_ENGINES: frozenset[str] = frozenset({"postgres", "mariadb"})


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """Mark each test with what it needs, so ``-m "not postgres"`` (``make test-fast``) leaves
    out every test that needs the server, whether it names the marker itself or not: through
    a fixture (also indirectly, e.g. ``pg_schema``) or an ``engine`` parameter."""
    for item in items:
        for marker in sorted(markers_needed(item)):
            item.add_marker(marker)


def markers_needed(item: pytest.Item) -> set[str]:
    used = set(getattr(item, "fixturenames", ()))
    needed = {marker for fixture, marker in FIXTURE_MARKERS.items() if fixture in used}
    callspec = getattr(item, "callspec", None)
    engine = callspec.params.get("engine") if callspec is not None else None
    if isinstance(engine, str) and engine in SERVER_ENGINES:
        needed.add(engine)
    return needed


def require_marker(request: pytest.FixtureRequest, marker: str) -> None:
    """A test that reaches a server through ``request.getfixturevalue`` escapes the markers
    given at collection: it must name the marker itself, or the fast lane would run it."""
    if request.node.get_closest_marker(marker) is None:
        pytest.fail(f"{request.node.nodeid} uses the {marker} server: "
                    f"mark it @pytest.mark.{marker} (or parametrize engine={marker!r})")


def unique_name(prefix: str = "bitsift_t") -> str:
    return f"{prefix}_{uuid.uuid4().hex[:12]}"


def _server(url: str, what: str) -> sa.Engine:
    engine = sa.create_engine(url, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            connection.exec_driver_sql("SELECT 1")
    except Exception as error:  # noqa: BLE001
        where = engine.url.render_as_string(hide_password=True)
        message = f"{what} unreachable at {where}: {error}"
        if IN_CI:
            pytest.fail(message)
        pytest.skip(message)
    return engine


@pytest.fixture(scope="session")
def postgres_engine() -> sa.Engine:
    return _server(POSTGRES_URL, "PostgreSQL")


@pytest.fixture(scope="session")
def mariadb_engine() -> sa.Engine:
    return _server(MARIADB_URL, "MariaDB")


@pytest.fixture
def pg_schema(postgres_engine: sa.Engine, request: pytest.FixtureRequest) -> Iterator[str]:
    """A fresh PostgreSQL schema, dropped afterwards."""
    require_marker(request, "postgres")
    name = unique_name()
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(f'CREATE SCHEMA "{name}"')
    try:
        yield name
    finally:
        with postgres_engine.begin() as connection:
            connection.exec_driver_sql(f'DROP SCHEMA "{name}" CASCADE')


@pytest.fixture
def mariadb_database(mariadb_engine: sa.Engine, request: pytest.FixtureRequest) -> Iterator[str]:
    """A fresh MariaDB database (MariaDB's schemas), dropped afterwards."""
    require_marker(request, "mariadb")
    name = unique_name()
    with mariadb_engine.begin() as connection:
        connection.exec_driver_sql(f"CREATE DATABASE `{name}` CHARACTER SET utf8mb4")
    try:
        yield name
    finally:
        with mariadb_engine.begin() as connection:
            connection.exec_driver_sql(f"DROP DATABASE `{name}`")


def load_module(path: Path, name: str) -> ModuleType:
    spec = importlib.util.spec_from_file_location(name, path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="session")
def demo_module() -> ModuleType:
    """examples/make_demo.py, imported by path."""
    return load_module(ROOT / "examples" / "make_demo.py", "bitsift_demo")


@pytest.fixture(scope="session")
def demo_db(tmp_path_factory: pytest.TempPathFactory, demo_module: ModuleType) -> Path:
    """A small demo database (20,000 rows), generated once per test session."""
    out = tmp_path_factory.mktemp("demo")
    return Path(demo_module.write_demo(out, rows=20_000, seed=7))
