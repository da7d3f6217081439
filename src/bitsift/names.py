"""Column names as users type them and as catalogs spell them: matching and safe display.

One rule everywhere a name is looked up (attributes, target, --by, --weight, --where, job files,
--sensitive): an exact match wins; otherwise a match that ignores case and Unicode normalization
(NFC vs NFD) is used only when it is the only one. Two catalog names that such a match cannot
tell apart are never guessed between.
"""

from __future__ import annotations

import unicodedata
from collections.abc import Iterable, Sequence


def loose_key(name: str) -> str:
    """The spelling compared when no column matches exactly: NFC, case folded (``ß`` = ``ss``).

    >>> loose_key("STRASSE") == loose_key("Straße"), loose_key("e\\u0301") == loose_key("\\xc9")
    (True, True)
    """
    return unicodedata.normalize("NFC", name).casefold()


def loose_matches(name: str, names: Iterable[str]) -> list[str]:
    """Every catalog name equal to ``name`` apart from case and Unicode normalization."""
    key = loose_key(name)
    return [n for n in names if loose_key(n) == key]


def resolve_name(name: str, names: Sequence[str]) -> str | None:
    """Catalog spelling of ``name``: exact match, else a unique loose match (see module doc).

    >>> resolve_name("y", ["Y", "y"]), resolve_name("y", ["Y"]), resolve_name("YY", ["yy", "Yy"])
    ('y', 'Y', None)
    """
    if name in names:
        return name
    folded = loose_matches(name, names)
    return folded[0] if len(folded) == 1 else None



def resolve_names(names: Iterable[str], catalog: Sequence[str]) -> tuple[list[str], list[str]]:
    """(catalog spellings of the names that resolve, the names that do not), each in order.

    >>> resolve_names(["y", "nope", "K"], ["Y", "y", "k"])
    (['y', 'k'], ['nope'])
    """
    found: list[str] = []
    unknown: list[str] = []
    for name in names:
        spelled = resolve_name(name, catalog)
        if spelled is None:
            unknown.append(name)
        else:
            found.append(spelled)
    return found, unknown


def split_names(value: str | Iterable[str] | None) -> tuple[str, ...]:
    """Names given as a comma-separated string or as a sequence.

    >>> split_names("a, b,,c"), split_names(["x y"]), split_names(None)
    (('a', 'b', 'c'), ('x y',), ())
    """
    if value is None:
        return ()
    if isinstance(value, str):
        return tuple(v.strip() for v in value.split(",") if v.strip())
    return tuple(value)

def ambiguity_note(name: str, names: Iterable[str]) -> str:
    """``" (ambiguous: 'Y', 'y')"`` when ``name`` loosely matches more than one catalog name."""
    folded = loose_matches(name, names)
    if len(folded) < 2:
        return ""
    return (" (matches " + ", ".join(quoted(n) for n in folded)
            + " apart from case or Unicode form: spell it exactly)")


#: Characters that move the cursor, end a line, change the terminal's state or reorder text:
#: control characters (C0, DEL, C1), line and paragraph separators, and bidi/zero-width formats.
_UNSAFE_CATEGORIES = frozenset({"Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn"})


def _escape_char(ch: str, backslash: str) -> str:
    if ch == "\\":
        return backslash
    if unicodedata.category(ch) not in _UNSAFE_CATEGORIES:
        return ch
    code = ord(ch)
    if code <= 0xFF:
        return f"\\x{code:02x}"
    return f"\\u{code:04x}" if code <= 0xFFFF else f"\\U{code:08x}"


def escape_text(text: str) -> str:
    """``text`` with every character that could act on a terminal written as a visible escape
    (``\\x1b``, ``\\x0a``, ``\\u202e``). In text that needs escaping a backslash is doubled, so
    that the escapes stay unambiguous; printable text (accents and scripts included) is unchanged.

    >>> escape_text("price"), escape_text("a\\x1b]0;owned\\x07b"), escape_text("x\\ny")
    ('price', 'a\\\\x1b]0;owned\\\\x07b', 'x\\\\x0ay')
    """
    if text.isprintable():
        return text  # the common case, backslashes included, stays as it was
    return "".join(_escape_char(ch, "\\\\") for ch in text)


def one_line(text: str) -> str:
    """A message as one terminal line: control characters escaped, backslashes kept (messages
    quote names with ``repr``, whose escapes must not be doubled).

    >>> one_line("unknown column 'a\\\\x1b' in t\\x1b[2J\\nforged")
    "unknown column 'a\\\\x1b' in t\\\\x1b[2J\\\\x0aforged"
    """
    if text.isprintable():
        return text
    return "".join(_escape_char(ch, "\\") for ch in text)


def quoted(name: str) -> str:
    """A name as messages show it: in quotes, escaped (one line whatever the name holds),
    and decomposed (not NFC) spellings marked, so that NFC and NFD twins look different.

    >>> quoted("region"), quoted("a\\nb"), quoted("e\\u0301")
    ("'region'", "'a\\\\x0ab'", "'e\\u0301' (decomposed)")
    """
    text = f"'{escape_text(name)}'"
    if unicodedata.normalize("NFC", name) != name:
        text += " (decomposed)"
    return text
