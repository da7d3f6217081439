"""Every JSON bitsift writes: strict RFC 8259, whatever the data holds.

Python's ``json`` writes NaN and the infinities as bare ``NaN``/``Infinity``, which strict
parsers (JavaScript's ``JSON.parse``, jq, Go, Java) reject. A float column used with ``--by``
can hold them as segment values, so non-finite numbers are written as the strings
``"NaN"``, ``"Infinity"`` and ``"-Infinity"``, and ``allow_nan=False`` makes any one that slips
through a loud error instead of invalid output.
"""

from __future__ import annotations

import json
import math
from typing import Any

#: The string each non-finite float becomes (keyed by ``repr``).
NON_FINITE: dict[str, str] = {"nan": "NaN", "inf": "Infinity", "-inf": "-Infinity"}


def strict(value: Any) -> Any:
    """``value`` with every non-finite float (in dicts, lists and tuples) replaced by its string.

    >>> strict({"s": float("-inf"), "v": [1.5, float("nan")]})
    {'s': '-Infinity', 'v': [1.5, 'NaN']}
    """
    if isinstance(value, float):
        return value if math.isfinite(value) else NON_FINITE[repr(value)]
    if isinstance(value, dict):
        return {k: strict(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [strict(v) for v in value]
    return value


def dumps(value: Any, **options: Any) -> str:
    """``json.dumps`` of :func:`strict` ``(value)``, refusing any NaN or infinity left over.

    >>> dumps({"segment": {"s": float("inf")}})
    '{"segment": {"s": "Infinity"}}'
    """
    return json.dumps(strict(value), allow_nan=False, **options)
