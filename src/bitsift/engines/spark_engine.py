"""Apache Spark SQL: bitsift's statements run through ``spark.sql``; only aggregates are collected.

A caller's :class:`pyspark.sql.SparkSession` (with a catalog table) or DataFrame is used as
it is and never stopped; ``bitsift rank --engine spark`` starts a session of its own. A
DataFrame or Parquet path is read through a uniquely named temporary view, dropped at close,
so no path or user text is ever spliced into SQL.

Spark has no statement timeout. bitsift tags the jobs of its own statement
(``SparkContext.addJobTag``, with interrupt-on-cancel) and a timer cancels that tag
(``cancelJobsWithTag``) when ``--timeout`` expires, and again every half second until the
statement returns: a cancel that lands while Spark is still planning finds no job yet. Job
tags add to a caller's job group and tags instead of replacing them, and both thread-local
properties are restored afterwards. (``SparkSession.interruptTag`` found no operation to
interrupt on a classic Spark 4.3 session; a Spark Connect session, which has no
SparkContext, uses it.)
"""

from __future__ import annotations

import contextlib
import re
import threading
import uuid
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sqlglot import exp

from bitsift.engines.base import Engine, FetchResult, query_error, unreadable_table
from bitsift.engines.masking import mask_text
from bitsift.errors import MissingDriverError, SourceError, SpecError, first_line, install_extra
from bitsift.spec.schema import Column, Family, family_by_class
from bitsift.sql.dialects import capabilities

if TYPE_CHECKING:  # pragma: no cover - typing only; pyspark is an optional extra
    from pyspark.sql import DataFrame, SparkSession

#: Settings of the sessions bitsift starts itself (the CLI's ``--engine spark``).
LOCAL_SESSION_CONFIG: dict[str, str] = {
    "spark.app.name": "bitsift",
    "spark.ui.enabled": "false",
    "spark.ui.showConsoleProgress": "false",
}

#: What ``--engine spark`` accepts as SOURCE together with ``--table``: a master URL.
_MASTER = re.compile(r"^(local(\[[0-9*]+(,\s*[0-9]+)?\])?|yarn|[a-z][a-z0-9+.-]*://\S+)$")
#: The temporary views bitsift registers (left out of "did you mean" suggestions).
_OWN_VIEW = re.compile(r"^bitsift_[0-9a-f]{32}$")
#: The thread-local property behind SparkContext.setInterruptOnCancel.
_INTERRUPT_PROPERTY = "spark.job.interruptOnCancel"
#: Repeat the interrupt this often after the deadline until the statement returns.
_INTERRUPT_RETRY_SECONDS = 0.5


def import_pyspark() -> Any:
    """The ``pyspark.sql`` module, or :class:`MissingDriverError` naming the extra."""
    try:
        with _quiet_pyspark():
            import pyspark.sql
    except ImportError:
        raise MissingDriverError(
            f"the Spark engine needs pyspark: {install_extra('spark')} (and Java 17+)"
        ) from None
    return pyspark.sql


@contextmanager
def _quiet_pyspark() -> Iterator[None]:
    # pyspark 4.x warns on import that it "does not yet fully support pandas >= 3.0.0";
    # bitsift never converts to pandas through Spark, so the warning is noise for its users.
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="PySpark does not yet fully support pandas")
        yield


def spark_family(data_type: Any) -> Family:
    """The bitsift type family of a ``pyspark.sql.types.DataType``."""
    from pyspark.sql import types as t

    return family_by_class(data_type, (
        (t.BooleanType, "boolean"), (t.IntegralType, "integer"), (t.DecimalType, "decimal"),
        (t.FractionalType, "float"), ((t.StringType, t.VarcharType, t.CharType), "text"),
        (t.DateType, "date"), ((t.TimestampType, t.TimestampNTZType), "timestamp"),
    ))


@dataclass
class SparkEngine(Engine):
    """Runs bitsift's statements on a SparkSession and collects their (small) results."""

    session: SparkSession | None = None
    #: bitsift started the session: stop it at close.
    owned: bool = False
    #: Temporary views bitsift registered (dropped at close).
    views: list[str] = field(default_factory=list)

    @classmethod
    def wrap(cls, session: SparkSession) -> SparkEngine:
        """A session the caller keeps ownership of (never stopped by bitsift)."""
        return cls(caps=capabilities("spark"), session=session, owned=False)

    @classmethod
    def start(cls, master: str | None = None) -> SparkEngine:
        """A session for the CLI: a new local one, or the process's active session.

        ``master`` (``local[2]``, ``spark://host:7077``...) is used only when no session is
        active; without it, Spark's own default applies (``local[*]``, or what
        ``spark-defaults.conf`` / ``PYSPARK_SUBMIT_ARGS`` say).
        """
        sql = import_pyspark()
        active = sql.SparkSession.getActiveSession()
        if active is not None:
            engine = cls(caps=capabilities("spark"), session=active, owned=False)
            running = _master_of(active)
            if master and running and running != master:
                engine.notes.append(f"a Spark session is already active in this process "
                                    f"(master {running}); it was used instead of {master}")
            return engine
        builder = sql.SparkSession.builder
        for key, value in LOCAL_SESSION_CONFIG.items():
            builder = builder.config(key, value)
        if master:
            builder = builder.master(master)
        try:
            with _quiet_pyspark():
                session = builder.getOrCreate()
        except Exception as error:  # noqa: BLE001 - Java missing, bad master, ...
            # Spark's message may quote the master URL, and with it its credentials.
            raise SourceError(f"cannot start a Spark session: {mask_text(first_line(error))}"
                              ) from None
        # Every Spark error reaches the user as a bitsift message; the JVM's log lines
        # (a JSON record per failed analysis) would repeat it on stderr.
        session.sparkContext.setLogLevel("OFF")
        return cls(caps=capabilities("spark"), session=session, owned=True)

    @property
    def spark(self) -> SparkSession:
        assert self.session is not None, "engine is closed"
        return self.session

    def register(self, frame: DataFrame) -> exp.Table:
        """A DataFrame as a uniquely named temporary view, quoted by sqlglot."""
        name = f"bitsift_{uuid.uuid4().hex}"
        frame.createTempView(name)
        self.views.append(name)
        return exp.Table(this=exp.to_identifier(name, quoted=True))

    def read_parquet(self, path: str) -> exp.Table:
        """A Parquet file, directory or glob (local or any URL Spark reads), as a temporary view.

        The path goes to ``spark.read.parquet`` as a Python string, never into SQL text.
        """
        local = "://" not in path  # s3a://, hdfs://... are Spark's to find
        if local and not any(ch in path for ch in "*?[") and not Path(path).exists():
            raise SourceError(f"no such file or directory: {path}")
        try:
            frame = self.spark.read.parquet(path)
        except Exception as error:  # noqa: BLE001 - AnalysisException and friends
            raise SourceError(f"Spark cannot read {path} as Parquet: {first_line(error)}") from None
        return self.register(frame)

    def catalog_columns(self, table: exp.Expression, display: str) -> list[Column]:
        query = exp.select(exp.Star()).from_(table).limit(0).sql("spark")
        try:
            schema = self.spark.sql(query).schema  # analysed eagerly; no job runs
        except Exception as error:  # noqa: BLE001
            if _condition(error) == "TABLE_OR_VIEW_NOT_FOUND":
                raise self.missing_table(display) from None
            raise unreadable_table(display, error) from None
        return [
            Column(name=f.name, family=spark_family(f.dataType),
                   type_name=f.dataType.simpleString())
            for f in schema.fields
        ]

    def _table_names(self) -> list[str]:
        try:
            tables = self.spark.catalog.listTables()
        except Exception:  # noqa: BLE001 - a catalog we may not list: no suggestion
            tables = []
        names = [t.name for t in tables if not _OWN_VIEW.match(t.name)]
        return names + [f"{t.namespace[-1]}.{t.name}" for t in tables if t.namespace]

    def fetch(self, sql: str) -> FetchResult:
        # No statement timeout in Spark: a timer interrupts this statement's tagged jobs.
        self.statements.append(sql)
        tag = f"bitsift-{uuid.uuid4().hex}"
        fired = threading.Event()
        done = threading.Event()
        timer: threading.Thread | None = None
        if self.timeout:
            timer = threading.Thread(target=self._interrupt_after,
                                     args=(tag, self.timeout, fired, done), daemon=True)
        restore = self._tag_jobs(tag)
        try:
            if timer is not None:
                timer.start()
            frame = self.spark.sql(sql)
            names = list(frame.columns)
            rows = [tuple(row) for row in frame.collect()]
        except Exception as error:  # noqa: BLE001 - pyspark and py4j errors alike
            if fired.is_set():
                raise self.timeout_error() from None
            raise query_error("Spark", first_line(error)) from None
        finally:
            done.set()
            restore()
            if timer is not None:
                timer.join()
        if fired.is_set():
            # The statement finished between the deadline and the interrupt.
            raise self.timeout_error()
        return FetchResult(columns=names, rows=rows)

    def _interrupt_after(self, tag: str, seconds: float, fired: threading.Event,
                         done: threading.Event) -> None:
        if done.wait(seconds):
            return
        fired.set()
        while not done.is_set():
            # The session may be going away; keep trying until the statement returns.
            with contextlib.suppress(Exception):
                context = _spark_context(self.spark)
                if context is not None:
                    context.cancelJobsWithTag(tag)
                else:
                    self.spark.interruptTag(tag)
            done.wait(_INTERRUPT_RETRY_SECONDS)

    def _tag_jobs(self, tag: str) -> Callable[[], None]:
        """Tag the jobs this thread starts (interrupting tasks on cancel); returns the undo."""
        context = _spark_context(self.spark)
        if context is None:  # Spark Connect: session-level operation tags
            self.spark.addTag(tag)
            return lambda: self.spark.removeTag(tag)
        previous = context.getLocalProperty(_INTERRUPT_PROPERTY)
        context.addJobTag(tag)
        context.setInterruptOnCancel(True)

        def undo() -> None:
            context.removeJobTag(tag)
            context.setLocalProperty(_INTERRUPT_PROPERTY, previous)

        return undo

    def close(self) -> None:
        if self.session is None:
            return
        for name in self.views:
            # Closing anyway: a view left behind dies with the session.
            with contextlib.suppress(Exception):
                self.session.catalog.dropTempView(name)
        self.views.clear()
        if self.owned:
            self.session.stop()
        self.session = None


def open_spark_object(source: Any, table: str | None) -> tuple[SparkEngine, exp.Table | None]:
    """A caller's SparkSession (``table`` names a catalog table) or DataFrame (no ``table``)."""
    sql = import_pyspark()
    if isinstance(source, sql.DataFrame):
        if table:
            raise SpecError("--table is not used with a Spark DataFrame")
        engine = SparkEngine.wrap(source.sparkSession)
        return engine, engine.register(source)
    if isinstance(source, sql.SparkSession):
        return SparkEngine.wrap(source), None
    raise SourceError(f"cannot rank a {type(source).__name__}: pass a SparkSession or DataFrame")


def open_spark_location(location: str, table: str | None) -> tuple[SparkEngine, exp.Table | None]:
    """``--engine spark``: SOURCE is a Parquet file/directory, or with ``table`` the master."""
    if table:
        if not _MASTER.match(location):
            raise SpecError(
                "with --engine spark and --table, SOURCE is the Spark master (local[2], "
                f"spark://host:7077, yarn...), not {location!r}"
            )
        return SparkEngine.start(location), None
    engine = SparkEngine.start()
    with engine.closed_on_failure():
        return engine, engine.read_parquet(location)


def _spark_context(session: SparkSession) -> Any:
    """The session's SparkContext, or None for a Spark Connect session (which has none)."""
    try:
        return session.sparkContext
    except Exception:  # noqa: BLE001 - PySparkNotImplementedError on Spark Connect
        return None


def _master_of(session: SparkSession) -> str | None:
    context = _spark_context(session)
    return None if context is None else str(context.master)


def _condition(error: BaseException) -> str | None:
    for name in ("getCondition", "getErrorClass"):
        method = getattr(error, name, None)
        if callable(method):
            try:
                condition: str | None = method()  # found by name, so typed Any
                return condition
            except Exception:  # noqa: BLE001
                return None
    return None
