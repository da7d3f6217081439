"""The pasted ranking statement (``bitsift sql``): the ranking statement of
:func:`~bitsift.sql.sqlbuild.rank_statement`, self-contained, after a comment header that says
what it ranks and how to read its rows."""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping, Sequence

from bitsift.spec.rankspec import RankSpec
from bitsift.sql.dialects import Capabilities
from bitsift.sql.sqlbuild import rank_statement
from bitsift.version import __version__


def binning_summary(spec: RankSpec, cuts: Mapping[str, Sequence[float]] | None = None) -> str:
    """How each numeric attribute is binned, in words (the pasted statement's header)."""
    parts = []
    for attribute in spec.numeric:
        what = f"{attribute.name} {attribute.binning}"
        if attribute.binning in ("quantile", "equal-width"):
            what += f" {attribute.bins} bins"
        if attribute.epoch:
            what += " of epoch seconds"
        if cuts is not None and attribute.name in cuts:
            inlined = ", ".join(f"{c:.12g}" for c in cuts[attribute.name]) or "none"
            what += f" (cut points computed by bitsift from the table and inlined: {inlined})"
        parts.append(what)
    return "; ".join(parts) or "none"


def _target_bins_note(spec: RankSpec) -> str:
    """The paste header's word on a binned target (``--target-bins``)."""
    if spec.target_cuts is None:
        return ""
    inlined = ", ".join(f"{c:.12g}" for c in spec.target_cuts) or "none"
    return (f" in {spec.options.target_bins} quantile bins (cut points computed by bitsift "
            f"from the table and inlined: {inlined})")


def _comment_safe(text: str) -> str:
    return " ".join(str(text).split()).replace("*/", "* /")


def paste_statement(spec: RankSpec, caps: Capabilities, *, now: _dt.datetime | None = None,
                    cuts: Mapping[str, Sequence[float]] | None = None) -> str:
    """A formatted, self-contained statement with a header comment of its parameters.

    ``cuts``: literal cut points of some numeric attributes (mdl's, computed beforehand from
    the table); the statement computes the others' itself.
    """
    if any(a.kind == "numeric" and (cuts is None or a.name not in cuts) for a in spec.attributes):
        caps = caps.for_paste  # the statement computes cut points: a bounds CTE in `base`
    statement = rank_statement(spec, caps, cuts, pretty=True, order_by=spec.options.sort)
    attrs = ", ".join(f"{a.name} ({a.kind}{', ' + a.date_part if a.date_part else ''})"
                      for a in spec.attributes)
    stamp = (now or _dt.datetime.now(_dt.UTC)).strftime("%Y-%m-%d %H:%M UTC")
    header = [
        f"bitsift {__version__} - information-gain ranking, dialect {caps.name}, {stamp}",
        f"table: {spec.source_name}",
        f"target: {spec.target}" + _target_bins_note(spec),
        f"attributes: {attrs}",
        f"missing values: {spec.options.missing}; numeric binning: {binning_summary(spec, cuts)}",
    ]
    if spec.where:
        header.append(f"where: {spec.where.text}")
    if spec.by:
        columns = ", ".join(f"segment_{i} = {s.name}" for i, s in enumerate(spec.by, start=1))
        header += [
            f"segments (--by): {columns}; one group of rows per segment, NULL values form a "
            "segment of their own; numeric bins are cut over the whole table",
        ]
    if spec.weight:
        header += [
            f"weight: {spec.weight}; counts are sums of weights (weight_used = N), rows_used counts"
            " rows with a positive weight; rows_without_weight: NULL or 0 weight, left out",
            "rows_negative_weight must be 0, or the result is invalid (negative weights are left"
            " out); p-values hold only for whole-number (frequency) weights:"
            " rows_fractional_weight = 0",
        ]
    header += [
        "one row per attribute (attribute_index 0 describes the target); entropies in bits.",
        "p-value: chi-square survival function of g_statistic with dof degrees of freedom,",
        "e.g. Python: scipy.stats.chi2.sf(g_statistic, dof).",
        # No percent sign: drivers (psycopg) read one in the text as a placeholder.
        f"information_gain_low/high: an interval at level {spec.options.confidence:.2f} of the "
        "bias-corrected gain (information_gain_corrected +/- z * information_gain_se, clipped "
        "at 0); rank_low/rank_high: the best and worst rank it allows among the attributes.",
    ]
    lines = "\n".join(f"-- {_comment_safe(h)}" for h in header)
    return f"{lines}\n{statement.sql};\n"
