# templates/profile.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '0d643f981fc79e62633d8c515b4e0b04ea451b4df3f800f5a7c5e9078b1604f2'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'profile.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_target_exact = resolve('target_exact')
    l_0_target = resolve('target')
    l_0_attributes = resolve('attributes')
    l_0_source = resolve('source')
    l_0_where = resolve('where')
    l_0_strategy = resolve('strategy')
    l_0_drop_missing = resolve('drop_missing')
    l_0_sums = l_0_grouping_key = l_0_attribute_keys = l_0_value_limit = missing
    try:
        t_1 = environment.filters['length']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No filter named 'length' found.")
    try:
        t_2 = environment.tests['none']
    except KeyError:
        @internalcode
        def t_2(*unused):
            raise TemplateRuntimeError("No test named 'none' found.")
    pass
    l_0_sums = context.vars['sums'] = environment.get_template('sums.sql.j2', 'profile.sql.j2')._get_default_module(context)
    context.exported_vars.discard('sums')
    def macro(l_1_exact, l_1_column):
        t_3 = []
        if l_1_exact is missing:
            l_1_exact = undefined("parameter 'exact' was not provided", name='exact')
        if l_1_column is missing:
            l_1_column = undefined("parameter 'column' was not provided", name='column')
        pass
        if l_1_exact:
            pass
            t_3.extend((
                'bitsift_exact_key(',
                str(l_1_column),
                ')',
            ))
        else:
            pass
            t_3.append(
                str(l_1_column),
            )
        return concat(t_3)
    context.exported_vars.add('grouping_key')
    context.vars['grouping_key'] = l_0_grouping_key = Macro(environment, macro, 'grouping_key', ('exact', 'column'), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_4 = []
        pass
        for l_2_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            t_4.extend((
                ', a',
                str(environment.getattr(l_2_a, 'index')),
            ))
        l_2_a = missing
        return concat(t_4)
    context.exported_vars.add('attribute_keys')
    context.vars['attribute_keys'] = l_0_attribute_keys = Macro(environment, macro, 'attribute_keys', (), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_attr):
        t_5 = []
        if l_1_attr is missing:
            l_1_attr = undefined("parameter 'attr' was not provided", name='attr')
        pass
        t_5.extend((
            'CASE ',
            str(l_1_attr),
        ))
        for l_2_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            t_5.extend((
                ' WHEN ',
                str(environment.getattr(l_2_a, 'index')),
                ' THEN ',
                str(environment.getattr(l_2_a, 'max_values')),
            ))
        l_2_a = missing
        t_5.append(
            ' ELSE 1 END',
        )
        return concat(t_5)
    context.exported_vars.add('value_limit')
    context.vars['value_limit'] = l_0_value_limit = Macro(environment, macro, 'value_limit', ('attr',), False, False, False, context.eval_ctx.autoescape)
    yield 'WITH\nbase AS (\n  SELECT\n    '
    yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), (undefined(name='target_exact') if l_0_target_exact is missing else l_0_target_exact), (undefined(name='target') if l_0_target is missing else l_0_target)))
    yield ' AS y'
    l_1_loop = missing
    for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
        _loop_vars = {}
        pass
        yield ',\n    '
        if (not t_2(environment.getattr(l_1_a, 'cuts'))):
            pass
            yield 'CASE WHEN '
            yield str(environment.getattr(l_1_a, 'raw'))
            yield ' IS NULL THEN NULL'
            l_2_loop = missing
            for l_2_cut, l_2_loop in LoopContext(environment.getattr(l_1_a, 'cuts'), undefined):
                _loop_vars = {}
                pass
                yield ' WHEN '
                yield str(environment.getattr(l_1_a, 'raw'))
                yield ' < '
                yield str(l_2_cut)
                yield ' THEN '
                yield str(environment.getattr(l_2_loop, 'index0'))
            l_2_loop = l_2_cut = missing
            yield ' ELSE '
            yield str(t_1(environment.getattr(l_1_a, 'cuts')))
            yield ' END'
        else:
            pass
            yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_1_a, 'exact'), environment.getattr(l_1_a, 'raw'), _loop_vars=_loop_vars))
        yield ' AS a'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_loop = l_1_a = missing
    yield '\n  FROM '
    yield str((undefined(name='source') if l_0_source is missing else l_0_source))
    yield '\n  WHERE '
    yield str((undefined(name='target') if l_0_target is missing else l_0_target))
    yield ' IS NOT NULL'
    if (undefined(name='where') if l_0_where is missing else l_0_where):
        pass
        yield ' AND ('
        yield str((undefined(name='where') if l_0_where is missing else l_0_where))
        yield ')'
    yield '\n),'
    if ((undefined(name='strategy') if l_0_strategy is missing else l_0_strategy) == 'grouping_sets'):
        pass
        yield '\ncounts AS (\n  SELECT\n    CASE'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ' WHEN GROUPING(a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ') = 0 THEN '
            yield str(environment.getattr(l_1_a, 'index'))
        l_1_a = missing
        yield ' ELSE 0 END AS attr'
        yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
        yield ',\n    y,\n    COUNT(*) AS n\n  FROM base\n  GROUP BY GROUPING SETS ((y)'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ', (a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ', y)'
        l_1_a = missing
        yield ')\n),'
    elif ((undefined(name='strategy') if l_0_strategy is missing else l_0_strategy) == 'union_all'):
        pass
        yield '\ncounts AS (\n  SELECT 0 AS attr'
        yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
        yield ', y, 0 AS n\n  FROM base\n  WHERE 1 = 0\n  UNION ALL\n  SELECT 0 AS attr'
        for l_1_b in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ', NULL AS a'
            yield str(environment.getattr(l_1_b, 'index'))
        l_1_b = missing
        yield ', y, COUNT(*) AS n\n  FROM base\n  GROUP BY y'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield '\n  UNION ALL\n  SELECT '
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' AS attr'
            for l_2_b in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ', '
                if (environment.getattr(l_2_b, 'index') == environment.getattr(l_1_a, 'index')):
                    pass
                    yield 'a'
                    yield str(environment.getattr(l_2_b, 'index'))
                else:
                    pass
                    yield 'NULL'
                yield ' AS a'
                yield str(environment.getattr(l_2_b, 'index'))
            l_2_b = missing
            yield ', y, COUNT(*) AS n\n  FROM base\n  GROUP BY a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ', y'
        l_1_a = missing
        yield '\n),'
    else:
        pass
        yield '\nattribute_index AS (\n  SELECT 0 AS i'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield '\n  UNION ALL SELECT '
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' AS i'
        l_1_a = missing
        yield '\n),\ncounts AS (\n  SELECT\n    k.i AS attr'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ',\n    CASE WHEN k.i = '
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' THEN b.a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' END AS a'
            yield str(environment.getattr(l_1_a, 'index'))
        l_1_a = missing
        yield ',\n    b.y AS y,\n    COUNT(*) AS n\n  FROM base AS b\n  CROSS JOIN attribute_index AS k\n  GROUP BY k.i'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ', CASE WHEN k.i = '
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' THEN b.a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' END'
        l_1_a = missing
        yield ', b.y\n),'
    yield '\ncells AS (\n  SELECT\n    attr'
    yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
    yield ',\n    y,\n    n,\n    SUM(n) OVER (PARTITION BY attr'
    yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
    yield ') AS n_x,\n    ROW_NUMBER() OVER (PARTITION BY attr'
    yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
    yield ' ORDER BY y) AS x_first\n  FROM counts'
    if (undefined(name='drop_missing') if l_0_drop_missing is missing else l_0_drop_missing):
        pass
        yield '\n  WHERE attr = 0'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ' OR (attr = '
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' AND a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' IS NOT NULL)'
        l_1_a = missing
    yield '\n),\nranked AS (\n  SELECT\n    attr'
    yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
    yield ',\n    y,\n    n,\n    n_x,\n    x_first,\n    DENSE_RANK() OVER (PARTITION BY attr ORDER BY n_x DESC'
    yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
    yield ') AS value_rank\n  FROM cells\n),\nrest AS (\n  SELECT\n    attr,\n    SUM(CASE WHEN x_first = 1 THEN 1 ELSE 0 END) AS rest_values,\n    '
    yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CASE WHEN x_first = 1 THEN CAST(n_x AS DOUBLE) * LN(CAST(n_x AS DOUBLE)) ELSE 0 END'))
    yield '\n      - '
    yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CAST(n AS DOUBLE) * LN(CAST(n AS DOUBLE))'))
    yield ' AS rest_nats\n  FROM ranked\n  WHERE value_rank > '
    yield str(context.call((undefined(name='value_limit') if l_0_value_limit is missing else l_0_value_limit), 'attr'))
    yield '\n  GROUP BY attr\n),\nprofile_rows AS (\n  SELECT\n    attr AS attribute_index,\n    value_rank'
    yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
    yield ',\n    y,\n    n,\n    0 AS rest_values,\n    CAST(0 AS DOUBLE) AS rest_nats\n  FROM ranked\n  WHERE value_rank <= '
    yield str(context.call((undefined(name='value_limit') if l_0_value_limit is missing else l_0_value_limit), 'attr'))
    yield '\n  UNION ALL\n  SELECT\n    r.attr AS attribute_index,\n    MIN(r.value_rank) AS value_rank'
    for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
        _loop_vars = {}
        pass
        yield ',\n    NULL AS a'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield ',\n    r.y AS y,\n    SUM(r.n) AS n,\n    MAX(s.rest_values) AS rest_values,\n    MAX(s.rest_nats) AS rest_nats\n  FROM ranked AS r\n  JOIN rest AS s\n    ON r.attr = s.attr\n  WHERE r.value_rank > '
    yield str(context.call((undefined(name='value_limit') if l_0_value_limit is missing else l_0_value_limit), 'r.attr'))
    yield '\n  GROUP BY r.attr, r.y\n)\nSELECT * FROM profile_rows\n'

blocks = {}
debug_info = '16=31&19=33&20=40&22=55&23=58&25=69&26=76&31=95&32=98&33=102&34=105&35=108&36=123&38=128&39=130&41=138&44=141&48=152&50=160&54=163&58=165&61=172&63=176&65=193&71=200&72=204&78=208&79=212&85=219&90=230&93=232&94=234&96=236&97=239&102=249&107=251&114=253&115=255&117=257&123=259&129=261&134=263&135=267&144=270'