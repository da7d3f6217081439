"""Result objects: a :class:`Ranking` of :class:`AttributeScore` rows. Formatters only read them."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

#: Keys of one attribute in the JSON contract, in order.
ATTRIBUTE_KEYS: tuple[str, ...] = (
    "attribute",
    "kind",
    "distinct",
    "information_gain",
    "gain_ratio",
    "symmetric_uncertainty",
    "conditional_entropy",
    "attribute_entropy",
    "g_statistic",
    "dof",
    "p_value",
    "flags",
)


@dataclass
class AttributeScore:
    """Every metric of one attribute against the target. Entropies in bits."""

    attribute: str
    kind: str
    distinct: int
    information_gain: float
    gain_ratio: float
    symmetric_uncertainty: float
    conditional_entropy: float
    attribute_entropy: float
    g_statistic: float
    dof: int
    p_value: float
    flags: list[str] = field(default_factory=list)
    #: Rows that entered this attribute's counts (differs from the table's with --missing drop).
    rows: int = 0
    #: H(Y) over those rows (equals the target entropy unless --missing drop).
    target_entropy: float = 0.0
    #: Boundaries of the quantile bins of a numeric attribute (value < cut[0] is bin 0...).
    cuts: list[float] | None = None

    def to_dict(self) -> dict[str, Any]:
        return {key: getattr(self, key) for key in ATTRIBUTE_KEYS}


@dataclass
class Ranking:
    """The ranking of a table's attributes by what they tell about the target."""

    target: str
    table: str
    rows: int
    rows_excluded: int
    target_entropy: float
    classes: int
    attributes: list[AttributeScore]
    dialect: str = "duckdb"
    sort: str = "information_gain"
    statements: list[str] = field(default_factory=list)
    #: What the engine wants the user to know (e.g. "--timeout is not applied"), for stderr.
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        """The JSON contract: target, table, rows, rows_excluded, target_entropy, classes,
        attributes (each with the keys of :data:`ATTRIBUTE_KEYS`)."""
        return {
            "target": self.target,
            "table": self.table,
            "rows": self.rows,
            "rows_excluded": self.rows_excluded,
            "target_entropy": self.target_entropy,
            "classes": self.classes,
            "attributes": [a.to_dict() for a in self.attributes],
        }

    def to_pandas(self) -> Any:
        """One DataFrame row per attribute (needs the ``pandas`` extra)."""
        try:
            import pandas as pd
        except ImportError as error:  # pragma: no cover - depends on the environment
            raise ImportError("to_pandas() needs pandas: pip install 'bitsift[pandas]'") from error
        return pd.DataFrame([a.to_dict() for a in self.attributes], columns=list(ATTRIBUTE_KEYS))

    def __getitem__(self, name: str) -> AttributeScore:
        for a in self.attributes:
            if a.attribute == name:
                return a
        raise KeyError(name)
