"""Finding, loading and rendering the templates (SQL and HTML) shipped inside the wheel.

The SQL templates are also shipped compiled (``bitsift/sql/precompiled/``, one Python module
per template, written by ``make``: :mod:`bitsift.sql.precompile`): Jinja2 takes 60-75 ms to
compile rank.sql.j2 alone (lexing, parsing, code generation and Python's ``compile``; 2-core
machine, 2026-12-05), on every run of the command, while importing the compiled module reads
its cached bytecode. The compiled code runs on :mod:`bitsift.sql.template_runtime`, not on
Jinja2's runtime, so a command that renders only SQL templates never imports Jinja2 (40-50 ms
of CPU). A compiled module is used only when it was compiled from exactly the template's
current text (:func:`source_digest`) by a Jinja2 version whose generated code the runtime
was checked against (:data:`~bitsift.sql.template_runtime.SUPPORTED_JINJA2`); otherwise
Jinja2 compiles the template from its text as before, so a stale module costs time, never
SQL. Nothing is written at run time: the modules are build output (make, the wheel), ignored
by git. The HTML report is rendered by Jinja2 itself.
"""

from __future__ import annotations

import hashlib
import importlib
import threading
from importlib import resources
from pathlib import Path
from types import ModuleType
from typing import TYPE_CHECKING

from bitsift.names import escape_text
from bitsift.sql import template_runtime

if TYPE_CHECKING:
    import jinja2


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
    """Jinja2's environment (imported here, on first use): strict about undefined names, no
    autoescaping for SQL. It renders the HTML report, and a SQL template only when that has
    no current compiled module (:func:`render`); the tests compare the two.

    HTML templates also show every control character of a value as a visible escape
    (:func:`~bitsift.names.escape_text`): a column name or value holding one is not silently
    hidden or turned into a line break on the page. One of each per process, however called
    and from however many threads (run mode renders on several sessions' threads at once).
    """
    with _ENVIRONMENTS_LOCK:
        found = _ENVIRONMENTS.get(html)
        if found is None:
            found = _ENVIRONMENTS[html] = _new_environment(html)
        return found


_ENVIRONMENTS: dict[bool, jinja2.Environment] = {}
_ENVIRONMENTS_LOCK = threading.Lock()


def _new_environment(html: bool) -> jinja2.Environment:
    import jinja2

    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
        undefined=jinja2.StrictUndefined,
        autoescape=jinja2.select_autoescape(enabled_extensions=("html", "html.j2"), default=False),
        keep_trailing_newline=True,
        finalize=_visible if html else None,
    )


def _visible(value: object) -> object:
    """Text values escaped for display; markup built by bitsift itself is left alone."""
    import markupsafe

    if isinstance(value, str) and not isinstance(value, markupsafe.Markup):
        return escape_text(value)
    return value


def render(name: str, **context: object) -> str:
    """Render template ``name`` with ``context``: a SQL template from its compiled module
    where that is current (:func:`compiled_template`), else by Jinja2."""
    if name.endswith(SQL_SUFFIX):
        compiled = compiled_template(name)
        if compiled is not None:
            try:
                return compiled.render(**context)
            except template_runtime.TemplateNotFound:
                pass  # it imports a template whose module is stale: Jinja2 renders it all
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
    """What a compiled template must have been compiled from: the template's text."""
    return hashlib.sha256(source.encode()).hexdigest()


#: The line Jinja2's generated code starts with, and what the compiled modules import instead.
JINJA2_RUNTIME_IMPORT = "from jinja2.runtime import "
RUNTIME_IMPORT = "from bitsift.sql.template_runtime import "


def precompiled_source(name: str) -> str:
    """The text of the module holding the SQL template ``name`` compiled by the installed
    Jinja2 (``defer_init``: the runtime gives the module its environment), importing
    :mod:`bitsift.sql.template_runtime` where the generated code imports Jinja2's runtime."""
    import jinja2

    env = environment()
    assert env.loader is not None
    source, filename, _ = env.loader.get_source(env, name)
    code = env.compile(source, name, filename, raw=True, defer_init=True)
    assert code.count(JINJA2_RUNTIME_IMPORT) == 1, "Jinja2's generated code changed its import"
    code = code.replace(JINJA2_RUNTIME_IMPORT, RUNTIME_IMPORT)
    version = getattr(jinja2, "__version__", "")
    return (f"# templates/{name} compiled by Jinja2 {version}: generated, do not edit.\n"
            "# written by make (python -m bitsift.sql.precompile)\n"
            "# ruff: noqa\n"
            f"SOURCE_DIGEST = {source_digest(source)!r}\n"
            f"JINJA2_VERSION = {version!r}\n{code}")


def compiled_template(name: str) -> template_runtime.Template | None:
    """The SQL template ``name`` from its current compiled module, on the runtime; None
    when it has none."""
    try:
        return _SQL_TEMPLATES.get_template(name)
    except template_runtime.TemplateNotFound:
        return None


def _current_module(name: str) -> ModuleType | None:
    """The compiled module of template ``name`` if it was compiled from the template's
    current text by a Jinja2 version the runtime supports, else None."""
    try:
        source = (templates_dir() / name).read_text(encoding="utf-8")
        module = importlib.import_module(precompiled_module(name))
    except (ImportError, OSError):
        return None
    if (getattr(module, "SOURCE_DIGEST", None) != source_digest(source)
            or getattr(module, "JINJA2_VERSION", None)
            not in template_runtime.SUPPORTED_JINJA2):
        return None
    return module


_SQL_TEMPLATES = template_runtime.SqlEnvironment(_current_module)
