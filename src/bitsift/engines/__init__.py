"""Engines: open a source read-only, describe a table's columns, run a SELECT, fetch aggregates."""

from bitsift.engines.base import Engine, FetchResult

__all__ = ["Engine", "FetchResult"]
