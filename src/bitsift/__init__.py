"""bitsift: rank the columns of a large table by information gain about a categorical target,
computed inside the database.

>>> import bitsift
>>> bitsift.__version__
'0.1.0'
"""

from bitsift.engines.read_options import FileSource
from bitsift.errors import BitsiftError, Problem
from bitsift.run.api import CheckReport, check, rank, statement
from bitsift.run.result import AttributeScore, Ranking, SegmentedRanking
from bitsift.spec.rankspec import Thresholds
from bitsift.version import __version__

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
