# templates/quantile_buckets.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = 'd395049a22e7c1ea5b8888b5c0715d6a72f3166564c5e1f494c49f521e1d31e2'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'quantile_buckets.sql.j2'

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
        l_1_source = resolve('source')
        l_1_target = resolve('target')
        l_1_where = resolve('where')
        _loop_vars = {}
        pass
        yield '\nSELECT\n  '
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS attribute_index,\n  '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ' AS bucket,\n  COUNT(*) AS n\nFROM '
        yield str((undefined(name='source') if l_1_source is missing else l_1_source))
        yield '\nWHERE '
        yield str((undefined(name='target') if l_1_target is missing else l_1_target))
        yield ' IS NOT NULL AND '
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' IS NOT NULL'
        if (undefined(name='where') if l_1_where is missing else l_1_where):
            pass
            yield ' AND ('
            yield str((undefined(name='where') if l_1_where is missing else l_1_where))
            yield ')'
        yield '\nGROUP BY '
        yield str(environment.getattr(l_1_a, 'bucket'))
        if (not environment.getattr(l_1_loop, 'last')):
            pass
            yield '\nUNION ALL'
    l_1_loop = l_1_a = l_1_source = l_1_target = l_1_where = missing
    yield '\n) AS bucket_counts\n'

blocks = {}
debug_info = '8=14&10=21&11=23&13=25&14=27&15=37&16=38'