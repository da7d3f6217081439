"""What the benchmark compares. Each contender runs in a worker process and returns its metrics.

(a) ``bitsift``        bitsift.rank on the table, as a user calls it.
(b) ``export``         the analyst's export path: the table read into pandas, metrics in NumPy.
                       ``reader="dbapi"`` is the plain read (``pandas.read_sql``, Spark
                       ``toPandas``, chdb's DataFrame output); ``reader="arrow"`` the engine's
                       columnar export (DuckDB ``.df()``, Spark with Arrow, chdb ``ArrowTable``);
                       ``reader="fetch"`` a bare ``cursor.fetchall()``, where there is no
                       columnar export (connections.py).
(c) ``handwritten``    the quantile query for the numeric columns, then K ``GROUP BY attribute,
                       target`` queries run one after the other, metrics from the counts in NumPy.
(d) ``floor``          one query reading every referenced column once: ``SELECT MIN(a1), …``.
(e) ``bound``          the counting bound: one bare ``GROUP BY column, y`` per attribute over the
    session pool, numeric columns by a fixed bucket expression (no cut point searched).
    ``strategy``       bitsift's own builder with one count strategy forced (strategy comparison).

Every contender opens its own connection inside the timed region, like a fresh ``bitsift rank``
(Spark's session is started before the clock: connections.prepare). The SQL here is written by
hand on purpose (it is what the analyst would type); the only names in it are the generated
table's own. What differs per engine is in connections.py.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import Any

import numpy as np
from connections import (
    bitsift_source,
    cursor,
    identifier,
    quantile_cuts,
    read_frame,
    session_pool,
    table_sql,
)
from datagen import TARGET, AttributeDef, Dataset

#: Per attribute: metric name -> value. What the contenders must agree on.
Metrics = dict[str, dict[str, float]]
METRIC_NAMES: tuple[str, ...] = (
    "information_gain",
    "gain_ratio",
    "symmetric_uncertainty",
    "g_statistic",
    "dof",
    "distinct",
)
BINS = 10
PROBABILITIES: tuple[float, ...] = tuple(round(j / BINS, 12) for j in range(1, BINS))
#: One statement per ranking; one statement per attribute, on one session or on a pool;
#: or the attributes split into one statement per session of the pool.
STRATEGIES: tuple[str, ...] = (
    "grouping_sets",
    "union_all",
    "cross_join",
    "per_attribute_sequential",
    "per_attribute_concurrent",
    "split_concurrent",
    "counted_concurrent",
)


def _metrics_from_table(table: np.ndarray) -> dict[str, float]:
    """The metrics of one attribute from its value × class count table (NumPy reference)."""
    from bitsift.run import reference

    values = reference.metrics(table)
    return {
        "information_gain": values["information_gain"],
        "gain_ratio": values["gain_ratio"],
        "symmetric_uncertainty": values["symmetric_uncertainty"],
        "g_statistic": values["g_statistic"],
        "dof": values["dof"],
        "distinct": values["distinct"],
    }


def _finite_sorted(values: Sequence[Any]) -> list[float]:
    """Cut points as bitsift uses them: duplicates and non-finite values dropped."""
    return sorted({float(v) for v in values if v is not None and np.isfinite(float(v))})


# (a) ------------------------------------------------------------------------------------------


def run_bitsift(dataset: Dataset) -> Metrics:
    """``bitsift.rank`` exactly as a user calls it."""
    import bitsift

    source, table = bitsift_source(dataset)
    ranking = bitsift.rank(source, target=TARGET, table=table)
    return _scores(ranking.attributes)


# (b) ------------------------------------------------------------------------------------------


def _read_frame(dataset: Dataset, reader: str) -> Any:
    columns = ", ".join(identifier(n, dataset) for n in [TARGET, *_names(dataset)])
    return read_frame(dataset, f"SELECT {columns} FROM {table_sql(dataset)}", reader)


def _codes(series: Any) -> tuple[np.ndarray, int]:
    """Integer codes of a column, NULL its own value (as bitsift's default ``missing=category``)."""
    import pandas as pd

    codes, uniques = pd.factorize(series, use_na_sentinel=False)
    return codes, len(uniques)


def _binned(series: Any) -> Any:
    """Quantile bins as bitsift cuts them: exact (linear) quantiles, cut[k-1] <= x < cut[k]."""
    import pandas as pd

    values = series.to_numpy(dtype=float, na_value=np.nan)
    present = ~np.isnan(values)
    cuts = _finite_sorted(np.quantile(values[present], PROBABILITIES)) if present.any() else []
    bins = np.searchsorted(np.asarray(cuts), values, side="right").astype(float)
    bins[np.isnan(values)] = np.nan
    return pd.Series(bins)


def run_export(dataset: Dataset, reader: str = "dbapi") -> Metrics:
    """Read every column into pandas, then count and compute in NumPy (factorize + bincount)."""
    frame = _read_frame(dataset, reader)
    y_present = frame[TARGET].notna().to_numpy()
    frame = frame[y_present]
    y_codes, classes = _codes(frame[TARGET])
    metrics: Metrics = {}
    for attribute in dataset.layout():
        column = frame[attribute.name]
        if attribute.kind == "numeric":
            column = _binned(column)
        x_codes, values = _codes(column)
        counts = np.bincount(x_codes * classes + y_codes, minlength=values * classes)
        metrics[attribute.name] = _metrics_from_table(counts.reshape(values, classes))
    return metrics


# (c) ------------------------------------------------------------------------------------------


def _names(dataset: Dataset) -> list[str]:
    return [a.name for a in dataset.layout()]


def _bin_expression(column: str, cuts: Sequence[float]) -> str:
    whens = " ".join(f"WHEN {column} < {c!r} THEN {k}" for k, c in enumerate(cuts))
    return f"CASE WHEN {column} IS NULL THEN NULL {whens} ELSE {len(cuts)} END"


def _count_query(dataset: Dataset, attribute: AttributeDef, cuts: Sequence[float] | None) -> str:
    column = identifier(attribute.name, dataset)
    value = column if cuts is None else _bin_expression(column, cuts)
    target = identifier(TARGET, dataset)
    return (
        f"SELECT {value} AS v, {target} AS y, COUNT(*) AS n FROM {table_sql(dataset)}"
        f" WHERE {target} IS NOT NULL GROUP BY 1, 2"
    )


def _table_from_counts(rows: Sequence[tuple[Any, Any, int]]) -> np.ndarray:
    values = {v: i for i, v in enumerate(dict.fromkeys(r[0] for r in rows))}
    classes = {c: j for j, c in enumerate(dict.fromkeys(r[1] for r in rows))}
    table = np.zeros((len(values), len(classes)))
    for value, klass, n in rows:
        table[values[value], classes[klass]] += n
    return table


def run_handwritten(dataset: Dataset) -> Metrics:
    """The quantile query, then one GROUP BY per attribute, sequentially; metrics in NumPy."""
    attributes = dataset.layout()
    numeric = [a for a in attributes if a.kind == "numeric"]
    metrics: Metrics = {}
    with cursor(dataset) as one:
        found = quantile_cuts(one, dataset, numeric, PROBABILITIES)
        cuts = {name: _finite_sorted(values) for name, values in found.items()}
        for attribute in attributes:
            one.execute(_count_query(dataset, attribute, cuts.get(attribute.name)))
            table = _table_from_counts(one.fetchall())
            metrics[attribute.name] = _metrics_from_table(table)
    return metrics


# (d) ------------------------------------------------------------------------------------------


def run_floor(dataset: Dataset) -> Metrics:
    """Read every referenced column once: the cost of the scan alone."""
    columns = [TARGET, *_names(dataset)]
    minima = ", ".join(f"MIN({identifier(n, dataset)})" for n in columns)
    with cursor(dataset) as one:
        if dataset.engine == "duckdb":
            # DuckDB answers a bare MIN from its per-segment statistics without reading a value;
            # switched off, the query decodes every value once, which is the floor we want.
            one.execute("SET disabled_optimizers = 'statistics_propagation'")
        one.execute(f"SELECT {minima} FROM {table_sql(dataset)}")
        one.fetchall()
    return {}


# (e) ------------------------------------------------------------------------------------------

#: (e) groups a numeric column by this fixed bucket of its value: no quantile is searched.
BOUND_BUCKETS_PER_UNIT = 16


def _bound_query(dataset: Dataset, attribute: AttributeDef) -> str:
    column = identifier(attribute.name, dataset)
    if attribute.kind == "numeric":
        column = f"FLOOR({column} * {BOUND_BUCKETS_PER_UNIT})"
    target = identifier(TARGET, dataset)
    return (f"SELECT {column} AS v, {target} AS y, COUNT(*) AS n FROM {table_sql(dataset)}"
            " GROUP BY 1, 2")


def run_counting_bound(dataset: Dataset, workers: int = 2) -> Metrics:
    """The least counting work we found any exact in-SQL ranking to need: one bare GROUP BY per
    attribute (none cheaper per attribute on DuckDB, not even the GROUPING SETS statement; see
    RESULTS.md), on ``workers`` sessions at once like bitsift, and nothing else: no quantile
    cut points searched (numeric columns fall into fixed buckets), no metrics computed in SQL.

    Metrics (NumPy) come back for the categorical attributes only, to check the counts.
    """
    import queue
    from concurrent.futures import ThreadPoolExecutor

    attributes = dataset.layout()
    with session_pool(dataset, workers) as sessions:
        idle: queue.Queue[Any] = queue.Queue()
        for one in sessions:
            idle.put(one)

        def count(attribute: AttributeDef) -> list[tuple[Any, Any, int]]:
            one = idle.get()
            try:
                one.execute(_bound_query(dataset, attribute))
                return one.fetchall()
            finally:
                idle.put(one)

        with ThreadPoolExecutor(max_workers=len(sessions)) as pool:
            counted = list(pool.map(count, attributes))
    return {
        a.name: _metrics_from_table(_table_from_counts([r for r in rows if r[1] is not None]))
        for a, rows in zip(attributes, counted, strict=True)
        if a.kind == "categorical"
    }


# strategies -----------------------------------------------------------------------------------


def _scores(attributes: Any) -> Metrics:
    return {
        s.attribute: {
            "information_gain": s.information_gain,
            "gain_ratio": s.gain_ratio,
            "symmetric_uncertainty": s.symmetric_uncertainty,
            "g_statistic": s.g_statistic,
            "dof": float(s.dof),
            "distinct": float(s.distinct),
        }
        for s in attributes
    }


def run_strategy(dataset: Dataset, strategy: str, workers: int = 2) -> Metrics:
    """A ranking through bitsift's own builder, with the run-mode strategy forced.

    Every strategy but the last finds the quantile cut points first and bins the rows in the
    ranking statement (``run_quantile`` "buckets"): ``grouping_sets``, ``union_all``,
    ``cross_join``: one boundaries pre-pass, one statement (:func:`bitsift.run.api.run_ranking`).
    ``per_attribute_*``: one job per attribute (its boundaries, then its statement) on one
    session, or on ``workers`` sessions at once; ``split_concurrent``: the attributes cut into
    ``workers`` jobs run at once (:func:`bitsift.run.concurrent.fetch_records_in_parts`).
    ``counted_concurrent``: the quantile-binned attributes counted from (bucket, class) cells
    on one session, the others ranked on the other (:mod:`bitsift.run.quantile_counts`).
    """
    from bitsift.engines.sources import open_source
    from bitsift.run import concurrent
    from bitsift.run.api import MAX_ATTRIBUTES_PER_STATEMENT, make_options, run_ranking
    from bitsift.run.readout import read_ranking
    from bitsift.spec.rankspec import resolve

    opened = open_source(*bitsift_source(dataset))
    with opened.engine as engine:
        columns = engine.columns(opened.table, opened.display)
        spec = resolve(make_options(TARGET), columns, opened.table, opened.display,
                       engine.caps.sqlglot_dialect)
        counted = strategy == "counted_concurrent"
        _override_run(engine, **_one_statement(),
                      run_quantile="counted" if counted else "buckets")
        if strategy in ("grouping_sets", "union_all", "cross_join"):
            engine.caps = replace(engine.caps, count_strategy=strategy)
            return _scores(run_ranking(engine, spec).attributes)
        # max_size 1: one part per attribute; otherwise as many parts as sessions.
        sessions, max_size = {
            "per_attribute_sequential": (1, 1),
            "per_attribute_concurrent": (workers, 1),
            "split_concurrent": (workers, MAX_ATTRIBUTES_PER_STATEMENT),
            "counted_concurrent": (workers, MAX_ATTRIBUTES_PER_STATEMENT),
        }[strategy]
        records, cuts = concurrent.fetch_records_in_parts(engine, spec, sessions, max_size)
        return _scores(read_ranking(records, spec, cuts, dialect=engine.caps.name).attributes)


def _run_fields() -> dict[str, Any]:
    """The fields of the dataclass holding run mode's choices: the run policy, or in versions
    before it, the capability entry."""
    try:
        from bitsift.engines.policy import RunPolicy
    except ImportError:
        from bitsift.sql.dialects import Capabilities as RunPolicy  # type: ignore[assignment]
    return RunPolicy.__dataclass_fields__


def _override_run(engine: Any, **fields: Any) -> None:
    """Override run mode's choices on an open engine (its policy, or its capabilities)."""
    if hasattr(engine, "policy"):
        engine.policy = replace(engine.policy, **fields)
    else:
        engine.caps = replace(engine.caps, **fields)


def _one_statement() -> dict[str, Any]:
    """The run-mode override that keeps bitsift's run mode to one statement."""
    return {"run_sessions": 1} if "run_sessions" in _run_fields() else {}


CONTENDERS: dict[str, Callable[..., Metrics]] = {
    "bitsift": run_bitsift,
    "export": run_export,
    "handwritten": run_handwritten,
    "floor": run_floor,
    "bound": run_counting_bound,
    "strategy": run_strategy,
}
