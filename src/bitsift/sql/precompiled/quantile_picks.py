# templates/quantile_picks.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '298b02304f3cb1463eb653a16037ebad969e234f6cf2745d18818d17bba89984'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'quantile_picks.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_attributes = resolve('attributes')
    try:
        t_1 = environment.filters['join']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No filter named 'join' found.")
    pass
    yield 'SELECT * FROM ('
    l_1_loop = missing
    for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
        l_1_source = resolve('source')
        l_1_target = resolve('target')
        l_1_where = resolve('where')
        _loop_vars = {}
        pass
        yield '\nSELECT\n  attribute_index,\n  bucket,\n  position,\n  v,\n  bucket_rows\nFROM (\n  SELECT\n    '
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' AS attribute_index,\n    '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ' AS bucket,\n    CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE) AS v,\n    ROW_NUMBER() OVER (PARTITION BY '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ' ORDER BY CAST('
        yield str(environment.getattr(l_1_a, 'raw'))
        yield ' AS DOUBLE)) AS position,\n    COUNT(*) OVER (PARTITION BY '
        yield str(environment.getattr(l_1_a, 'bucket'))
        yield ') AS bucket_rows\n  FROM '
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
        yield ')\n) AS picked_'
        yield str(environment.getattr(l_1_a, 'index'))
        yield '\nWHERE '
        l_2_loop = missing
        for (l_2_bucket, l_2_position), l_2_loop in LoopContext(environment.getattr(l_1_a, 'picks'), undefined):
            _loop_vars = {}
            pass
            if (not environment.getattr(l_2_loop, 'first')):
                pass
                yield ' OR '
            yield '(bucket = '
            yield str(l_2_bucket)
            yield ' AND position = '
            yield str(l_2_position)
            yield ')'
        l_2_loop = l_2_bucket = l_2_position = missing
        if (not environment.getattr(l_1_loop, 'last')):
            pass
            yield '\nUNION ALL'
    l_1_loop = l_1_a = l_1_source = l_1_target = l_1_where = missing
    yield '\n) AS picked\n'

blocks = {}
debug_info = '9=20&18=27&19=29&20=31&21=33&22=37&23=39&24=41&25=51&26=55&27=58&28=70'