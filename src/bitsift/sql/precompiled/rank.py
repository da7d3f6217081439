# templates/rank.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = 'df689c4569acb155b6b5d08da6c9a9bac23424037df06750b90c486cb62cd7f3'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'rank.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_shared = resolve('shared')
    l_0_stored_counts = resolve('stored_counts')
    l_0_bounds = resolve('bounds')
    l_0_bounds_macros = resolve('bounds_macros')
    l_0_source = resolve('source')
    l_0_target = resolve('target')
    l_0_where = resolve('where')
    l_0_target_exact = resolve('target_exact')
    l_0_segments = resolve('segments')
    l_0_weight = resolve('weight')
    l_0_attributes = resolve('attributes')
    l_0_qualified_where = resolve('qualified_where')
    l_0_strategy = resolve('strategy')
    l_0_counts_only = resolve('counts_only')
    l_0_drop_missing = resolve('drop_missing')
    l_0_log_ratio = resolve('log_ratio')
    l_0_z = resolve('z')
    l_0_target_label = resolve('target_label')
    l_0_whole_weights = resolve('whole_weights')
    l_0_order_by_gain = resolve('order_by_gain')
    l_0_sums = l_0_grouping_key = l_0_attribute_keys = l_0_segment_keys = l_0_segments_then = l_0_largest_double = l_0_measures = l_0_empty_measures = l_0_share = l_0_base_columns = l_0_count_columns = missing
    try:
        t_1 = environment.filters['length']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No filter named 'length' found.")
    try:
        t_2 = environment.tests['defined']
    except KeyError:
        @internalcode
        def t_2(*unused):
            raise TemplateRuntimeError("No test named 'defined' found.")
    try:
        t_3 = environment.tests['none']
    except KeyError:
        @internalcode
        def t_3(*unused):
            raise TemplateRuntimeError("No test named 'none' found.")
    pass
    l_0_sums = context.vars['sums'] = environment.get_template('sums.sql.j2', 'rank.sql.j2')._get_default_module(context)
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
    def macro():
        t_5 = []
        pass
        for l_2_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            t_5.extend((
                ', a',
                str(environment.getattr(l_2_a, 'index')),
            ))
        l_2_a = missing
        return concat(t_5)
    context.exported_vars.add('attribute_keys')
    context.vars['attribute_keys'] = l_0_attribute_keys = Macro(environment, macro, 'attribute_keys', (), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_prefix):
        t_6 = []
        if l_1_prefix is missing:
            l_1_prefix = ''
        pass
        for l_2_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            t_6.extend((
                ', ',
                str(l_1_prefix),
                's',
                str(environment.getattr(l_2_s, 'index')),
            ))
        l_2_s = missing
        return concat(t_6)
    context.exported_vars.add('segment_keys')
    context.vars['segment_keys'] = l_0_segment_keys = Macro(environment, macro, 'segment_keys', ('prefix',), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_7 = []
        pass
        for l_2_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            t_7.extend((
                's',
                str(environment.getattr(l_2_s, 'index')),
                ', ',
            ))
        l_2_s = missing
        return concat(t_7)
    context.exported_vars.add('segments_then')
    context.vars['segments_then'] = l_0_segments_then = Macro(environment, macro, 'segments_then', (), False, False, False, context.eval_ctx.autoescape)
    l_0_largest_double = '1.7976931348623157e308'
    context.vars['largest_double'] = l_0_largest_double
    context.exported_vars.add('largest_double')
    def macro(l_1_prefix):
        t_8 = []
        if l_1_prefix is missing:
            l_1_prefix = ''
        pass
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            t_8.extend((
                '\n    SUM(CASE WHEN ',
                str(l_1_prefix),
                'w > 0 AND ',
                str(l_1_prefix),
                'w <= ',
                str((undefined(name='largest_double') if l_0_largest_double is missing else l_0_largest_double)),
                ' THEN ',
                str(l_1_prefix),
                'w END) AS n,\n    COUNT(CASE WHEN ',
                str(l_1_prefix),
                'w > 0 AND ',
                str(l_1_prefix),
                'w <= ',
                str((undefined(name='largest_double') if l_0_largest_double is missing else l_0_largest_double)),
                ' THEN 1 END) AS m,\n    COUNT(*) AS r,\n    COUNT(CASE WHEN ',
                str(l_1_prefix),
                'w < 0 OR ',
                str(l_1_prefix),
                'w > ',
                str((undefined(name='largest_double') if l_0_largest_double is missing else l_0_largest_double)),
                ' THEN 1 END) AS w_negative,\n    COUNT(CASE WHEN ',
                str(l_1_prefix),
                'w > 0 AND ',
                str(l_1_prefix),
                'w <= ',
                str((undefined(name='largest_double') if l_0_largest_double is missing else l_0_largest_double)),
                ' AND ',
                str(l_1_prefix),
                'w <> FLOOR(',
                str(l_1_prefix),
                'w) THEN 1 END) AS w_fractional',
            ))
        else:
            pass
            t_8.append(
                '\n    COUNT(*) AS n',
            )
        return concat(t_8)
    context.exported_vars.add('measures')
    context.vars['measures'] = l_0_measures = Macro(environment, macro, 'measures', ('prefix',), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_9 = []
        pass
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            t_9.append(
                'CAST(0 AS DOUBLE) AS n, 0 AS m, 0 AS r, 0 AS w_negative, 0 AS w_fractional',
            )
        else:
            pass
            t_9.append(
                '0 AS n',
            )
        return concat(t_9)
    context.exported_vars.add('empty_measures')
    context.vars['empty_measures'] = l_0_empty_measures = Macro(environment, macro, 'empty_measures', (), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_step, l_1_columns):
        t_10 = []
        if l_1_step is missing:
            l_1_step = undefined("parameter 'step' was not provided", name='step')
        if l_1_columns is missing:
            l_1_columns = undefined("parameter 'columns' was not provided", name='columns')
        pass
        if (l_1_step in (undefined(name='shared') if l_0_shared is missing else l_0_shared)):
            pass
            t_10.extend((
                '\n  UNION ALL\n  SELECT ',
                str(l_1_columns),
                ' FROM ',
                str(l_1_step),
                ' WHERE 1 = 0',
            ))
        return concat(t_10)
    context.exported_vars.add('share')
    context.vars['share'] = l_0_share = Macro(environment, macro, 'share', ('step', 'columns'), False, False, False, context.eval_ctx.autoescape)
    t_11 = []
    pass
    t_11.extend((
        'y',
        str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys))),
    ))
    if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
        pass
        t_11.append(
            ', w',
        )
    t_11.append(
        str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys))),
    )
    l_0_base_columns = (Markup if context.eval_ctx.autoescape else identity)(concat(t_11))
    context.vars['base_columns'] = l_0_base_columns
    context.exported_vars.add('base_columns')
    t_12 = []
    pass
    t_12.extend((
        'attr',
        str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys))),
        str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys))),
        ', y, n',
    ))
    if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
        pass
        t_12.append(
            ', m, r, w_negative, w_fractional',
        )
    l_0_count_columns = (Markup if context.eval_ctx.autoescape else identity)(concat(t_12))
    context.vars['count_columns'] = l_0_count_columns
    context.exported_vars.add('count_columns')
    yield 'WITH'
    if (undefined(name='shared') if l_0_shared is missing else l_0_shared):
        pass
        yield ' RECURSIVE'
    if (t_2((undefined(name='stored_counts') if l_0_stored_counts is missing else l_0_stored_counts)) and (undefined(name='stored_counts') if l_0_stored_counts is missing else l_0_stored_counts)):
        pass
        yield '\n'
        yield str((undefined(name='stored_counts') if l_0_stored_counts is missing else l_0_stored_counts))
        yield ','
    else:
        pass
        if (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds):
            pass
            l_0_bounds_macros = context.vars['bounds_macros'] = environment.get_template('bounds.sql.j2', 'rank.sql.j2')._get_default_module(context)
            context.exported_vars.discard('bounds_macros')
            yield '\n'
            yield str(context.call(environment.getattr((undefined(name='bounds_macros') if l_0_bounds_macros is missing else l_0_bounds_macros), 'bounds_ctes'), (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds), (undefined(name='source') if l_0_source is missing else l_0_source), (undefined(name='target') if l_0_target is missing else l_0_target), (undefined(name='where') if l_0_where is missing else l_0_where)))
            yield ','
        yield '\nbase AS (\n  SELECT\n    '
        yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), (undefined(name='target_exact') if l_0_target_exact is missing else l_0_target_exact), str_join(('src.', (undefined(name='target') if l_0_target is missing else l_0_target), ))))
        yield ' AS y'
        for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            yield ',\n    '
            yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_1_s, 'exact'), str_join(('src.', environment.getattr(l_1_s, 'column'), )), _loop_vars=_loop_vars))
            yield ' AS s'
            yield str(environment.getattr(l_1_s, 'index'))
        l_1_s = missing
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            yield ',\n    CAST(src.'
            yield str((undefined(name='weight') if l_0_weight is missing else l_0_weight))
            yield ' AS DOUBLE) AS w'
        l_1_loop = missing
        for l_1_a, l_1_loop in LoopContext((undefined(name='attributes') if l_0_attributes is missing else l_0_attributes), undefined):
            _loop_vars = {}
            pass
            yield ',\n    '
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
                yield str(t_1(environment.getattr(l_1_a, 'cuts')))
                yield ' END'
            else:
                pass
                yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_1_a, 'exact'), environment.getattr(l_1_a, 'value'), _loop_vars=_loop_vars))
            yield ' AS a'
            yield str(environment.getattr(l_1_a, 'index'))
        l_1_loop = l_1_a = missing
        yield '\n  FROM '
        yield str((undefined(name='source') if l_0_source is missing else l_0_source))
        yield ' AS src'
        if (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds):
            pass
            yield ' CROSS JOIN bounds'
        if (undefined(name='qualified_where') if l_0_qualified_where is missing else l_0_qualified_where):
            pass
            yield '\n  WHERE '
            yield str((undefined(name='qualified_where') if l_0_qualified_where is missing else l_0_qualified_where))
        yield str(context.call((undefined(name='share') if l_0_share is missing else l_0_share), 'base', (undefined(name='base_columns') if l_0_base_columns is missing else l_0_base_columns)))
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
            yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
            yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
            yield ',\n    y,'
            yield str(context.call((undefined(name='measures') if l_0_measures is missing else l_0_measures)))
            yield '\n  FROM base\n  GROUP BY GROUPING SETS (('
            yield str(context.call((undefined(name='segments_then') if l_0_segments_then is missing else l_0_segments_then)))
            yield 'y)'
            for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ', ('
                yield str(context.call((undefined(name='segments_then') if l_0_segments_then is missing else l_0_segments_then), _loop_vars=_loop_vars))
                yield 'a'
                yield str(environment.getattr(l_1_a, 'index'))
                yield ', y)'
            l_1_a = missing
            yield ')'
            yield str(context.call((undefined(name='share') if l_0_share is missing else l_0_share), 'counts', (undefined(name='count_columns') if l_0_count_columns is missing else l_0_count_columns)))
            yield '\n),'
        elif ((undefined(name='strategy') if l_0_strategy is missing else l_0_strategy) == 'union_all'):
            pass
            yield '\ncounts AS (\n  SELECT 0 AS attr'
            yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
            yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
            yield ', y, '
            yield str(context.call((undefined(name='empty_measures') if l_0_empty_measures is missing else l_0_empty_measures)))
            yield '\n  FROM base\n  WHERE 1 = 0\n  UNION ALL\n  SELECT 0 AS attr'
            yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
            for l_1_b in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ', NULL AS a'
                yield str(environment.getattr(l_1_b, 'index'))
            l_1_b = missing
            yield ', y,'
            yield str(context.call((undefined(name='measures') if l_0_measures is missing else l_0_measures)))
            yield '\n  FROM base\n  GROUP BY '
            yield str(context.call((undefined(name='segments_then') if l_0_segments_then is missing else l_0_segments_then)))
            yield 'y'
            for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield '\n  UNION ALL\n  SELECT '
                yield str(environment.getattr(l_1_a, 'index'))
                yield ' AS attr'
                yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys), _loop_vars=_loop_vars))
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
                yield ', y,'
                yield str(context.call((undefined(name='measures') if l_0_measures is missing else l_0_measures), _loop_vars=_loop_vars))
                yield '\n  FROM base\n  GROUP BY '
                yield str(context.call((undefined(name='segments_then') if l_0_segments_then is missing else l_0_segments_then), _loop_vars=_loop_vars))
                yield 'a'
                yield str(environment.getattr(l_1_a, 'index'))
                yield ', y'
            l_1_a = missing
            yield str(context.call((undefined(name='share') if l_0_share is missing else l_0_share), 'counts', (undefined(name='count_columns') if l_0_count_columns is missing else l_0_count_columns)))
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
            for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
                _loop_vars = {}
                pass
                yield ',\n    b.s'
                yield str(environment.getattr(l_1_s, 'index'))
                yield ' AS s'
                yield str(environment.getattr(l_1_s, 'index'))
            l_1_s = missing
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
            yield ',\n    b.y AS y,'
            yield str(context.call((undefined(name='measures') if l_0_measures is missing else l_0_measures), 'b.'))
            yield '\n  FROM base AS b\n  CROSS JOIN attribute_index AS k\n  GROUP BY k.i'
            yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys), 'b.'))
            for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ', CASE WHEN k.i = '
                yield str(environment.getattr(l_1_a, 'index'))
                yield ' THEN b.a'
                yield str(environment.getattr(l_1_a, 'index'))
                yield ' END'
            l_1_a = missing
            yield ', b.y'
            yield str(context.call((undefined(name='share') if l_0_share is missing else l_0_share), 'counts', (undefined(name='count_columns') if l_0_count_columns is missing else l_0_count_columns)))
            yield '\n),'
    if (t_2((undefined(name='counts_only') if l_0_counts_only is missing else l_0_counts_only)) and (undefined(name='counts_only') if l_0_counts_only is missing else l_0_counts_only)):
        pass
        yield '\ncounted AS (\n  SELECT attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
        yield ', y, n FROM counts\n)\nSELECT * FROM counted'
    else:
        pass
        yield '\ncells AS (\n  SELECT\n    attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ',\n    n,'
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            yield '\n    m,'
        yield '\n    SUM(n) OVER (PARTITION BY attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
        yield ') AS n_x,\n    ROW_NUMBER() OVER (PARTITION BY attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
        yield ' ORDER BY y) AS x_first,\n    SUM(n) OVER (PARTITION BY attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ', y) AS n_y,\n    ROW_NUMBER() OVER (PARTITION BY attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ', y ORDER BY n) AS y_first,\n    SUM(n) OVER (PARTITION BY attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ') AS n_all\n  FROM counts\n  WHERE y IS NOT NULL'
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            yield '\n    AND n > 0'
        if (undefined(name='drop_missing') if l_0_drop_missing is missing else l_0_drop_missing):
            pass
            yield '\n    AND (attr = 0'
            for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ' OR (attr = '
                yield str(environment.getattr(l_1_a, 'index'))
                yield ' AND a'
                yield str(environment.getattr(l_1_a, 'index'))
                yield ' IS NOT NULL)'
            l_1_a = missing
            yield ')'
        yield '\n),'
        l_0_log_ratio = '((LN(CAST(n AS DOUBLE)) - LN(CAST(n_x AS DOUBLE))) - (LN(CAST(n_y AS DOUBLE)) - LN(CAST(n_all AS DOUBLE))))'
        context.vars['log_ratio'] = l_0_log_ratio
        context.exported_vars.add('log_ratio')
        yield '\nper_attribute AS (\n  SELECT\n    attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ',\n    CAST(SUM('
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            yield 'm'
        else:
            pass
            yield 'n'
        yield ') AS BIGINT) AS n_total,\n    CAST(SUM(n) AS DOUBLE) AS n_total_f,\n    CAST(SUM(CASE WHEN x_first = 1 THEN 1 ELSE 0 END) AS BIGINT) AS n_values,\n    CAST(SUM(CASE WHEN y_first = 1 THEN 1 ELSE 0 END) AS BIGINT) AS n_classes,\n    '
        yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CAST(n AS DOUBLE) * LN(CAST(n AS DOUBLE))'))
        yield ' AS s_xy,\n    '
        yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CASE WHEN x_first = 1 THEN CAST(n_x AS DOUBLE) * LN(CAST(n_x AS DOUBLE)) ELSE 0 END'))
        yield ' AS s_x,\n    '
        yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), 'CASE WHEN y_first = 1 THEN CAST(n_y AS DOUBLE) * LN(CAST(n_y AS DOUBLE)) ELSE 0 END'))
        yield ' AS s_y,\n    '
        yield str(context.call(environment.getattr((undefined(name='sums') if l_0_sums is missing else l_0_sums), 'exact_sum'), str_join(('CAST(n AS DOUBLE) * ', (undefined(name='log_ratio') if l_0_log_ratio is missing else l_0_log_ratio), ' * ', (undefined(name='log_ratio') if l_0_log_ratio is missing else l_0_log_ratio), ))))
        yield ' AS s_kk\n  FROM cells\n  GROUP BY attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield '\n),\nentropies AS (\n  SELECT\n    attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ',\n    n_total,\n    n_total_f,\n    n_values,\n    n_classes,\n    CASE WHEN n_classes > 1 THEN (LN(n_total_f) - s_y / n_total_f) / LN(2) ELSE 0 END AS h_y,\n    CASE WHEN n_values > 1 THEN (LN(n_total_f) - s_x / n_total_f) / LN(2) ELSE 0 END AS h_x,\n    (s_x - s_xy) / n_total_f / LN(2) AS h_y_given_x,\n    s_kk / n_total_f / (LN(2) * LN(2)) AS k_bits\n  FROM per_attribute\n),\ngains AS (\n  SELECT\n    attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ',\n    n_total,\n    n_total_f,\n    n_values,\n    n_classes,\n    h_y,\n    h_x,\n    CASE WHEN n_values > 1 AND h_y - h_y_given_x > 0 THEN h_y - h_y_given_x ELSE 0 END AS ig,\n    CASE WHEN k_bits - (h_y - h_y_given_x) * (h_y - h_y_given_x) > 0\n      THEN k_bits - (h_y - h_y_given_x) * (h_y - h_y_given_x) ELSE 0 END AS ig_variance\n  FROM entropies\n),uncertainty AS (\n  SELECT\n    attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ',\n    se,\n    corrected,\n    CASE WHEN corrected - '
        yield str((undefined(name='z') if l_0_z is missing else l_0_z))
        yield ' * se > 0 THEN corrected - '
        yield str((undefined(name='z') if l_0_z is missing else l_0_z))
        yield ' * se ELSE 0 END AS ig_low,\n    CASE WHEN corrected + '
        yield str((undefined(name='z') if l_0_z is missing else l_0_z))
        yield ' * se > 0 THEN corrected + '
        yield str((undefined(name='z') if l_0_z is missing else l_0_z))
        yield ' * se ELSE 0 END AS ig_high\n  FROM (\n    SELECT\n      attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
        yield ',\n      SQRT(ig_variance / (n_total_f + 1)) AS se,\n      ig - (n_values - 1) * (n_classes - 1) / (2 * n_total_f * LN(2)) AS corrected\n    FROM gains\n  ) AS spread\n),rank_ranges AS (\n  SELECT\n    a.attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys), 'a.'))
        yield ',\n    CAST(1 + SUM(CASE WHEN b.attr <> a.attr AND b.ig_low > a.ig_high THEN 1 ELSE 0 END) AS BIGINT) AS rank_low,\n    CAST(SUM(CASE WHEN b.ig_high >= a.ig_low THEN 1 ELSE 0 END) AS BIGINT) AS rank_high\n  FROM uncertainty AS a\n  JOIN uncertainty AS b\n    ON b.attr > 0'
        for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            yield ' AND (a.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' = b.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' OR (a.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL AND b.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL))'
        l_1_s = missing
        yield '\n  WHERE a.attr > 0\n  GROUP BY a.attr'
        yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys), 'a.'))
        yield '\n),'
        if ((undefined(name='segments') if l_0_segments is missing else l_0_segments) or (undefined(name='weight') if l_0_weight is missing else l_0_weight)):
            pass
            yield '\nexcluded AS (\n  SELECT\n    '
            yield str(context.call((undefined(name='segments_then') if l_0_segments_then is missing else l_0_segments_then)))
            yield '\n    COALESCE(SUM(CASE WHEN y IS NULL THEN '
            if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
                pass
                yield 'r'
            else:
                pass
                yield 'n'
            yield ' ELSE 0 END), 0) AS rows_excluded'
            if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
                pass
                yield ',\n    COALESCE(SUM(CASE WHEN y IS NULL THEN 0 ELSE r - m - w_negative END), 0) AS rows_without_weight,\n    COALESCE(SUM(w_negative), 0) AS rows_negative_weight,\n    COALESCE(SUM(CASE WHEN y IS NULL THEN 0 ELSE w_fractional END), 0) AS rows_fractional_weight'
            yield '\n  FROM counts\n  WHERE attr = 0'
            if (undefined(name='segments') if l_0_segments is missing else l_0_segments):
                pass
                yield '\n  GROUP BY '
                l_1_loop = missing
                for l_1_s, l_1_loop in LoopContext((undefined(name='segments') if l_0_segments is missing else l_0_segments), undefined):
                    _loop_vars = {}
                    pass
                    if (not environment.getattr(l_1_loop, 'first')):
                        pass
                        yield ', '
                    yield 's'
                    yield str(environment.getattr(l_1_s, 'index'))
                l_1_loop = l_1_s = missing
            yield '\n)'
        else:
            pass
            yield '\nexcluded AS (\n  SELECT COALESCE(SUM(n), 0) AS rows_excluded\n  FROM counts\n  WHERE attr = 0 AND y IS NULL\n)'
        yield '\nSELECT'
        for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            yield '\n  e.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' AS segment_'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ','
        l_1_s = missing
        yield '\n  g.attr AS attribute_index,\n  CASE g.attr WHEN 0 THEN '
        yield str((undefined(name='target_label') if l_0_target_label is missing else l_0_target_label))
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ' WHEN '
            yield str(environment.getattr(l_1_a, 'index'))
            yield ' THEN '
            yield str(environment.getattr(l_1_a, 'label'))
        l_1_a = missing
        yield " END AS attribute,\n  CASE g.attr WHEN 0 THEN 'target'"
        for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            yield ' WHEN '
            yield str(environment.getattr(l_1_a, 'index'))
            yield " THEN '"
            yield str(environment.getattr(l_1_a, 'kind'))
            yield "'"
        l_1_a = missing
        yield ' END AS kind,\n  g.n_total AS rows_used,\n  e.rows_excluded AS rows_excluded,'
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            yield '\n  g.n_total_f AS weight_used,\n  e.rows_without_weight AS rows_without_weight,\n  e.rows_negative_weight AS rows_negative_weight,\n  e.rows_fractional_weight AS rows_fractional_weight,'
        yield '\n  g.n_values AS distinct_values,\n  g.n_classes AS classes,\n  g.h_y AS target_entropy,\n  g.h_x AS attribute_entropy,\n  g.h_y - g.ig AS conditional_entropy,\n  g.ig AS information_gain,\n  CASE WHEN g.n_values > 1 THEN g.ig / g.h_x ELSE 0 END AS gain_ratio,\n  CASE WHEN g.h_x + g.h_y > 0 THEN 2 * g.ig / (g.h_x + g.h_y) ELSE 0 END AS symmetric_uncertainty,\n  2 * g.n_total_f * LN(2) * g.ig AS g_statistic,\n  (g.n_values - 1) * (g.n_classes - 1) AS dof,'
        def macro(l_1_value):
            t_13 = []
            if l_1_value is missing:
                l_1_value = undefined("parameter 'value' was not provided", name='value')
            pass
            if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
                pass
                t_13.extend((
                    'CASE WHEN e.rows_fractional_weight = 0 THEN ',
                    str(l_1_value),
                    ' END',
                ))
            else:
                pass
                t_13.append(
                    str(l_1_value),
                )
            return concat(t_13)
        context.exported_vars.add('whole_weights')
        context.vars['whole_weights'] = l_0_whole_weights = Macro(environment, macro, 'whole_weights', ('value',), False, False, False, context.eval_ctx.autoescape)
        yield '\n  '
        yield str(context.call((undefined(name='whole_weights') if l_0_whole_weights is missing else l_0_whole_weights), 'u.se'))
        yield ' AS information_gain_se,\n  u.corrected AS information_gain_corrected,\n  '
        yield str(context.call((undefined(name='whole_weights') if l_0_whole_weights is missing else l_0_whole_weights), 'u.ig_low'))
        yield ' AS information_gain_low,\n  '
        yield str(context.call((undefined(name='whole_weights') if l_0_whole_weights is missing else l_0_whole_weights), 'u.ig_high'))
        yield ' AS information_gain_high,\n  '
        yield str(context.call((undefined(name='whole_weights') if l_0_whole_weights is missing else l_0_whole_weights), 'r.rank_low'))
        yield ' AS rank_low,\n  '
        yield str(context.call((undefined(name='whole_weights') if l_0_whole_weights is missing else l_0_whole_weights), 'r.rank_high'))
        yield ' AS rank_high\nFROM excluded AS e\nLEFT JOIN gains AS g\n  ON '
        l_1_loop = missing
        t_14 = 1
        for l_1_s, l_1_loop in LoopContext((undefined(name='segments') if l_0_segments is missing else l_0_segments), undefined):
            _loop_vars = {}
            pass
            if (not environment.getattr(l_1_loop, 'first')):
                pass
                yield ' AND '
            yield '(e.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' = g.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' OR (e.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL AND g.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL))'
            t_14 = 0
        l_1_loop = l_1_s = missing
        if t_14:
            pass
            yield '1 = 1'
        yield '\nLEFT JOIN uncertainty AS u\n  ON u.attr = g.attr'
        for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            yield ' AND (u.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' = g.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' OR (u.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL AND g.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL))'
        l_1_s = missing
        yield '\nLEFT JOIN rank_ranges AS r\n  ON r.attr = g.attr'
        for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            yield ' AND (r.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' = g.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' OR (r.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL AND g.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ' IS NULL))'
        l_1_s = missing
        yield '\nORDER BY'
        for l_1_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            yield '\n  e.s'
            yield str(environment.getattr(l_1_s, 'index'))
            yield ','
        l_1_s = missing
        if (undefined(name='order_by_gain') if l_0_order_by_gain is missing else l_0_order_by_gain):
            pass
            yield '\n  CASE WHEN g.attr = 0 THEN 0 ELSE 1 END,\n  '
            yield str((undefined(name='order_by_gain') if l_0_order_by_gain is missing else l_0_order_by_gain))
            yield ' DESC,'
        yield '\n  g.attr'
    yield '\n'

blocks = {}
debug_info = '7=50&10=52&11=59&13=74&14=77&18=88&19=93&21=106&22=109&29=121&30=124&31=129&32=133&33=141&35=147&36=153&41=172&42=175&46=188&47=195&49=199&53=211&52=221&56=228&55=237&58=241&61=244&62=247&64=251&66=253&67=256&74=259&75=261&76=265&78=269&79=272&81=275&82=279&83=282&84=285&85=300&87=305&88=310&89=313&90=314&92=316&95=319&96=331&98=333&100=347&104=350&108=355&110=365&111=367&113=371&115=391&116=396&121=401&122=405&128=409&129=413&131=417&132=421&134=428&137=430&143=443&145=446&153=452&155=454&158=458&159=461&160=464&161=466&162=468&165=470&168=473&169=476&176=487&183=491&184=493&188=500&189=502&190=504&191=506&193=508&197=510&210=512&232=514&235=516&236=520&239=524&251=526&256=528&258=542&262=544&265=547&266=549&267=556&274=560&275=564&286=578&287=582&290=588&291=598&294=608&311=612&312=617&314=633&316=635&317=637&318=639&319=641&323=645&325=666&327=680&329=694&330=698&332=701&334=704'