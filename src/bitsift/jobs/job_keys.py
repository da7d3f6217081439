"""The typed keys of a job file's tables (rankings, [defaults], [counts]): which key holds
what, and the library's problems placed at the line setting their key."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

from bitsift.errors import Problem

NAME_LISTS: tuple[str, ...] = ("attributes", "exclude", "categorical", "numeric", "by")
_STRINGS = ("name", "table", "target", "where", "missing", "sort", "weight", "binning",
            "binning_for", "date_part")
_INTEGERS = ("bins", "limit", "high_cardinality", "target_bins", "max_classes")
_NUMBERS = ("timeout", "confidence")
MAX_NAME = 200


def _keyed(problems: Sequence[Problem], where: str,
           line_of: Callable[[str], int | None]) -> list[Problem]:
    """The library's problems in a job file: each at the line setting the key it is about
    (the file's keys are the library's parameter names, and so is its spelling of them),
    prefixed with ``where`` (the ranking)."""
    return [Problem.of(where + p.message, key=p.key, line=line_of(p.key or ""))
            for p in problems]


def _type_problem(key: str, value: Any) -> str | None:
    """Why ``value`` has the wrong type for ``key``, or None."""
    if key in _STRINGS:
        if not isinstance(value, str) or not value.strip():
            return f"{key} must be a non-empty string, not {value!r}"
        if key == "name" and len(value) > MAX_NAME:
            return f"name longer than {MAX_NAME} characters"
    elif key in NAME_LISTS:
        names = [value] if isinstance(value, str) else value
        if not isinstance(names, list) or not all(isinstance(n, str) and n for n in names):
            return f"{key} must be a list of column names (or one comma-separated string)"
    elif key in _INTEGERS:
        if isinstance(value, bool) or not isinstance(value, int):
            return f"{key} must be a whole number, not {value!r}"
        if key == "high_cardinality" and value < 1:
            return f"high_cardinality must be at least 1, not {value}"
    elif key in _NUMBERS and (isinstance(value, bool) or not isinstance(value, int | float)):
        return f"{key} must be a number of seconds, not {value!r}"
    return None
