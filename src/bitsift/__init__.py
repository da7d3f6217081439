"""bitsift: rank the columns of a large table by information gain about a categorical target,
computed inside the database.

>>> import bitsift
>>> bitsift.__version__
'0.1.0'

The public names are imported when first used (``bitsift.rank``, ...), so that importing a
submodule such as ``bitsift.cli`` does not load every engine and the whole library first.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING

from bitsift.version import __version__

#: Each public name and the module that defines it.
_PUBLIC: dict[str, str] = {
    "AttributeScore": "bitsift.run.result",
    "BitsiftError": "bitsift.errors",
    "CheckReport": "bitsift.run.api",
    "FileSource": "bitsift.engines.read_options",
    "Problem": "bitsift.errors",
    "Ranking": "bitsift.run.result",
    "SegmentedRanking": "bitsift.run.result",
    "Thresholds": "bitsift.spec.rankspec",
    "check": "bitsift.run.api",
    "rank": "bitsift.run.api",
    "statement": "bitsift.run.api",
}

if TYPE_CHECKING:
    from bitsift.engines.read_options import FileSource
    from bitsift.errors import BitsiftError, Problem
    from bitsift.run.api import CheckReport, check, rank, statement
    from bitsift.run.result import AttributeScore, Ranking, SegmentedRanking
    from bitsift.spec.rankspec import Thresholds

__all__ = [
    "AttributeScore",
    "BitsiftError",
    "CheckReport",
    "FileSource",
    "Problem",
    "Ranking",
    "SegmentedRanking",
    "Thresholds",
    "__version__",
    "check",
    "rank",
    "statement",
]


def __getattr__(name: str) -> object:
    """A public name, imported from its module on first use (PEP 562)."""
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'bitsift' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *_PUBLIC})
