"""What a counts table holds (docs/stored-counts.md): the metadata stored beside it, one
(key, value) row per field, values in JSON. Numeric cut points are fixed when the counts are
first built, so that every partition's bins agree."""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from bitsift import jsonout
from bitsift.errors import DataError

#: Bumped whenever the counts or metadata tables change.
COUNTS_FORMAT = 1
DEFAULT_COUNTS_TABLE = "bitsift_counts"


@dataclass(frozen=True)
class CountsMeta:
    """How the counts were built: source, target, partitioning, attributes and cut points."""

    source: str
    target: str
    partition: str
    grain: str
    partition_kind: str
    #: One entry per stored attribute, in stored order (attribute_index = position + 1):
    #: name, kind, binning and (numeric) cut points.
    attributes: tuple[Mapping[str, Any], ...]
    #: The options the counts were asked with (compared on every later run).
    options: Mapping[str, Any] = field(default_factory=dict)
    format: int = COUNTS_FORMAT

    @property
    def cuts(self) -> dict[str, list[float]]:
        return {a["name"]: list(a["cuts"]) for a in self.attributes if a["kind"] == "numeric"}

    def rows(self) -> list[tuple[str, str]]:
        """The metadata table's rows."""
        fields = {
            "format": self.format, "source": self.source, "target": self.target,
            "partition": self.partition, "grain": self.grain,
            "partition_kind": self.partition_kind,
            "attributes": [dict(a) for a in self.attributes], "options": dict(self.options),
        }
        return [(key, jsonout.dumps(value, sort_keys=True, ensure_ascii=False))
                for key, value in sorted(fields.items())]

    @classmethod
    def from_rows(cls, rows: Sequence[Sequence[Any]], where: str) -> CountsMeta:
        values = {str(k): json.loads(str(v)) for k, v in rows}
        if not values:
            raise DataError(f"{where} holds no counts metadata: build the counts with "
                            "`bitsift counts` first")
        if int(values.get("format", 0)) > COUNTS_FORMAT:
            raise DataError(f"{where} was written by a newer bitsift (counts format "
                            f"{values['format']}, this one reads {COUNTS_FORMAT})")
        try:
            return cls(source=values["source"], target=values["target"],
                       partition=values["partition"], grain=values["grain"],
                       partition_kind=values["partition_kind"],
                       attributes=tuple(values["attributes"]), options=values["options"],
                       format=int(values["format"]))
        except KeyError as missing:
            raise DataError(f"{where}: the counts metadata lacks {missing}") from None

    def mismatch(self, other: CountsMeta) -> str | None:
        """What differs in how ``other`` asks for the counts (None if nothing does)."""
        for name in ("target", "partition", "grain"):
            mine, theirs = getattr(self, name), getattr(other, name)
            if mine != theirs:
                return f"{name} {theirs!r} asked, {mine!r} stored"
        for key in sorted(set(self.options) | set(other.options)):
            mine, theirs = self.options.get(key), other.options.get(key)
            if mine != theirs:
                return f"{key} {theirs!r} asked, {mine!r} stored"
        return None
