"""Where each key of a job file is written: tomllib gives no line numbers for keys, so
:func:`scan_lines` finds them in the text, and every problem is placed at its line."""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field

from bitsift.errors import (
    Problem,
)


def _at(line: int | None, message: str) -> Problem:
    """A problem of the job file at ``line`` (``None``: the file as a whole)."""
    return Problem.of(message, line=line)


_BARE_KEY = r"[A-Za-z0-9_-]+"
_QUOTED_KEY = r'"(?:[^"\\]|\\.)*"|\'[^\']*\''
_KEY_PART = rf"(?:{_BARE_KEY}|{_QUOTED_KEY})"
_KEY_LINE = re.compile(rf"^\s*({_KEY_PART}(?:\s*\.\s*{_KEY_PART})*)\s*=")
_HEADER_LINE = re.compile(rf"^\s*(\[\[?)\s*({_KEY_PART}(?:\s*\.\s*{_KEY_PART})*)\s*\]\]?")


@dataclass
class LineMap:
    """Line numbers of tables (``("ranking", 2)`` is the third ``[[ranking]]``) and their keys."""

    sections: dict[tuple[str, int], int] = field(default_factory=dict)
    keys: dict[tuple[str, int, str], int] = field(default_factory=dict)

    def of(self, section: str, index: int = 0, key: str | None = None) -> int | None:
        """The line of ``key`` in a table, else the table's header line, else ``None``."""
        if key is not None and (section, index, key) in self.keys:
            return self.keys[section, index, key]
        return self.sections.get((section, index))


def _unquote(key: str) -> str:
    parts = re.findall(_KEY_PART, key)
    return ".".join(p[1:-1] if p[:1] in "\"'" else p for p in parts)


def _value_state(text: str, mode: str | None, depth: int) -> tuple[str | None, int]:
    """Follow a value through one line: open multi-line strings and bracket depth after it."""
    i = 0
    while i < len(text):
        if mode is not None:
            if mode == '"""' and text[i] == "\\":
                i += 2
                continue
            if text.startswith(mode, i):
                mode = None
                i += 3
                continue
            i += 1
            continue
        ch = text[i]
        if ch == "#":
            break
        if text.startswith('"""', i) or text.startswith("'''", i):
            mode = text[i:i + 3]
            i += 3
            continue
        if ch == '"':
            i += 1
            while i < len(text) and text[i] != '"':
                i += 2 if text[i] == "\\" else 1
        elif ch == "'":
            end = text.find("'", i + 1)
            i = len(text) if end < 0 else end
        elif ch in "[{":
            depth += 1
        elif ch in "]}":
            depth -= 1
        i += 1
    return mode, depth


def scan_lines(text: str) -> LineMap:
    """Find the line (1-based) of every table header and key of a TOML document.

    Approximate by design (the document has already been parsed by tomllib): it follows
    strings and brackets so that text inside multi-line values is not taken for keys.

    >>> m = scan_lines('job = "j"\\n[[ranking]]\\ntarget = "y"\\n[[ranking]]\\nbins = 4\\n')
    >>> m.of("", 0, "job"), m.of("ranking", 1), m.of("ranking", 1, "bins")
    (1, 4, 5)
    """
    found = LineMap()
    section: tuple[str, int] = ("", 0)
    arrays: dict[str, int] = {}
    mode: str | None = None
    depth = 0
    for number, line in enumerate(text.splitlines(), start=1):
        if mode is not None or depth > 0:
            mode, depth = _value_state(line, mode, depth)
            continue
        header = _HEADER_LINE.match(line)
        if header:
            name = _unquote(header.group(2))
            index = 0
            if header.group(1) == "[[":
                index = arrays.get(name, -1) + 1
                arrays[name] = index
            section = (name, index)
            found.sections.setdefault(section, number)
            parent, _, child = name.rpartition(".")
            if parent:
                # [ranking.extra] is key "extra" of the current [[ranking]]: report it there.
                found.keys.setdefault((parent, arrays.get(parent, 0), child), number)
            continue
        key = _KEY_LINE.match(line)
        if key:
            found.keys.setdefault((*section, _unquote(key.group(1))), number)
            mode, depth = _value_state(line[key.end():], None, 0)
    return found


def _toml_problem(error: tomllib.TOMLDecodeError) -> Problem:
    text = str(error)
    match = re.search(r"\(at line (\d+), column \d+\)", text)
    message = re.sub(r"\s*\(at (line \d+, column \d+|end of document)\)", "", text)
    return _at(int(match.group(1)) if match else None, f"not valid TOML: {message}")


# --- the job ----------------------------------------------------------------------------------
