# templates/pairs.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = 'f4667f824eb5394af0c412eac2038adfe3467ad4cbfebc7519dc4505a0a06b60'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'pairs.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_attributes = resolve('attributes')
    l_0_source = resolve('source')
    l_0_target = resolve('target')
    l_0_qualified_where = resolve('qualified_where')
    l_0_strategy = resolve('strategy')
    l_0_pairs = resolve('pairs')
    l_0_drop_missing = resolve('drop_missing')
    l_0_sums = l_0_grouping_key = l_0_in_list = missing
    try:
        t_1 = environment.filters['join']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No filter named 'join' found.")
    try:
        t_2 = environment.filters['length']
    except KeyError:
        @internalcode
        def t_2(*unused):
            raise TemplateRuntimeError("No filter named 'length' found.")
    try:
        t_3 = environment.tests['none']
    except KeyError:
        @internalcode
        def t_3(*unused):
            raise TemplateRuntimeError("No test named 'none' found.")
    pass
    l_0_sums = context.vars['sums'] = environment.get_template('sums.sql.j2', 'pairs.sql.j2')._get_default_module(context)
    context.exported_vars.discard('sums')
    def macro(l_1_exact, l_1_column):
        t_4 = []
        if l_1_exact is missing:
            l_1_exact = undefined("parameter 'exact' was not provided", name='exact')
        if l_1_column is missing:
            l_1_column = undefined("parameter 'column' was not provided", name='column')
        pass
        if l_1_exact:
            pass
            t_4.extend((
                'bitsift_exact_key(',
                str(l_1_column),
                ')',
            ))
        else:
            pass
            t_4.append(
                str(l_1_column),
            )
        return concat(t_4)
    context.exported_vars.add('grouping_key')
    context.vars['grouping_key'] = l_0_grouping_key = Macro(environment, macro, 'grouping_key', ('exact', 'column'), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_indices):
        t_5 = []
        if l_1_indices is missing:
            l_1_indices = undefined("parameter 'indices' was not provided", name='indices')
        pass
        t_5.extend((
            '(',
            str(t_1(context.eval_ctx, l_1_indices, ', ')),
            ')',
        ))
        return concat(t_5)
    context.exported_vars.add('in_list')
    context.vars['in_list'] = l_0_in_list = Macro(environment, macro, 'in_list', ('indices',), False, False, False, context.eval_ctx.autoescape)
    yield 'WITH\nbase AS (\n  SELECT'
    l_1_loop = missing
    for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
        _loop_vars = {}
        pass
        yield '\n    '
        if (not t_3(environment.getattr(l_1_a, 'cuts'))):
            pass
            yield 'CASE WHEN '
            yield str(environment.getattr(l_1_a, 'value'))
            yield ' IS NULL THEN NULL'
            l_2_loop = missing
            for l_2_cut, l_2_loop in LoopContext(environment.getattr(l_1_a, 'cuts'), undefined):
                _loop_vars = {}
                pass
                yield ' WHEN CAST('
                yield str(environment.getattr(l_1_a, 'value'))
                yield ' AS DOUBLE) < '
                yield str(l_2_cut)
                yield ' THEN '
                yield str(environment.getattr(l_2_loop, 'index0'))
            l_2_loop = l_2_cut = missing
            yield ' ELSE '
            yield str(t_2(environment.getattr(l_1_a, 'cuts')))
            yield ' END'
        else:
            pass
            yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_1_a, 'exact'), environment.getattr(l_1_a, 'value'), _loop_vars=_loop_vars))
        yield ' AS a'
        yield str(environment.getattr(l_1_a, 'index'))
        if (not environment.getattr(l_1_loop, 'last')):
            pass
            yield ','
    l_1_loop = l_1_a = missing
    yield '\n  FROM '
    yield str((undefined(name='source') if l_0_source is missing else l_0_source))
    yield ' AS src\n  WHERE src.'
    yield str((undefined(name='target') if l_0_target is missing else l_0_target))
    yield ' IS NOT NULL'
    if (undefined(name='qualified_where') if l_0_qualified_where is missing else l_0_qualified_where):
        pass
        yield ' AND ('
        yield str((undefined(name='qualified_where') if l_0_qualified_where is missing else l_0_qualified_where))
        yield ')'
    yield '\n),'
    if ((undefined(name='strategy') if l_0_strategy is missing else l_0_strategy) == 'grouping_sets'):
        pass
        yield '\ncounts AS (\n  SELECT\n    CASE'
        for l_1_p in (undefined(name='pairs') if l_0_pairs is missing else l_0_pairs):
            _loop_vars = {}
            pass
            yield ' WHEN GROUPING(a'
            yield str(environment.getattr(l_1_p, 'left'))
            yield ') = 0 AND GROUPING(a'
            yield str(environment.getattr(l_1_p, 'right'))
            yield ') = 0 THEN '
            yield str(environment.getattr(l_1_p, 'index'))
        l_1_p = missing
        yield ' ELSE 0 END AS pair'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ',\n    a'
            yield str(environment.getattr(l_1_a, 'index'))
        l_1_a = missing
        yield ',\n    COUNT(*) AS n\n  FROM base\n  GROUP BY GROUPING SETS ('
        l_1_loop = missing
        for l_1_p, l_1_loop in LoopContext((undefined(name='pairs') if l_0_pairs is missing else l_0_pairs), undefined):
            _loop_vars = {}
            pass
            yield '(a'
            yield str(environment.getattr(l_1_p, 'left'))
            yield ', a'
            yield str(environment.getattr(l_1_p, 'right'))
            yield ')'
            if (not environment.getattr(l_1_loop, 'last')):
                pass
                yield ', '
        l_1_loop = l_1_p = missing
        yield ')\n),'
    elif ((undefined(name='strategy') if l_0_strategy is missing else l_0_strategy) == 'union_all'):
        pass
        yield '\ncounts AS (\n  SELECT 0 AS pair'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ', a'
            yield str(environment.getattr(l_1_a, 'index'))
        l_1_a = missing
        yield ', 0 AS n\n  FROM base\n  WHERE 1 = 0'
        for l_1_p in (undefined(name='pairs') if l_0_pairs is missing else l_0_pairs):
            _loop_vars = {}
            pass
            yield '\n  UNION ALL\n  SELECT '
            yield str(environment.getattr(l_1_p, 'index'))
            yield ' AS pair'
            for l_2_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ', '
                if ((environment.getattr(l_2_a, 'index') == environment.getattr(l_1_p, 'left')) or (environment.getattr(l_2_a, 'index') == environment.getattr(l_1_p, 'right'))):
                    pass
                    yield 'a'
                    yield str(environment.getattr(l_2_a, 'index'))
                else:
                    pass
                    yield 'NULL'
                yield ' AS a'
                yield str(environment.getattr(l_2_a, 'index'))
            l_2_a = missing
            yield ', COUNT(*) AS n\n  FROM base\n  GROUP BY a'
            yield str(environment.getattr(l_1_p, 'left'))
            yield ', a'
            yield str(environment.getattr(l_1_p, 'right'))
        l_1_p = missing
        yield '\n),'
    else:
        pass
        yield '\npair_index AS ('
        l_1_loop = missing
        for l_1_p, l_1_loop in LoopContext((undefined(name='pairs') if l_0_pairs is missing else l_0_pairs), undefined):
            _loop_vars = {}
            pass
            yield '\n  '
            if (not environment.getattr(l_1_loop, 'first')):
                pass
                yield 'UNION ALL '
            yield 'SELECT '
            yield str(environment.getattr(l_1_p, 'index'))
            yield ' AS i'
        l_1_loop = l_1_p = missing
        yield '\n),\ncounts AS (\n  SELECT\n    k.i AS pair'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ',\n    CASE WHEN k.i IN '
            yield str(context.call((undefined(name='in_list') if l_0_in_list is missing else l_0_in_list), environment.getattr(l_1_a, 'pairs'), _loop_vars=_loop_vars))
            yield ' THEN b.a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' END AS a'
            yield str(environment.getattr(l_1_a, 'index'))
        l_1_a = missing
        yield ',\n    COUNT(*) AS n\n  FROM base AS b\n  CROSS JOIN pair_index AS k\n  GROUP BY k.i'
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ', CASE WHEN k.i IN '
            yield str(context.call((undefined(name='in_list') if l_0_in_list is missing else l_0_in_list), environment.getattr(l_1_a, 'pairs'), _loop_vars=_loop_vars))
            yield ' THEN b.a'
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' END'
        l_1_a = missing
        yield '\n),'
    yield '\nsides AS (\n  SELECT\n    pair,\n    n'
    def t_6(fiter):
        for l_1_a in fiter:
            if environment.getattr(l_1_a, 'left_pairs'):
                yield l_1_a
    for l_1_a in t_6((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes)):
        _loop_vars = {}
        pass
        yield ',\n    CASE WHEN pair IN '
        yield str(context.call((undefined(name='in_list') if l_0_in_list is missing else l_0_in_list), environment.getattr(l_1_a, 'left_pairs'), _loop_vars=_loop_vars))
        yield ' THEN a'
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' END AS l'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    def t_7(fiter):
        for l_1_a in fiter:
            if environment.getattr(l_1_a, 'right_pairs'):
                yield l_1_a
    for l_1_a in t_7((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes)):
        _loop_vars = {}
        pass
        yield ',\n    CASE WHEN pair IN '
        yield str(context.call((undefined(name='in_list') if l_0_in_list is missing else l_0_in_list), environment.getattr(l_1_a, 'right_pairs'), _loop_vars=_loop_vars))
        yield ' THEN a'
        yield str(environment.getattr(l_1_a, 'index'))
        yield ' END AS r'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield '\n  FROM counts\n  WHERE pair > 0'
    if (undefined(name='drop_missing') if l_0_drop_missing is missing else l_0_drop_missing):
        pass
        yield '\n    AND ('
        l_1_loop = missing
        for l_1_p, l_1_loop in LoopContext((undefined(name='pairs') if l_0_pairs is missing else l_0_pairs), undefined):
            _loop_vars = {}
            pass
            if (not environment.getattr(l_1_loop, 'first')):
                pass
                yield ' OR '
            yield '(pair = '
            yield str(environment.getattr(l_1_p, 'index'))
            yield ' AND a'
            yield str(environment.getattr(l_1_p, 'left'))
            yield ' IS NOT NULL AND a'
            yield str(environment.getattr(l_1_p, 'right'))
            yield ' IS NOT NULL)'
        l_1_loop = l_1_p = missing
        yield ')'
    yield '\n),\ncells AS (\n  SELECT\n    pair,\n    n,\n    SUM(n) OVER (PARTITION BY pair'
    def t_8(fiter):
        for l_1_a in fiter:
            if environment.getattr(l_1_a, 'left_pairs'):
                yield l_1_a
    for l_1_a in t_8((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes)):
        _loop_vars = {}
        pass
        yield ', l'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield ') AS n_l,\n    ROW_NUMBER() OVER (PARTITION BY pair'
    def t_9(fiter):
        for l_1_a in fiter:
            if environment.getattr(l_1_a, 'left_pairs'):
                yield l_1_a
    for l_1_a in t_9((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes)):
        _loop_vars = {}
        pass
        yield ', l'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield ' ORDER BY n) AS l_first,\n    SUM(n) OVER (PARTITION BY pair'
    def t_10(fiter):
        for l_1_a in fiter:
            if environment.getattr(l_1_a, 'right_pairs'):
                yield l_1_a
    for l_1_a in t_10((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes)):
        _loop_vars = {}
        pass
        yield ', r'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield ') AS n_r,\n    ROW_NUMBER() OVER (PARTITION BY pair'
    def t_11(fiter):
        for l_1_a in fiter:
            if environment.getattr(l_1_a, 'right_pairs'):
                yield l_1_a
    for l_1_a in t_11((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes)):
        _loop_vars = {}
        pass
        yield ', r'
        yield str(environment.getattr(l_1_a, 'index'))
    l_1_a = missing
    yield ' ORDER BY n) AS r_first\n  FROM sides\n),\nper_pair AS (\n  SELECT\n    pair,\n    CAST(SUM(n) AS BIGINT) AS n_total,\n    CAST(SUM(n) AS DOUBLE) AS n_total_f,\n    CAST(SUM(CASE WHEN l_first = 1 THEN 1 ELSE 0 END) AS BIGINT) AS n_left,\n    CAST(SUM(CASE WHEN r_first = 1 THEN 1 ELSE 0 END) AS BIGINT) AS n_right,\n    '
    yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CAST(n AS DOUBLE) * LN(CAST(n AS DOUBLE))'))
    yield ' AS s_lr,\n    '
    yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CASE WHEN l_first = 1 THEN CAST(n_l AS DOUBLE) * LN(CAST(n_l AS DOUBLE)) ELSE 0 END'))
    yield ' AS s_l,\n    '
    yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CASE WHEN r_first = 1 THEN CAST(n_r AS DOUBLE) * LN(CAST(n_r AS DOUBLE)) ELSE 0 END'))
    yield ' AS s_r\n  FROM cells\n  GROUP BY pair\n),\nentropies AS (\n  SELECT\n    pair,\n    n_total,\n    n_left,\n    n_right,\n    CASE WHEN n_left > 1 THEN (LN(n_total_f) - s_l / n_total_f) / LN(2) ELSE 0 END AS h_left,\n    CASE WHEN n_right > 1 THEN (LN(n_total_f) - s_r / n_total_f) / LN(2) ELSE 0 END AS h_right,\n    (n_total_f * LN(n_total_f) - s_l - s_r + s_lr) / n_total_f / LN(2) AS mi_raw\n  FROM per_pair\n),\ninformation AS (\n  SELECT\n    pair,\n    n_total,\n    n_left,\n    n_right,\n    h_left,\n    h_right,\n    CASE WHEN n_left > 1 AND n_right > 1 AND mi_raw > 0 THEN mi_raw ELSE 0 END AS mi\n  FROM entropies\n)\nSELECT\n  pair AS pair_index,\n  n_total AS rows_used,\n  n_left AS left_values,\n  n_right AS right_values,\n  h_left AS left_entropy,\n  h_right AS right_entropy,\n  mi AS mutual_information,\n  CASE WHEN h_left + h_right > 0 THEN 2 * mi / (h_left + h_right) ELSE 0 END AS symmetric_uncertainty\nFROM information\nORDER BY pair\n'

blocks = {}
debug_info = '18=37&19=39&20=46&22=61&23=68&28=76&29=80&30=83&31=86&32=101&34=109&35=111&37=119&42=122&43=133&44=137&48=141&50=154&54=157&57=164&59=168&61=185&66=194&67=198&73=206&74=210&79=217&89=228&90=236&92=242&93=250&97=257&98=261&105=277&106=288&107=299&108=310&120=321&121=323&122=325'