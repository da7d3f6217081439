"""The SQL templates compiled by Jinja2, one generated module per ``templates/*.sql.j2``
(see :mod:`bitsift.sql.templates`): build output written by ``make`` (``python -m
bitsift.sql.precompile``) and shipped in the wheel, ignored by git, never edited by hand."""
