"""Secrets: a database password never appears in bitsift's output, logs, error messages, history
rows, reports or ``--debug`` traces, and may come from an environment variable instead of the URL.

A MariaDB user with a password full of URL-special characters reads a scratch database; a
PostgreSQL role with a password owns the results destination (this server trusts local
connections, so the role's password is not checked, but it travels in the URL all the same).
Both spellings of each password, as typed and URL-encoded, are searched for everywhere.
tests/test_safety.py covers URL masking and the plain wrong-password and environment cases;
this file covers every other surface.
"""

from __future__ import annotations

import logging
import os
import re
import subprocess
import sys
import textwrap
import uuid
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from urllib.parse import quote

import pytest
import sqlalchemy as sa
from conftest import MARIADB_URL, POSTGRES_URL, unique_name
from helpers import run_main

import bitsift
from bitsift.errors import BitsiftError

pytestmark = [pytest.mark.mariadb, pytest.mark.postgres]


@dataclass(frozen=True)
class Account:
    """A database login whose password must stay hidden."""

    user: str
    password: str
    #: The scratch database (MariaDB) or schema (PostgreSQL) it may use.
    place: str

    @property
    def secrets(self) -> tuple[str, str]:
        return self.password, quote(self.password, safe="")

    def url(self, base: str, *, password: str | None = None, database: str | None = None
            ) -> str:
        """``base`` with this user (and ``password``, default its own), URL-encoded."""
        url = sa.make_url(base)
        secret = self.password if password is None else password
        url = url.set(username=self.user, password=secret or None)
        if database is not None:
            url = url.set(database=database)
        return url.render_as_string(hide_password=False)


def _run(connection: sa.Connection, statement: str) -> None:
    connection.exec_driver_sql(statement, execution_options={"no_parameters": True})


def _password() -> str:
    # URL-special characters: each must be URL-encoded, and is then hidden in both spellings.
    return f"Pw{uuid.uuid4().hex[:12]}%@:/?#&=+"


@pytest.fixture(scope="module")
def reader(mariadb_engine: sa.Engine) -> Iterator[Account]:
    """A MariaDB user with a password and its own database holding ``t`` (60 rows) and ``big``
    (300,000 rows, for timeouts)."""
    account = Account(f"bitsift_s_{uuid.uuid4().hex[:8]}", _password(), unique_name())
    with mariadb_engine.begin() as connection:
        _run(connection, f"CREATE DATABASE `{account.place}`")
        _run(connection, f"CREATE TABLE `{account.place}`.t AS SELECT seq % 4 AS a, "
                         "seq % 3 AS b, seq % 2 AS y FROM seq_1_to_60")
        _run(connection, f"CREATE TABLE `{account.place}`.big AS SELECT seq % 7 AS a, "
                         "(seq * 13) % 1000 AS b, seq % 3 AS y FROM seq_1_to_300000")
        for host in ("%", "localhost"):
            _run(connection, f"CREATE USER '{account.user}'@'{host}' "
                             f"IDENTIFIED BY '{account.password}'")
            _run(connection, f"GRANT ALL ON `{account.place}`.* TO '{account.user}'@'{host}'")
    try:
        yield account
    finally:
        with mariadb_engine.begin() as connection:
            for host in ("%", "localhost"):
                _run(connection, f"DROP USER '{account.user}'@'{host}'")
            _run(connection, f"DROP DATABASE `{account.place}`")


@pytest.fixture(scope="module")
def writer(postgres_engine: sa.Engine) -> Iterator[Account]:
    """A PostgreSQL role with a password that may create tables in its own schema."""
    account = Account(f"bitsift_s_{uuid.uuid4().hex[:8]}", _password(), unique_name())
    literal = account.password.replace("'", "''")
    with postgres_engine.begin() as connection:
        _run(connection, f"CREATE ROLE {account.user} LOGIN PASSWORD '{literal}'")
        _run(connection, f'CREATE SCHEMA "{account.place}" AUTHORIZATION {account.user}')
    try:
        yield account
    finally:
        with postgres_engine.begin() as connection:
            _run(connection, f'DROP SCHEMA "{account.place}" CASCADE')
            _run(connection, f"DROP ROLE {account.user}")


def assert_hidden(account: Account, *texts: str) -> None:
    for text in texts:
        for secret in account.secrets:
            assert secret not in text, f"password found in: {text[:300]!r}"


def cli(*args: str, debug_logging: bool = False, env: dict[str, str] | None = None
        ) -> subprocess.CompletedProcess[str]:
    """``bitsift ARGS`` in a fresh interpreter; with ``debug_logging``, every Python logger
    (SQLAlchemy's engine and pool, the drivers) writes at DEBUG to stderr."""
    setup = ("import logging; logging.basicConfig(level=logging.DEBUG); "
             "logging.getLogger('sqlalchemy').setLevel(logging.DEBUG)\n") if debug_logging else ""
    return subprocess.run(
        [sys.executable, "-c", setup + "from bitsift.cli import main; main()", *args],
        capture_output=True, text=True, timeout=180, check=False, env=env,
    )


# --- output and logs of a working ranking -------------------------------------------------------


def test_ranking_output_and_debug_trace_in_a_real_process(reader: Account) -> None:
    url = reader.url(MARIADB_URL, database=reader.place)
    done = cli("--debug", "rank", url, "--table", "t", "--target", "y", debug_logging=True)
    assert done.returncode == 0, done.stderr
    assert "-- sent to mariadb:" in done.stderr  # --debug printed the statements
    assert "sqlalchemy.engine" in done.stderr and "SELECT" in done.stderr  # logs on
    assert_hidden(reader, done.stdout, done.stderr)


@pytest.mark.parametrize("fmt", ["json", "csv", "markdown"])
def test_ranking_output_formats(reader: Account, fmt: str, capsys: pytest.CaptureFixture[str],
                                caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.DEBUG, logger="sqlalchemy")
    url = reader.url(MARIADB_URL, database=reader.place)
    done = run_main(capsys, "--debug", "rank", url, "--table", "t", "--target", "y",
                    "--format", fmt)
    assert done.code == 0, done.err
    assert "SELECT" in caplog.text
    assert_hidden(reader, *done.texts, caplog.text)


def test_library_results_and_debug_logs(reader: Account, caplog: pytest.LogCaptureFixture,
                                        capsys: pytest.CaptureFixture[str]) -> None:
    caplog.set_level(logging.DEBUG)
    caplog.set_level(logging.DEBUG, logger="sqlalchemy")  # SQLAlchemy's loggers start at WARN
    url = reader.url(MARIADB_URL, database=reader.place)
    ranking = bitsift.rank(url, table="t", target="y")
    assert ranking.rows == 60
    sql = bitsift.statement(url, table="t", target="y", dialect="postgres")
    check = bitsift.check(url, table="t", target="y")
    assert check.ok
    # A caller's Engine with SQLAlchemy's own echo, at its most verbose.
    engine = sa.create_engine(url, echo="debug", echo_pool="debug", poolclass=sa.pool.NullPool)
    try:
        echoed = bitsift.rank(engine, table="t", target="y")
    finally:
        engine.dispose()
        # echo added stdout handlers to SQLAlchemy's loggers: take them away again.
        for name in ("sqlalchemy.engine.Engine", "sqlalchemy.pool.impl.NullPool"):
            for handler in list(logging.getLogger(name).handlers):
                logging.getLogger(name).removeHandler(handler)
    out, err = capsys.readouterr()
    assert "SELECT" in caplog.text + out + err  # the logs did record the statements
    assert_hidden(reader, caplog.text, out, err, sql, repr(ranking), str(ranking.to_dict()),
                  repr(echoed), repr(check))


# --- error messages -----------------------------------------------------------------------------


def _failures(account: Account) -> dict[str, tuple[str, dict[str, Any]]]:
    """A failing request per surface: URL and options, and a word the error must contain."""
    good = account.url(MARIADB_URL, database=account.place)
    return {
        "wrong password": (account.url(MARIADB_URL, password=account.password + "x",
                                       database=account.place),
                           {"table": "t", "target": "y"}),
        "no such database": (account.url(MARIADB_URL, database=account.place + "_none"),
                             {"table": "t", "target": "y"}),
        "refused connection": (account.url("mysql+pymysql://h@127.0.0.1:1/x",
                                           database=account.place),
                               {"table": "t", "target": "y"}),
        "unknown table": (good, {"table": "nosuch", "target": "y"}),
        "unknown column": (good, {"table": "t", "target": "nosuch"}),
        "bad predicate": (good, {"table": "t", "target": "y", "where": "sleep(1) = 0"}),
        "timeout": (good, {"table": "big", "target": "y", "timeout": 0.001}),
        "no table": (good, {"target": "y"}),
    }


EXPECTED_WORDS = {
    "wrong password": "Access denied", "no such database": "Access denied",
    "refused connection": "cannot connect", "unknown table": "unknown table",
    "unknown column": "unknown column", "bad predicate": "sleep",
    "timeout": "--timeout", "no table": "table is required",
}


def test_error_messages_of_the_library(reader: Account, caplog: pytest.LogCaptureFixture
                                       ) -> None:
    caplog.set_level(logging.DEBUG)
    caplog.set_level(logging.DEBUG, logger="sqlalchemy")
    for case, (url, options) in _failures(reader).items():
        with pytest.raises(BitsiftError) as caught:
            bitsift.rank(url, **options)
        message = str(caught.value)
        assert EXPECTED_WORDS[case] in message, (case, message)
        assert_hidden(reader, message, repr(caught.value))
    assert_hidden(reader, caplog.text)


@pytest.mark.parametrize("case", sorted(EXPECTED_WORDS))
def test_error_messages_and_tracebacks_of_the_cli(reader: Account, case: str,
                                                  capsys: pytest.CaptureFixture[str],
                                                  caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.DEBUG)
    caplog.set_level(logging.DEBUG, logger="sqlalchemy")
    url, options = _failures(reader)[case]
    args = ["rank", url]
    for key, value in options.items():
        args += [f"--{key}", str(value)]
    plain = run_main(capsys, *args)
    assert plain.code == 1
    assert plain.err.startswith("Error: ") and EXPECTED_WORDS[case] in plain.err
    traced = run_main(capsys, "--debug", *args)
    assert traced.code == 1
    assert "Traceback" in traced.err and EXPECTED_WORDS[case] in traced.err
    assert_hidden(reader, *plain.texts, *traced.texts, caplog.text)


def test_unparsable_url_with_debug(reader: Account, capsys: pytest.CaptureFixture[str]) -> None:
    url = f"mysql+pymysql://{reader.user}:{quote(reader.password, safe='')}@127.0.0.1:port/x"
    done = run_main(capsys, "--debug", "rank", url, "--table", "t", "--target", "y")
    assert done.code == 1 and "not a valid database URL" in done.err
    assert_hidden(reader, *done.texts)


# --- history rows, reports, job output ----------------------------------------------------------


def _job(tmp_path: Path, source: str, destination: str, table: str) -> Path:
    path = tmp_path / "secret_job.toml"
    path.write_text(textwrap.dedent(f"""\
        job = "secrets"
        source = "{source}"

        [results]
        destination = "{destination}"
        table = "{table}"

        [[ranking]]
        name = "t"
        table = "t"
        target = "y"
        """), encoding="utf-8")
    return path


def test_history_rows_reports_and_job_output(reader: Account, writer: Account, tmp_path: Path,
                                             capsys: pytest.CaptureFixture[str],
                                             caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.DEBUG)
    caplog.set_level(logging.DEBUG, logger="sqlalchemy")
    source = reader.url(MARIADB_URL, database=reader.place)
    destination = writer.url(POSTGRES_URL)
    job = _job(tmp_path, source, destination, f"{writer.place}.history")
    texts = []
    report = tmp_path / "report.html"
    for args in (["run", str(job), "--dry-run"], ["run", str(job), "--run-id", "one"],
                 ["run", str(job), "--run-id", "two"], ["drift", str(job)],
                 ["models", str(job), "--out", str(tmp_path / "models")],
                 ["report", source, "--table", "t", "--target", "y", "--out", str(report)],
                 ["profile", source, "--table", "t", "--target", "y", "--attribute", "a"]):
        done = run_main(capsys, "--debug", *args)
        assert done.code == 0, (args, done.err)
        texts += done.texts
    engine = sa.create_engine(POSTGRES_URL, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            rows = connection.exec_driver_sql(
                f'SELECT * FROM "{writer.place}".history').all()
    finally:
        engine.dispose()
    assert len(rows) == 2 * 2  # two runs, two attributes
    texts += [repr(row) for row in rows]
    texts += [p.read_text(encoding="utf-8") for p in (tmp_path / "models").iterdir()]
    texts += [report.read_text(encoding="utf-8"), caplog.text]
    for account in (reader, writer):
        assert_hidden(account, *texts)


def test_history_write_failure_hides_the_destination_password(
        reader: Account, writer: Account, tmp_path: Path,
        capsys: pytest.CaptureFixture[str]) -> None:
    source = reader.url(MARIADB_URL, database=reader.place)
    # A port nobody listens on: the results destination cannot be reached.
    destination = writer.url("postgresql+psycopg://h@127.0.0.1:1/test")
    job = _job(tmp_path, source, destination, "history")
    for args in (["run", str(job)], ["--debug", "run", str(job)]):
        done = run_main(capsys, *args)
        assert done.code == 1
        assert "127.0.0.1" in done.err
        assert_hidden(writer, *done.texts)


# --- passwords from the environment -------------------------------------------------------------


def test_password_from_the_environment_end_to_end(reader: Account, writer: Account,
                                                  tmp_path: Path,
                                                  monkeypatch: pytest.MonkeyPatch,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.delenv("BITSIFT_PASSWORD", raising=False)
    monkeypatch.delenv("BITSIFT_RESULTS_PASSWORD", raising=False)
    bare = reader.url(MARIADB_URL, password="", database=reader.place)
    assert f"{reader.user}@" in bare
    # Without the variable the server refuses the user...
    refused = run_main(capsys, "rank", bare, "--table", "t", "--target", "y")
    assert refused.code == 1 and "Access denied" in refused.err
    # ...with it, the same URL works, and the password shows nowhere.
    monkeypatch.setenv("BITSIFT_PASSWORD", reader.password)
    done = run_main(capsys, "--debug", "rank", bare, "--table", "t", "--target", "y",
                    "--format", "json")
    assert done.code == 0, done.err
    assert '"rows": 60' in done.out
    assert_hidden(reader, *done.texts)
    # The results destination's password has its own variable.
    monkeypatch.setenv("BITSIFT_RESULTS_PASSWORD", writer.password)
    job = _job(tmp_path, bare, writer.url(POSTGRES_URL, password=""), f"{writer.place}.h2")
    ran = run_main(capsys, "run", str(job))
    assert ran.code == 0, ran.err
    assert "wrote 2 rows" in ran.out
    assert_hidden(reader, *ran.texts)
    assert_hidden(writer, *ran.texts)
    # A wrong password from the variable is refused, and not shown either.
    wrong = reader.password + "x"
    monkeypatch.setenv("BITSIFT_PASSWORD", wrong)
    failed = run_main(capsys, "rank", bare, "--table", "t", "--target", "y")
    assert failed.code == 1 and "Access denied" in failed.err
    assert wrong not in failed.err and quote(wrong, safe="") not in failed.err
    # And in a real process, where the variable comes from the environment it started with.
    env = {**os.environ, "BITSIFT_PASSWORD": reader.password}
    real = cli("rank", bare, "--table", "t", "--target", "y", env=env)
    assert real.returncode == 0, real.stderr
    assert_hidden(reader, real.stdout, real.stderr)


# --- every form a password can take in a URL (issue 16, item 9) ---------------------------------


@dataclass(frozen=True)
class PasswordForm:
    """One way of giving a password: in the URL's user part (as written there), in a query key,
    or through the environment variables. ``weak`` passwords are ordinary text ('p', '127'):
    those cannot be searched for, so their URL forms are searched for instead."""

    name: str
    password: str
    #: How the password is written in the user part; None: not there.
    written: str | None = None
    #: The query key that carries it instead.
    key: str | None = None
    #: Through BITSIFT_PASSWORD / BITSIFT_RESULTS_PASSWORD instead.
    environment: bool = False
    #: The source opens and ranks (else every command fails, masked all the same).
    works: bool = True
    weak: bool = False


def _forms() -> list[PasswordForm]:
    tag = uuid.uuid4().hex[:10]
    special = f"Pc{tag}%@:/?#&=+"
    forms = [
        PasswordForm("plain", f"Plain{tag}", written=f"Plain{tag}"),
        PasswordForm("percent-encoded", special, written=quote(special, safe="")),
        PasswordForm("spaces", f"Sp {tag} x", written=f"Sp {tag} x"),
        PasswordForm("raw-at", f"At{tag}/@x", written=f"At{tag}/@x", works=False),
        PasswordForm("raw-specials", f"Rs{tag}:/#?", written=f"Rs{tag}:/#?"),
        PasswordForm("environment", f"Env{tag}", environment=True),
        PasswordForm("one-letter", "p", written="p", weak=True),
        PasswordForm("host-substring", "127", written="127", weak=True),
        PasswordForm("driver-name", "pymysql", written="pymysql", weak=True),
    ]
    # password= is PyMySQL's own argument: it logs in. The others are refused by the driver
    # (passwd= too: deprecated, and this suite turns warnings into errors), and must not be
    # shown in that refusal either.
    for key in ("password", "passwd", "pwd", "token", "secret", "access_token", "api_key"):
        forms.append(PasswordForm(f"query-{key}", f"Q{key}{tag}", key=key,
                                  works=key == "password"))
    return forms


FORMS = _forms()


def _form_url(form: PasswordForm, base: str, user: str, database: str) -> str:
    """``base``'s scheme and host with ``user``, ``database`` and the password as ``form``
    writes it (built by hand: a URL builder would encode what the form keeps raw)."""
    url = sa.make_url(base)
    host = f"{url.host}:{url.port}" if url.port else str(url.host)
    userinfo = f"{user}:{form.written}" if form.written is not None else user
    query = f"?{form.key}={quote(form.password, safe='')}" if form.key else ""
    return f"{url.drivername}://{userinfo}@{host}/{database}{query}"


@pytest.fixture(scope="module")
def form_users(mariadb_engine: sa.Engine) -> Iterator[dict[str, Account]]:
    """One MariaDB user per password form, each reading one database holding ``t``."""
    place = unique_name()
    accounts = {f.name: Account(f"bitsift_f_{uuid.uuid4().hex[:8]}", f.password, place)
                for f in FORMS}
    with mariadb_engine.begin() as connection:
        _run(connection, f"CREATE DATABASE `{place}`")
        _run(connection, f"CREATE TABLE `{place}`.t AS SELECT seq % 4 AS a, seq % 3 AS b, "
                         "seq % 2 AS y FROM seq_1_to_60")
        for account in accounts.values():
            literal = account.password.replace("\\", "\\\\").replace("'", "\\'")
            for host in ("%", "localhost"):
                _run(connection, f"CREATE USER '{account.user}'@'{host}' "
                                 f"IDENTIFIED BY '{literal}'")
                _run(connection, f"GRANT SELECT ON `{place}`.* TO '{account.user}'@'{host}'")
    try:
        yield accounts
    finally:
        with mariadb_engine.begin() as connection:
            for account in accounts.values():
                for host in ("%", "localhost"):
                    _run(connection, f"DROP USER '{account.user}'@'{host}'")
            _run(connection, f"DROP DATABASE `{place}`")


def assert_masked(form: PasswordForm, *texts: str) -> None:
    """No spelling of the password anywhere, no masked text glued to letters (a password
    replaced inside a word spells itself out: '***sycopg', '***.0.0.1'); weak passwords are
    looked for where a URL or a key=value would hold them."""
    spellings = {form.password, quote(form.password, safe=""), quote(form.password)}
    if form.written:
        spellings.add(form.written)
    for text in texts:
        assert not re.search(r"[A-Za-z0-9.]\*\*\*|\*\*\*[A-Za-z0-9.]", text), (
            f"{form.name}: masking glued to text in {text[:500]!r}")
        for spelling in spellings:
            if form.weak:
                pattern = rf"[:=]{re.escape(spelling)}(?:[@&\s'\"]|$)"
                assert not re.search(pattern, text), f"{form.name}: found in {text[:500]!r}"
            else:
                assert spelling not in text, f"{form.name}: found in {text[:500]!r}"


@pytest.mark.parametrize("form", FORMS, ids=[f.name for f in FORMS])
def test_every_password_form_is_masked_by_every_command(
        form: PasswordForm, form_users: dict[str, Account], pg_schema: str, tmp_path: Path,
        monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str],
        caplog: pytest.LogCaptureFixture) -> None:
    caplog.set_level(logging.DEBUG)
    caplog.set_level(logging.DEBUG, logger="sqlalchemy")
    account = form_users[form.name]
    if form.environment:
        monkeypatch.setenv("BITSIFT_PASSWORD", form.password)
        monkeypatch.setenv("BITSIFT_RESULTS_PASSWORD", form.password)
    source = _form_url(form, MARIADB_URL, account.user, account.place)
    # This PostgreSQL server trusts local connections: any password opens the destination.
    destination = _form_url(form, POSTGRES_URL, "postgres", "test")
    unreachable = _form_url(form, "postgresql+psycopg://h@127.0.0.1:1/test", "postgres", "test")
    job = _job(tmp_path, source, destination, f"{pg_schema}.history")
    (tmp_path / "failing").mkdir()
    failing = _job(tmp_path / "failing", source, unreachable, "history")
    report = tmp_path / "report.html"
    ranking = ["-t", "t", "-y", "y"]
    commands = {
        "rank": ["rank", source, *ranking],
        "sql": ["sql", source, *ranking],
        "check": ["check", source, *ranking],
        "report": ["report", source, *ranking, "--out", str(report)],
        "run --dry-run": ["run", str(job), "--dry-run"],
        "run": ["run", str(job), "--run-id", "r1"],
        "run again": ["run", str(job), "--run-id", "r2"],
        "drift": ["drift", str(job)],
        "run, unreachable destination": ["run", str(failing)],
    }
    texts: list[str] = []
    codes: dict[str, int] = {}
    errors: list[str] = []
    for label, args in commands.items():
        for debug in ([], ["--debug"]):
            done = run_main(capsys, *debug, *args)
            codes[label] = done.code
            texts += done.texts
            errors += [done.err] if done.code else []
    if form.name == "raw-at":
        # Refused before anything is sent (SQLAlchemy would take the password's tail for
        # the host, and the driver would print it), for sources and destinations alike.
        assert all("write it as %40" in error for error in errors), errors
    destination_works = form.works and form.key in (None, "password")
    expected = {"rank", "sql", "check", "report"} if form.works else set()
    if destination_works:
        expected |= {"run --dry-run", "run", "run again", "drift"}
    assert {k for k, v in codes.items() if v == 0} == expected, codes
    if destination_works:
        dry = run_main(capsys, "run", str(job), "--dry-run")
        shown = ("postgres:***@127.0.0.1" if form.written else f"?{form.key}=***" if form.key
                 else "postgres@127.0.0.1")
        assert shown in dry.out, dry.out  # the destination is shown, masked
        rows = _history_rows(pg_schema)
        assert len(rows) == 2 * 2  # two runs, two attributes
        texts += [*dry.texts, *(repr(row) for row in rows), report.read_text(encoding="utf-8")]
    assert_masked(form, *texts, caplog.text)


def _history_rows(schema: str) -> list[Any]:
    engine = sa.create_engine(POSTGRES_URL, poolclass=sa.pool.NullPool)
    try:
        with engine.connect() as connection:
            return list(connection.exec_driver_sql(f'SELECT * FROM "{schema}".history').all())
    finally:
        engine.dispose()
