# templates/histogram.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '07cf1696f608aff609041322e070e99d8692d8ce7d1a7a0a0c1c02747ee6fcdc'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'histogram.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_attributes = resolve('attributes')
    pass
    yield 'WITH'
    for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
        l_1_target_key = resolve('target_key')
        l_1_source = resolve('source')
        l_1_target = resolve('target')
        l_1_where = resolve('where')
        l_1_resolution = resolve('resolution')
        _loop_vars = {}
        pass
        yield '\nhist_ordered_'
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS (\n  SELECT\n    CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE) AS v,\n    '
        yield str((undefined(name='target_key') if l_1_target_key is missing else l_1_target_key))
        yield ' AS y,\n    RANK() OVER (ORDER BY CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE) NULLS FIRST) AS value_rank,\n    DENSE_RANK() OVER (ORDER BY CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE) NULLS FIRST) AS value_number,\n    COUNT(*) OVER () AS cnt\n  FROM '
        yield str((undefined(name='source') if l_1_source is missing else l_1_source))
        yield '\n  WHERE '
        yield str((undefined(name='target') if l_1_target is missing else l_1_target))
        yield ' IS NOT NULL AND '
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' IS NOT NULL'
        if (undefined(name='where') if l_1_where is missing else l_1_where):
            pass
            yield ' AND ('
            yield str((undefined(name='where') if l_1_where is missing else l_1_where))
            yield ')'
        yield '\n),\nhist_fine_'
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS (\n  SELECT\n    v,\n    y,\n    CASE\n      WHEN MAX(value_number) OVER () <= '
        yield str((undefined(name='resolution') if l_1_resolution is missing else l_1_resolution))
        yield ' THEN value_number - 1\n      ELSE FLOOR(CAST(value_rank - 1 AS DOUBLE) * '
        yield str((undefined(name='resolution') if l_1_resolution is missing else l_1_resolution))
        yield ' / cnt)\n    END AS fine\n  FROM hist_ordered_'
        yield str(environment.getattr(l_1_a, 'index'))
        yield '\n),'
    l_1_a = l_1_target_key = l_1_source = l_1_target = l_1_where = l_1_resolution = missing
    yield '\nhistogram AS ('
    l_1_loop = missing
    for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
        _loop_vars = {}
        pass
        yield '\n  SELECT\n    '
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS attribute_index,\n    CAST(fine AS BIGINT) AS fine,\n    y,\n    COUNT(*) AS n,\n    MIN(v) AS low,\n    MAX(v) AS high\n  FROM hist_fine_'
        yield str(environment.getattr(l_1_a, 'index'))
        yield '\n  GROUP BY CAST(fine AS BIGINT), y'
        if (not environment.getattr(l_1_loop, 'last')):
            pass
            yield '\n  UNION ALL'
    l_1_loop = l_1_a = missing
    yield '\n)\nSELECT * FROM histogram\n'

blocks = {}
debug_info = '17=13&18=22&20=24&21=26&22=28&23=30&25=32&26=34&28=44&33=46&34=48&36=50&40=55&42=59&48=61&50=63'