"""Values of stored counts (docs/stored-counts.md): every attribute value and class is kept as
text with a one-letter type tag, so that it round-trips exactly and one column holds values of
any type; NULL stays NULL. Partitions are ISO dates, integers or text.

>>> [encode(v) for v in ("north", 3, 2.5, -0.0, True, None, b"\\xff")]
['s:north', 'i:3', 'f:2.5', 'f:0.0', 'b:true', None, 'x:ff']
>>> decode("f:0.1") == 0.1, decode("s:a:b"), decode(None)
(True, 'a:b', None)
"""

from __future__ import annotations

import datetime as _dt
import decimal
from typing import Any

from bitsift.errors import DataError, Option, Problem


def encode(value: Any) -> str | None:
    """``value`` as tagged text. Text the database returns as bytes (MySQL/MariaDB's byte-exact
    keys) is decoded when it is UTF-8; other bytes are kept as hex. ``-0.0`` is stored as
    ``0.0``: the database groups them as one value."""
    if value is None:
        return None
    if isinstance(value, bool):
        return "b:true" if value else "b:false"
    if isinstance(value, int):
        return f"i:{value}"
    if isinstance(value, float):
        return f"f:{repr(value + 0.0)}"
    if isinstance(value, decimal.Decimal):
        return f"m:{value.normalize()}" if value.is_finite() else f"m:{value}"
    if isinstance(value, str):
        return f"s:{value}"
    if isinstance(value, bytes | bytearray | memoryview):
        raw = bytes(value)
        try:
            return f"s:{raw.decode('utf-8')}"
        except UnicodeDecodeError:
            return f"x:{raw.hex()}"
    if isinstance(value, _dt.datetime):
        return f"t:{value.isoformat()}"
    if isinstance(value, _dt.date):
        return f"d:{value.isoformat()}"
    if isinstance(value, _dt.time):
        return f"h:{value.isoformat()}"
    return f"o:{value}"


def decode(text: str | None) -> Any:
    """The value :func:`encode` stored (``o:`` values, of other types, come back as text)."""
    if text is None:
        return None
    tag, _, body = text.partition(":")
    readers: dict[str, Any] = {
        "b": lambda b: b == "true", "i": int, "f": float, "m": decimal.Decimal,
        "s": str, "x": bytes.fromhex, "t": _dt.datetime.fromisoformat,
        "d": _dt.date.fromisoformat, "h": _dt.time.fromisoformat, "o": str,
    }
    if tag not in readers:
        raise DataError(f"stored value {text!r} has no known type tag")
    return readers[tag](body)


def partition_value(value: Any, kind: str) -> str | int:
    """A partition as the counts table keeps it: an ISO date (``date``), an integer or text."""
    if kind == "date":
        if isinstance(value, _dt.datetime):
            return value.date().isoformat()
        if isinstance(value, _dt.date):
            return value.isoformat()
        return _dt.date.fromisoformat(str(value)[:10]).isoformat()
    if kind == "integer":
        return int(value)
    if isinstance(value, bytes | bytearray | memoryview):
        return bytes(value).decode("utf-8", errors="replace")
    return str(value)


def parse_partition(text: str | int, kind: str, option: str) -> str | int:
    """A partition given by the user (``--since``, ``--until``, ``--recount-from``), checked
    against the counts' partition kind."""
    try:
        if kind == "date":
            return _dt.date.fromisoformat(str(text)).isoformat()
        if kind == "integer":
            return int(text)
    except ValueError:
        expected = "a date, YYYY-MM-DD" if kind == "date" else "an integer"
        key = option.replace("-", "_")
        raise DataError(problems=[Problem(key, (
            Option(key), f" {text!r}: the counts' partitions are {expected}"))]) from None
    return str(text)
