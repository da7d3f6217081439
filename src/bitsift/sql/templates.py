"""Finding and loading the Jinja2 templates (SQL and HTML) shipped inside the wheel."""

from __future__ import annotations

import functools
from importlib import resources
from pathlib import Path

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


@functools.cache
def environment(html: bool = False) -> jinja2.Environment:
    """The Jinja2 environment: strict about undefined names, no autoescaping for SQL.

    HTML templates also show every control character of a value as a visible escape
    (:func:`~bitsift.names.escape_text`): a column name or value holding one is not silently
    hidden or turned into a line break on the page.
    """
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir())),
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
