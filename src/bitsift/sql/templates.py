"""Finding and loading the Jinja2 templates (SQL and HTML) shipped inside the wheel.

The SQL templates are also shipped compiled (``bitsift/sql/precompiled/``, one Python module
per template, written by ``make``: :mod:`bitsift.sql.precompile`): Jinja2 takes 60-75 ms to
compile rank.sql.j2 alone (lexing, parsing, code generation and Python's ``compile``; 2-core
machine, 2026-12-05), on every run of the command, while importing the compiled module reads
its cached bytecode. A compiled module is used only when it was compiled from exactly the
template's current text by the running Jinja2 version (:func:`source_digest`); otherwise the
template is compiled from its text as before, so a stale module costs time, never SQL.
Nothing is written at run time: the modules are build output (make, the wheel), ignored by git.
"""

from __future__ import annotations

import hashlib
import importlib
import threading
from collections.abc import MutableMapping
from importlib import resources
from pathlib import Path
from types import ModuleType
from typing import Any

import jinja2
import markupsafe

from bitsift.names import escape_text


def templates_dir() -> Path:
    """The installed ``bitsift/templates`` folder, or the repository's ``templates/`` in a checkout.

    The wheel maps the repository's top-level ``templates/`` into the package; an editable
    install imports from ``src/`` and finds the folder three levels up (from ``src/bitsift/sql``).
    """
    packaged = Path(str(resources.files("bitsift"))) / "templates"
    if packaged.is_dir():
        return packaged
    checkout = Path(__file__).resolve().parents[3] / "templates"
    if checkout.is_dir():
        return checkout
    raise FileNotFoundError(f"bitsift templates not found in {packaged} nor {checkout}")


def environment(html: bool = False) -> jinja2.Environment:
    """The Jinja2 environment: strict about undefined names, no autoescaping for SQL.

    HTML templates also show every control character of a value as a visible escape
    (:func:`~bitsift.names.escape_text`): a column name or value holding one is not silently
    hidden or turned into a line break on the page. One of each per process, however called
    and from however many threads (run mode renders on several sessions' threads at once);
    a compiled template's module serves one environment.
    """
    with _ENVIRONMENTS_LOCK:
        found = _ENVIRONMENTS.get(html)
        if found is None:
            found = _ENVIRONMENTS[html] = _new_environment(html)
        return found


_ENVIRONMENTS: dict[bool, jinja2.Environment] = {}
_ENVIRONMENTS_LOCK = threading.Lock()


def _new_environment(html: bool) -> jinja2.Environment:
    loader = jinja2.FileSystemLoader if html else PrecompiledLoader
    return jinja2.Environment(
        loader=loader(str(templates_dir())),
        undefined=jinja2.StrictUndefined,
        autoescape=jinja2.select_autoescape(enabled_extensions=("html", "html.j2"), default=False),
        keep_trailing_newline=True,
        finalize=_visible if html else None,
    )


def _visible(value: object) -> object:
    """Text values escaped for display; markup built by bitsift itself is left alone."""
    if isinstance(value, str) and not isinstance(value, markupsafe.Markup):
        return escape_text(value)
    return value


def render(name: str, **context: object) -> str:
    """Render template ``name`` with ``context``."""
    return environment(html=name.endswith((".html", ".html.j2"))).get_template(name).render(
        **context)


#: Where the compiled SQL templates live: ``rank.sql.j2`` is module ``...precompiled.rank``.
PRECOMPILED_PACKAGE = "bitsift.sql.precompiled"
SQL_SUFFIX = ".sql.j2"


def precompiled_module(name: str) -> str:
    """The module holding the compiled template ``name`` (a ``.sql.j2`` file name).

    >>> precompiled_module("quantile_ranges.sql.j2")
    'bitsift.sql.precompiled.quantile_ranges'
    """
    return f"{PRECOMPILED_PACKAGE}.{name.removesuffix(SQL_SUFFIX)}"


def source_digest(source: str) -> str:
    """What a compiled template must have been compiled from: the template's text and the
    Jinja2 version (its generated code is private to the version that wrote it)."""
    version = getattr(jinja2, "__version__", "")
    return hashlib.sha256(f"{version}\0{source}".encode()).hexdigest()


def precompiled_source(name: str) -> str:
    """The text of the module holding the SQL template ``name`` compiled, as the SQL
    environment compiles it (``defer_init``: the loader gives the module its environment)."""
    env = environment()
    assert env.loader is not None
    source, filename, _ = env.loader.get_source(env, name)
    code = env.compile(source, name, filename, raw=True, defer_init=True)
    return (f"# templates/{name} compiled by Jinja2 {getattr(jinja2, '__version__', '')}: "
            "generated, do not edit.\n"
            "# written by make (python -m bitsift.sql.precompile)\n"
            "# ruff: noqa\n"
            f"SOURCE_DIGEST = {source_digest(source)!r}\n{code}")


class PrecompiledLoader(jinja2.FileSystemLoader):
    """A file system loader that takes a SQL template's compiled module where it is current
    (see the module docstring), and compiles the template's text otherwise."""

    def load(self, environment: jinja2.Environment, name: str,
             globals: MutableMapping[str, Any] | None = None) -> jinja2.Template:
        if name.endswith(SQL_SUFFIX):
            source, _, _ = self.get_source(environment, name)
            module = _current_module(name, source)
            if module is not None:
                # As jinja2.ModuleLoader does: the module's namespace is the template's.
                return environment.template_class.from_module_dict(
                    environment, module.__dict__, globals if globals is not None else {})
        return super().load(environment, name, globals)


def _current_module(name: str, source: str) -> ModuleType | None:
    """The compiled module of template ``name`` if it was compiled from ``source`` by this
    Jinja2 version, else None."""
    try:
        module = importlib.import_module(precompiled_module(name))
    except ImportError:
        return None
    return module if getattr(module, "SOURCE_DIGEST", None) == source_digest(source) else None
