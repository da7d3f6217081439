# templates/value_counts.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '6b8811ac17f285c681f58a79dc05643df7b02a133672fee24ee6067a6bfe2d12'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'value_counts.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_a = resolve('a')
    l_0_target_exact = resolve('target_exact')
    l_0_target = resolve('target')
    l_0_source = resolve('source')
    l_0_qualified_where = resolve('qualified_where')
    l_0_limit = resolve('limit')
    l_0_grouping_key = l_0_measured = missing
    pass
    included_template = environment.get_template('measured.sql.j2', 'value_counts.sql.j2')._get_default_module(context)
    l_0_grouping_key = getattr(included_template, 'grouping_key', missing)
    if l_0_grouping_key is missing:
        l_0_grouping_key = undefined(f"the template {included_template.__name__!r} (imported on line 7 in 'value_counts.sql.j2') does not export the requested name 'grouping_key'", name='grouping_key')
    l_0_measured = getattr(included_template, 'measured', missing)
    if l_0_measured is missing:
        l_0_measured = undefined(f"the template {included_template.__name__!r} (imported on line 7 in 'value_counts.sql.j2') does not export the requested name 'measured'", name='measured')
    context.vars.update({'grouping_key': l_0_grouping_key, 'measured': l_0_measured})
    context.exported_vars.difference_update(('grouping_key', 'measured'))
    yield 'SELECT\n  '
    yield str(context.call((undefined(name='measured') if l_0_measured is missing else l_0_measured), (undefined(name='a') if l_0_a is missing else l_0_a)))
    yield ' AS v,\n  '
    yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), (undefined(name='target_exact') if l_0_target_exact is missing else l_0_target_exact), str_join(('src.', (undefined(name='target') if l_0_target is missing else l_0_target), ))))
    yield ' AS y,\n  COUNT(*) AS n\nFROM '
    yield str((undefined(name='source') if l_0_source is missing else l_0_source))
    yield ' AS src'
    if (undefined(name='qualified_where') if l_0_qualified_where is missing else l_0_qualified_where):
        pass
        yield '\nWHERE '
        yield str((undefined(name='qualified_where') if l_0_qualified_where is missing else l_0_qualified_where))
    yield '\nGROUP BY '
    yield str(context.call((undefined(name='measured') if l_0_measured is missing else l_0_measured), (undefined(name='a') if l_0_a is missing else l_0_a)))
    yield ', '
    yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), (undefined(name='target_exact') if l_0_target_exact is missing else l_0_target_exact), str_join(('src.', (undefined(name='target') if l_0_target is missing else l_0_target), ))))
    yield '\nLIMIT '
    yield str((undefined(name='limit') if l_0_limit is missing else l_0_limit))
    yield '\n'

blocks = {}
debug_info = '7=18&9=28&10=30&12=32&13=34&14=37&16=39&17=43'