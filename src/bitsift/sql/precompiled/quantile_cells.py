# templates/quantile_cells.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '6ccd3b08264bb34bb9c5d2156d594ce898640e581da4fac93a45c61c3396685e'
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
        yield ' AS y,\n  COUNT(*) AS n,\n  MIN(CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE)) AS v_low,\n  MAX(CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE)) AS v_high\nFROM '
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
debug_info = '13=14&15=21&16=23&17=25&19=27&20=29&21=31&22=32&23=35&25=37&26=40'