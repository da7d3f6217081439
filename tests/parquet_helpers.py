"""The tests' random tables as Parquet files, for the engines that read Parquet (DuckDB, Spark,
ClickHouse): one file, so every engine ranks the very same rows."""

from __future__ import annotations

import decimal
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
from helpers import Dataset

#: Column names that need quoting in every dialect (a reserved word, a backtick and a double quote
#: inside a name), for :meth:`helpers.Dataset.renamed`.
AWKWARD_NAMES: dict[str, str] = {"word": 'wo`rd"s', "level": "select"}

#: Parquet types of the logical column types of a :class:`helpers.Dataset`.
ARROW_TYPES: dict[str, pa.DataType] = {
    "text": pa.string(),
    "integer": pa.int64(),
    "float": pa.float64(),
    "decimal": pa.decimal128(10, 2),
}


def write_parquet(dataset: Dataset, path: Path) -> Path:
    """Write ``dataset`` to ``path`` (DECIMAL(10, 2) values rounded to cents, as in the DDL)."""
    arrays = {}
    for name, logical in dataset.columns:
        values = dataset.column(name)
        if logical == "decimal":
            cents = decimal.Decimal("0.01")
            values = [None if v is None else decimal.Decimal(str(v)).quantize(cents)
                      for v in values]
        arrays[name] = pa.array(values, ARROW_TYPES[logical])
    pq.write_table(pa.table(arrays), path)
    return path
