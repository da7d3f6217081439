"""The ready-to-schedule script of a model (``bitsift models --insert``): create the job's
history table if it is missing, with the DDL ``bitsift run`` uses, and append the model's rows,
in one transaction where the dialect has one.

DDL per dialect: SQLAlchemy's own dialects (PostgreSQL, MySQL, MariaDB, SQLite, SQL Server,
Oracle) get the CREATE TABLE a run sends through SQLAlchemy to such a destination; every
other dialect gets the DuckDB results file's CREATE TABLE, spelled in the dialect by sqlglot.
Only the dialects built into SQLAlchemy are used, so the script does not depend on the
drivers installed where it is generated.
"""

from __future__ import annotations

import sqlalchemy as sa
from sqlglot import exp

from bitsift.engines.sources import parse_table_name
from bitsift.jobs.history import COLUMN_NAMES
from bitsift.jobs.history_duckdb import create_table_sql
from bitsift.jobs.history_sqlalchemy import create_table, history_table
from bitsift.sql.dialects import Capabilities
from bitsift.sql.sqlbuild import Statement

#: bitsift dialect -> the SQLAlchemy dialect (built into SQLAlchemy) whose DDL a run uses.
SQLALCHEMY_DDL: dict[str, str] = {
    "postgres": "postgresql",
    "mysql": "mysql",
    "mariadb": "mariadb",
    "sqlite": "sqlite",
    "tsql": "mssql",
    "oracle": "oracle",
}


def create_sql(table_name: str, caps: Capabilities) -> str:
    """CREATE TABLE of the history table ``table_name`` (``[schema.]table``) for ``caps``,
    preceded by the dialect's guard where it has no IF NOT EXISTS."""
    table = parse_table_name(table_name, caps.sqlglot_dialect)
    backend = SQLALCHEMY_DDL.get(caps.name)
    if backend is None:
        text = create_table_sql(table, caps.sqlglot_dialect, caps.table_options)
    else:
        dialect = sa.engine.make_url(f"{backend}://").get_dialect()()
        ddl = create_table(history_table(table.name, table.db or None), dialect)
        # A script runs every night: IF NOT EXISTS also where a run checks first instead
        # (Oracle 23ai has it), unless the dialect guards the CREATE otherwise.
        ddl.if_not_exists = caps.create_guard is None
        text = str(ddl.compile(dialect=dialect)).strip()
    if caps.create_guard:
        name = exp.Literal.string(".".join(p for p in (table.db, table.name) if p))
        text = caps.create_guard.format(table=name.sql(caps.sqlglot_dialect)) + "\n" + text
    return "\n".join(line.rstrip() for line in text.splitlines())


def insert_sql(table_name: str, select: Statement, caps: Capabilities) -> str:
    """INSERT INTO the history table (its columns named) the rows of ``select``."""
    table = parse_table_name(table_name, caps.sqlglot_dialect)
    insert = exp.insert(select.tree.copy(), table,
                        columns=[exp.to_identifier(n, quoted=True) for n in COLUMN_NAMES])
    return insert.sql(caps.sqlglot_dialect, pretty=True)


def script(table_name: str, select: Statement, caps: Capabilities) -> str:
    """The statements of the script, each ended by a semicolon and a new line."""
    statements = [create_sql(table_name, caps), insert_sql(table_name, select, caps)]
    if caps.script_transaction is not None:
        begin, commit = caps.script_transaction
        statements = [*([begin] if begin else []), *statements, commit]
    return "".join(f"{s};\n" for s in statements)
