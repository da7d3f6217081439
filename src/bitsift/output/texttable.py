"""Rows of cells as text: the one aligned terminal table and the one CSV writer.

Every cell of an aligned table is escaped (:func:`bitsift.names.escape_text`): a column name or a
value may hold control characters that, printed raw, could retitle the terminal or forge a row.
CSV keeps names exact (it is read by programs, not terminals).
"""

from __future__ import annotations

import csv
import io
from collections.abc import Collection, Iterable, Sequence

from bitsift.names import escape_text

#: Between two columns of an aligned table.
GAP = "  "


def aligned(rows: Sequence[Sequence[str]], left: Collection[int] = (0,), *,
            rule: bool = False) -> list[str]:
    """``rows`` (the first one a header, when there is one) as lines of aligned columns: the
    ``left`` columns (text) left-aligned, the others (numbers) right-aligned, trailing blanks
    cut; with ``rule``, a line of dashes under the first row.

    >>> for line in aligned([["name", "rows"], ["a\\x1b", "1,024"]], rule=True): print(line)
    name    rows
    -----  -----
    a\\x1b  1,024
    """
    cells = [[escape_text(c) for c in row] for row in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(cells[0]))]
    lines = [
        GAP.join(c.ljust(w) if i in left else c.rjust(w)
                 for i, (c, w) in enumerate(zip(row, widths, strict=True))).rstrip()
        for row in cells
    ]
    if rule:
        lines.insert(1, GAP.join("-" * w for w in widths))
    return lines


def csv_text(header: Sequence[str], rows: Iterable[Sequence[object]]) -> str:
    """A header and rows as CSV text, ``\\n`` line ends; ``None`` is an empty cell.

    >>> print(csv_text(["a", "b"], [["x,y", None], [1.5, 2]]), end="")
    a,b
    "x,y",
    1.5,2
    """
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return buffer.getvalue()
