"""Reader options of data files (``--read-option KEY=VALUE``), checked against an allow-list.

A CSV file is read in place by DuckDB's ``read_csv_auto``, which guesses the delimiter, header
and types. A semicolon file with decimal commas, or a number column holding ``inf``, is then
read as text and ranked as a category with an inflated score. These options tell the reader
what the file is; each maps to one ``read_csv`` argument, its value checked here and sent as a
typed sqlglot literal (never pasted text). Only CSV files take them.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from sqlglot import exp

from bitsift.errors import SpecError, suggest

ReadValue = str | bool | int
#: Encodings DuckDB's CSV reader knows without an extension.
ENCODINGS: tuple[str, ...] = ("utf-8", "utf-16", "latin-1")


def _text(limit: int) -> Callable[[str], ReadValue]:
    def check(value: str) -> ReadValue:
        if not 1 <= len(value) <= limit or "\n" in value or "\r" in value:
            raise ValueError(f"must be 1 to {limit} character(s) on one line")
        return value
    return check


def _one_of(*allowed: str) -> Callable[[str], ReadValue]:
    def check(value: str) -> ReadValue:
        if value.lower() not in allowed:
            raise ValueError(f"must be one of {', '.join(repr(a) for a in allowed)}")
        return value.lower()
    return check


def _boolean(value: str) -> ReadValue:
    words = {"true": True, "yes": True, "1": True, "false": False, "no": False, "0": False}
    if value.lower() not in words:
        raise ValueError("must be true or false")
    return words[value.lower()]


def _count(value: str) -> ReadValue:
    if not value.isdigit() or int(value) > 1_000_000:
        raise ValueError("must be a whole number of lines, 0 to 1000000")
    return int(value)


def _free(value: str) -> ReadValue:
    if len(value) > 100 or "\n" in value:
        raise ValueError("must be at most 100 characters on one line")
    return value


#: KEY -> (DuckDB read_csv argument, value check). ``double`` names a column (repeatable) to
#: read as DOUBLE: ``inf``, ``-inf`` and ``nan`` are numbers then.
READ_OPTIONS: dict[str, tuple[str, Callable[[str], ReadValue]]] = {
    "delimiter": ("delim", _text(4)),
    "decimal": ("decimal_separator", _one_of(".", ",")),
    "header": ("header", _boolean),
    "null": ("nullstr", _free),
    "date_format": ("dateformat", _text(100)),
    "timestamp_format": ("timestampformat", _text(100)),
    "quote": ("quote", _text(1)),
    "escape": ("escape", _text(1)),
    "comment": ("comment", _text(1)),
    "skip": ("skip", _count),
    "encoding": ("encoding", _one_of(*ENCODINGS)),
    "double": ("types", _text(1000)),
}


@dataclass(frozen=True)
class FileSource:
    """A data file and the reader options it is read with.

    >>> FileSource.of("trays.csv", {"delimiter": ";", "decimal": ","}).options
    (('delimiter', ';'), ('decimal', ','))
    """

    path: str
    options: tuple[tuple[str, ReadValue], ...] = ()

    @classmethod
    def of(cls, path: str, options: object) -> FileSource:
        return cls(str(path), parse_read_options(options))


def parse_read_options(value: object) -> tuple[tuple[str, ReadValue], ...]:
    """``KEY=VALUE`` strings (the CLI's, split at the first ``=`` only: ``delimiter==`` is an
    equals sign), or a mapping (a job file's table, a library caller's dict; ``double`` may
    hold a list), checked against :data:`READ_OPTIONS`. Every problem at once.

    >>> parse_read_options(["delimiter=;", "header=no", "double=score"])
    (('delimiter', ';'), ('header', False), ('double', 'score'))
    >>> parse_read_options({"decimal": ";"})
    Traceback (most recent call last):
    bitsift.errors.SpecError: read_option decimal: must be one of '.', ','
    """
    items: list[tuple[str, Any]] = []
    if isinstance(value, Mapping):
        for key, setting in value.items():
            settings = setting if isinstance(setting, list | tuple) else [setting]
            items += [(str(key), s) for s in settings]
    elif isinstance(value, str):
        items = [_split(value)]
    elif value is not None:
        items = [_split(str(v)) for v in value]  # type: ignore[attr-defined]
    problems: list[str] = []
    parsed: list[tuple[str, ReadValue]] = []
    for key, setting in items:
        name = key.strip().lower()
        if name not in READ_OPTIONS:
            problems.append(f"unknown key {key!r}{suggest(name, READ_OPTIONS)} (known: "
                            f"{', '.join(READ_OPTIONS)})")
            continue
        if name != "double" and any(k == name for k, _ in parsed):
            problems.append(f"{name} given twice")
            continue
        text = str(setting).lower() if isinstance(setting, bool) else str(setting)
        try:
            parsed.append((name, READ_OPTIONS[name][1](text)))
        except ValueError as error:
            problems.append(f"{name}: {error}")
    if problems:
        raise SpecError.option("read_option", " " + "; ".join(problems))
    return tuple(parsed)


def _split(item: str) -> tuple[str, str]:
    key, sep, setting = item.partition("=")
    if not sep:
        raise SpecError.option("read_option", f" takes KEY=VALUE, not {item!r}")
    return key, setting


def reader_arguments(options: Iterable[tuple[str, ReadValue]]) -> list[exp.Expression]:
    """The ``read_csv`` named arguments of ``options``: typed sqlglot literals."""
    arguments: list[exp.Expression] = []
    doubles: list[str] = []
    for key, setting in options:
        if key == "double":
            doubles.append(str(setting))
            continue
        literal: exp.Expression
        if isinstance(setting, bool):
            literal = exp.Boolean(this=setting)
        elif isinstance(setting, int):
            literal = exp.Literal.number(setting)
        else:
            literal = exp.Literal.string(setting)
        arguments.append(exp.EQ(this=exp.column(READ_OPTIONS[key][0]), expression=literal))
    if doubles:
        struct = exp.Struct(expressions=[
            exp.PropertyEQ(this=exp.Literal.string(name), expression=exp.Literal.string("DOUBLE"))
            for name in dict.fromkeys(doubles)])
        arguments.append(exp.EQ(this=exp.column("types"), expression=struct))
    return arguments
