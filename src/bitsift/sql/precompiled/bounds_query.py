# templates/bounds_query.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '287b0f241011a2824628561ab4f0520671679eab8f8cc1ccabc6d30dfb679c65'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'bounds_query.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_bounds = resolve('bounds')
    l_0_source = resolve('source')
    l_0_target = resolve('target')
    l_0_where = resolve('where')
    l_0_bounds_macros = missing
    pass
    l_0_bounds_macros = context.vars['bounds_macros'] = environment.get_template('bounds.sql.j2', 'bounds_query.sql.j2')._get_default_module(context)
    context.exported_vars.discard('bounds_macros')
    yield 'WITH\n'
    yield str(context.call(environment.getattr((undefined(name='bounds_macros') if l_0_bounds_macros is missing else l_0_bounds_macros), 'bounds_ctes'), (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds), (undefined(name='source') if l_0_source is missing else l_0_source), (undefined(name='target') if l_0_target is missing else l_0_target), (undefined(name='where') if l_0_where is missing else l_0_where)))
    yield '\nSELECT * FROM bounds\n'

blocks = {}
debug_info = '3=16&5=19'