# templates/quantile_ranges.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '1fe4942355eeaf50c381ff03824097cbc1926ae6b25ae23a339e3eb81f9f9e05'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'quantile_ranges.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_attributes = resolve('attributes')
    l_0_source = resolve('source')
    pass
    yield 'SELECT'
    for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
        _loop_vars = {}
        pass
        yield '\n  MIN(CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE)) AS lo'
        yield str(environment.getattr(l_1_a, 'index'))
        yield ',\n  MAX(CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE)) AS hi'
        yield str(environment.getattr(l_1_a, 'index'))
        yield ','
    l_1_a = missing
    yield '\n  COUNT(*) AS row_count\nFROM '
    yield str((undefined(name='source') if l_0_source is missing else l_0_source))
    yield '\n'

blocks = {}
debug_info = '8=14&9=18&10=22&13=28'