"""bitsift's PostgreSQL transactions raise work_mem for themselves only (SET LOCAL).

Why: the planner estimates the groups of a binned column from the raw column's distinct values
and, at the default 4MB, sorts millions of rows to group a few dozen (benchmarks/RESULTS.md).
What must hold: the ranking's statements run with the raised setting, and a connection the
caller hands in comes back with its own setting untouched.
"""

from __future__ import annotations

import sqlalchemy as sa

import bitsift


def test_work_mem_is_raised_only_inside_bitsifts_transactions(
        postgres_engine: sa.Engine, pg_schema: str) -> None:
    with postgres_engine.begin() as connection:
        connection.exec_driver_sql(
            f'CREATE TABLE "{pg_schema}".t AS SELECT mod(i, 3)::text AS y, mod(i, 7) AS a, '
            "sin(i) AS x FROM generate_series(1, 500) AS g(i)")
    with postgres_engine.connect() as connection:
        connection.exec_driver_sql("SET work_mem = '5MB'")
        connection.commit()
        ranking = bitsift.rank(connection, target="y", table=f"{pg_schema}.t")
        assert "SET LOCAL work_mem = '256MB'" in ranking.statements
        # The statements ran inside bitsift's transaction; the caller's session kept 5MB.
        assert connection.exec_driver_sql("SHOW work_mem").scalar() == "5MB"
        assert {s.attribute for s in ranking.attributes} == {"a", "x"}
