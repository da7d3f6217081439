# templates/quantile_cells.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '92025039640ad55e6ebf3e2637468e7064ac8a526d230c88f2a8b4499be3f4c6'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'quantile_cells.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_attributes = resolve('attributes')
    pass
    yield 'SELECT * FROM ('
    l_1_loop = missing
    for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
        l_1_target_key = resolve('target_key')
        l_1_source = resolve('source')
        l_1_where = resolve('where')
        _loop_vars = {}
        pass
        yield '\nSELECT\n  '
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS attribute_index,\n  '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ' AS bucket,\n  '
        yield str((undefined(name='target_key') if l_1_target_key is missing else l_1_target_key))
        yield ' AS y,\n  COUNT(*) AS n\nFROM '
        yield str((undefined(name='source') if l_1_source is missing else l_1_source))
        if (undefined(name='where') if l_1_where is missing else l_1_where):
            pass
            yield '\nWHERE '
            yield str((undefined(name='where') if l_1_where is missing else l_1_where))
        yield '\nGROUP BY '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ', '
        yield str((undefined(name='target_key') if l_1_target_key is missing else l_1_target_key))
        if (not environment.getattr(l_1_loop, 'last')):
            pass
            yield '\nUNION ALL'
    l_1_loop = l_1_a = l_1_target_key = l_1_source = l_1_where = missing
    yield '\n) AS bucket_cells\n'

blocks = {}
debug_info = '10=14&12=21&13=23&14=25&16=27&17=28&18=31&20=33&21=36'