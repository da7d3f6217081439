"""The Python API in a notebook: data frames as sources, a Ranking as a sequence and an HTML
table, segment columns named as in CSV (issue 21 item 9)."""

from __future__ import annotations

import csv
import io

import duckdb
import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
from sklearn.metrics import mutual_info_score

import bitsift
from bitsift.engines.duckdb_engine import DuckDBEngine
from bitsift.engines.sources import open_source
from bitsift.errors import SourceError, SpecError
from bitsift.output.formatting import render

LN2 = np.log(2)


def _trays(rows: int = 400, seed: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    soil = rng.choice(["peat", "loam", "sand"], rows)
    wilted = np.where((soil == "sand") ^ (rng.random(rows) < 0.2), "yes", "no")
    return pd.DataFrame({"soil": soil, "shelf": rng.integers(0, 4, rows),
                         "light": rng.normal(size=rows), "wilted": wilted})


@pytest.mark.slow
def test_a_pandas_frame_ranks_in_duckdb_as_the_same_table_would() -> None:
    frame = _trays()
    ranking = bitsift.rank(frame, "wilted")
    assert isinstance(ranking, bitsift.Ranking)
    assert ranking.dialect == "duckdb" and ranking.table == "the DataFrame"
    with duckdb.connect() as connection:
        connection.register("trays", frame)
        connection.execute("CREATE TABLE t AS SELECT * FROM trays")
        same = bitsift.rank(connection, "wilted", table="t")
    assert [a.to_dict() for a in ranking] == [a.to_dict() for a in same]  # type: ignore[union-attr]
    # Outside oracle: scikit-learn's mutual_info_score (nats) of the categorical column.
    expected = mutual_info_score(frame["wilted"], frame["soil"]) / LN2
    assert ranking["soil"].information_gain == pytest.approx(expected, abs=1e-9)


@pytest.mark.slow
def test_arrow_tables_and_batches_are_sources_too() -> None:
    frame = _trays()
    expected = bitsift.rank(frame, "wilted")
    assert isinstance(expected, bitsift.Ranking)
    for source in (pa.Table.from_pandas(frame), pa.RecordBatch.from_pandas(frame)):
        ranking = bitsift.rank(source, "wilted")
        assert isinstance(ranking, bitsift.Ranking)
        assert [a.to_dict() for a in ranking] == [a.to_dict() for a in expected]


def test_the_frame_is_scanned_in_place_not_copied() -> None:
    frame = _trays()
    opened = open_source(frame)
    engine = opened.engine
    try:
        assert isinstance(engine, DuckDBEngine)
        # A view over the caller's frame (DuckDB's register), never a table filled with a copy.
        kinds = engine.con.execute(
            "SELECT table_type FROM information_schema.tables").fetchall()
        assert kinds == [("VIEW",)]
        assert engine.con.execute("SELECT count(*) FROM duckdb_tables()").fetchone() == (0,)
        # Run mode's sibling session (the parts of a wide table ranked at once) sees it too.
        sibling = engine.open_sibling(None)
        assert isinstance(sibling, DuckDBEngine)
        count = sibling.con.execute(f"SELECT count(*) FROM {opened.table.sql('duckdb')}")
        assert count.fetchone() == (len(frame),)
        sibling.close()
    finally:
        engine.close()


def test_frames_refuse_a_table_and_case_twins() -> None:
    frame = _trays()
    with pytest.raises(SpecError, match="^table is not used with a data frame$"):
        bitsift.rank(frame, "wilted", table="t")
    twins = frame.assign(Wilted=frame["wilted"])
    with pytest.raises(SourceError, match="collide apart from case or repeat: 'Wilted' "
                                          r"\(read as 'Wilted_1'\)"):
        bitsift.rank(twins, "wilted")
    with pytest.raises(SourceError, match="cannot rank a list"):
        bitsift.rank([1, 2], "wilted")


@pytest.mark.slow
def test_a_ranking_is_a_sized_iterable_with_an_html_table() -> None:
    frame = _trays().assign(**{"<b>name</b>": "x"})
    ranking = bitsift.rank(frame, "wilted")
    assert isinstance(ranking, bitsift.Ranking)
    assert len(ranking) == 4 == len(ranking.attributes)
    assert list(ranking) == ranking.attributes
    assert [a.attribute for a in ranking][0] == "soil"
    page = ranking._repr_html_()
    assert page.startswith("<p>the DataFrame: target &#x27;wilted&#x27;, 400 rows, 2 classes")
    assert page.count("<tr>") == 1 + len(ranking)
    assert "<b>name</b>" not in page and "&lt;b&gt;name&lt;/b&gt;" in page
    segmented = bitsift.rank(frame, "wilted", by="shelf")
    assert isinstance(segmented, bitsift.SegmentedRanking)
    html = segmented._repr_html_()
    assert html.count("<table>") == len(segmented) == 4
    assert "segment shelf = 0" in html


@pytest.mark.slow
def test_segment_columns_of_to_pandas_match_the_csv() -> None:
    # Segment columns named like an attribute key ("kind") or like such a renamed one
    # ("segment_kind") are renamed the same way in both.
    frame = _trays().assign(kind=lambda f: f["shelf"] % 2, segment_kind=lambda f: f["shelf"] // 2)
    segmented = bitsift.rank(frame, "wilted", by="kind,segment_kind,shelf")
    assert isinstance(segmented, bitsift.SegmentedRanking)
    header = next(csv.reader(io.StringIO(render(segmented, "csv"))))
    table = segmented.to_pandas()
    assert list(table.columns) == header
    assert header[:4] == ["segment_kind", "segment_segment_kind", "shelf", "attribute"]
    assert len(table) == sum(len(r) for r in segmented)
    plain = bitsift.rank(frame, "wilted", by="shelf")
    assert isinstance(plain, bitsift.SegmentedRanking)
    assert list(plain.to_pandas().columns)[:2] == ["shelf", "attribute"]


def test_a_frame_gives_the_columns_of_a_statement_that_reads_a_table() -> None:
    frame = _trays()
    with pytest.raises(SpecError, match="^a statement from a data frame needs table naming"):
        bitsift.statement(frame, "wilted", dialect="postgres")
    text = bitsift.statement(frame, "wilted", table="greenhouse.trays", dialect="postgres")
    assert 'FROM "greenhouse"."trays"' in text and "bitsift_frame" not in text
    assert "-- attributes: soil (categorical), shelf (categorical), light (numeric)" in text
