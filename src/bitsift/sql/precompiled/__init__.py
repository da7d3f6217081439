"""The SQL templates compiled by Jinja2, one generated module per ``templates/*.sql.j2``
(see :mod:`bitsift.sql.templates`). Never edited by hand: regenerate with
``BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py``."""
