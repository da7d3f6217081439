# templates/quantile_splits.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '39b27d85c5d7b6412b78abb79b2b61d8263557d77442b2242615a383adaf8139'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'quantile_splits.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_attributes = resolve('attributes')
    l_0_positions = resolve('positions')
    l_0_picks = resolve('picks')
    try:
        t_1 = environment.filters['join']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No filter named 'join' found.")
    pass
    yield 'WITH bucket_rows AS ('
    l_1_loop = missing
    for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
        l_1_target_key = resolve('target_key')
        l_1_source = resolve('source')
        l_1_target = resolve('target')
        l_1_where = resolve('where')
        _loop_vars = {}
        pass
        yield '\n  SELECT\n    '
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS attribute_index,\n    '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ' AS bucket,\n    CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE) AS v,\n    '
        yield str((undefined(name='target_key') if l_1_target_key is missing else l_1_target_key))
        yield ' AS y\n  FROM '
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
        yield '\n    AND '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ' IN ('
        yield str(t_1(context.eval_ctx, environment.getattr(l_1_a, 'buckets'), ', '))
        yield ')'
        if (not environment.getattr(l_1_loop, 'last')):
            pass
            yield '\n  UNION ALL'
    l_1_loop = l_1_a = l_1_target_key = l_1_source = l_1_target = l_1_where = missing
    yield '\n),\nnumbered AS (\n  SELECT\n    attribute_index,\n    bucket,\n    v,\n    ROW_NUMBER() OVER (PARTITION BY attribute_index, bucket ORDER BY v) AS position,\n    COUNT(*) OVER (PARTITION BY attribute_index, bucket) AS bucket_rows\n  FROM bucket_rows\n),\npicked AS (\n  SELECT attribute_index, bucket, position, v, bucket_rows\n  FROM numbered\n  WHERE position IN ('
    yield str(t_1(context.eval_ctx, (undefined(name='positions') if l_0_positions is missing else l_0_positions), ', '))
    yield ')\n    AND ('
    l_1_loop = missing
    for (l_1_index, l_1_bucket, l_1_positions), l_1_loop in LoopContext((undefined(name='picks') if l_0_picks is missing else l_0_picks), undefined):
        _loop_vars = {}
        pass
        if (not environment.getattr(l_1_loop, 'first')):
            pass
            yield '\n    OR '
        yield '(attribute_index = '
        yield str(l_1_index)
        yield ' AND bucket = '
        yield str(l_1_bucket)
        yield ' AND position IN ('
        yield str(t_1(context.eval_ctx, l_1_positions, ', '))
        yield '))'
    l_1_loop = l_1_index = l_1_bucket = l_1_positions = missing
    yield ')\n)\nSELECT\n  p.attribute_index,\n  p.bucket,\n  p.position,\n  p.v,\n  p.bucket_rows,\n  r.y,\n  COUNT(CASE WHEN r.v < p.v THEN 1 END) AS n_less,\n  COUNT(CASE WHEN r.v = p.v THEN 1 END) AS n_equal\nFROM picked AS p\nJOIN bucket_rows AS r\n  ON r.attribute_index = p.attribute_index AND r.bucket = p.bucket\nGROUP BY p.attribute_index, p.bucket, p.position, p.v, p.bucket_rows, r.y\n'

blocks = {}
debug_info = '12=22&14=30&15=32&16=34&17=36&18=38&19=40&20=50&21=54&38=59&39=62&40=69'