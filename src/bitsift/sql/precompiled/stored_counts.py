# templates/stored_counts.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = 'ef26bb9fdd645450f5662f36a83167f25f165698e69dc3065c1ab8050dd753b8'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'stored_counts.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_by_partition = resolve('by_partition')
    l_0_partition = resolve('partition')
    l_0_attribute_index = resolve('attribute_index')
    l_0_value = resolve('value')
    l_0_class_ = resolve('class_')
    l_0_n = resolve('n')
    l_0_table = resolve('table')
    l_0_window = resolve('window')
    l_0_attributes = resolve('attributes')
    l_0_key = missing
    pass
    def macro(l_1_column):
        t_1 = []
        l_1_exact = resolve('exact')
        if l_1_column is missing:
            l_1_column = undefined("parameter 'column' was not provided", name='column')
        pass
        if (undefined(name='exact') if l_1_exact is missing else l_1_exact):
            pass
            t_1.extend((
                'bitsift_exact_key(',
                str(l_1_column),
                ')',
            ))
        else:
            pass
            t_1.append(
                str(l_1_column),
            )
        return concat(t_1)
    context.exported_vars.add('key')
    context.vars['key'] = l_0_key = Macro(environment, macro, 'key', ('column',), False, False, False, context.eval_ctx.autoescape)
    yield 'stored AS (\n  SELECT'
    if (undefined(name='by_partition') if l_0_by_partition is missing else l_0_by_partition):
        pass
        yield '\n    '
        yield str((undefined(name='partition') if l_0_partition is missing else l_0_partition))
        yield ' AS s1,'
    yield '\n    '
    yield str((undefined(name='attribute_index') if l_0_attribute_index is missing else l_0_attribute_index))
    yield ' AS attr,\n    '
    yield str(context.call((undefined(name='key') if l_0_key is missing else l_0_key), (undefined(name='value') if l_0_value is missing else l_0_value)))
    yield ' AS v,\n    '
    yield str(context.call((undefined(name='key') if l_0_key is missing else l_0_key), (undefined(name='class_') if l_0_class_ is missing else l_0_class_)))
    yield ' AS y,\n    CAST(SUM('
    yield str((undefined(name='n') if l_0_n is missing else l_0_n))
    yield ') AS BIGINT) AS n\n  FROM '
    yield str((undefined(name='table') if l_0_table is missing else l_0_table))
    if (undefined(name='window') if l_0_window is missing else l_0_window):
        pass
        yield '\n  WHERE '
        yield str((undefined(name='window') if l_0_window is missing else l_0_window))
    yield '\n  GROUP BY '
    if (undefined(name='by_partition') if l_0_by_partition is missing else l_0_by_partition):
        pass
        yield str((undefined(name='partition') if l_0_partition is missing else l_0_partition))
        yield ', '
    yield str((undefined(name='attribute_index') if l_0_attribute_index is missing else l_0_attribute_index))
    yield ', '
    yield str(context.call((undefined(name='key') if l_0_key is missing else l_0_key), (undefined(name='value') if l_0_value is missing else l_0_value)))
    yield ', '
    yield str(context.call((undefined(name='key') if l_0_key is missing else l_0_key), (undefined(name='class_') if l_0_class_ is missing else l_0_class_)))
    yield '\n),\ncounts AS (\n  SELECT\n    attr'
    if (undefined(name='by_partition') if l_0_by_partition is missing else l_0_by_partition):
        pass
        yield ', s1'
    for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
        _loop_vars = {}
        pass
        yield ',\n    CASE WHEN attr = '
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' THEN v END AS a'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield ',\n    y,\n    n\n  FROM stored\n)\n'

blocks = {}
debug_info = '7=21&8=27&12=43&13=46&15=49&16=51&17=53&18=55&19=57&20=58&21=61&23=63&27=73&28=76&29=80'