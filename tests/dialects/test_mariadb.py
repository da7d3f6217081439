"""MariaDB: capability entry and what its paste-ready SQL must (not) say.

MySQL's SQL (sqlglot's mysql dialect), no GROUPING() at all, utf8mb4_general_ci merging 'a'/'A'
and 'x'/'x ' in GROUP BY: UNION ALL, window quantiles, text grouped as BINARY. The timeout is a
per-statement prefix (SET STATEMENT max_statement_time = s FOR ...), leaving no session state.
"""

from __future__ import annotations

import sqlalchemy as sa
from conftest import MARIADB_URL
from helpers import fill_sqlalchemy, invalid_constructs, paste_sql, random_dataset

import bitsift
from bitsift.dialects import capabilities

DIALECT = "mariadb"


def test_capability_entry() -> None:
    caps = capabilities(DIALECT)
    assert caps.count_strategy == "union_all"
    assert caps.exact_key_type == "BINARY"
    assert caps.timeout_prefix == "SET STATEMENT max_statement_time = {seconds} FOR "
    assert caps.read_only_statement == "SET TRANSACTION READ ONLY"
    assert caps.executed_in_tests


def test_paste_sql() -> None:
    sql = paste_sql(DIALECT, "default")
    assert invalid_constructs(sql, DIALECT) == []
    assert sql.replace("dialect mariadb", "dialect mysql") == paste_sql("mysql", "default")


def test_statements_sent_carry_read_only_and_timeout(mariadb_database: str) -> None:
    dataset = random_dataset(seed=41, rows=60)
    url = MARIADB_URL
    writer = sa.create_engine(url, poolclass=sa.pool.NullPool)
    with writer.begin() as connection:
        fill_sqlalchemy("mariadb", connection, [mariadb_database, "t"], dataset)
    writer.dispose()
    ranking = bitsift.rank(url, table=f"{mariadb_database}.t", target="y", timeout=30)
    selects = [s for s in ranking.statements if "SELECT" in s]
    assert selects and all(
        s.startswith("SET STATEMENT max_statement_time = 30.000000 FOR ") for s in selects)
    assert ranking.statements.count("SET TRANSACTION READ ONLY") == len(selects)
