# templates/rank.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '029f21420ab5645958baf7d68096cb580241f2793087467be2ee16b148cadab7'
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
    l_0_strategy = resolve('strategy')
    l_0_scans = resolve('scans')
    l_0_bounds = resolve('bounds')
    l_0_bounds_macros = resolve('bounds_macros')
    l_0_source = resolve('source')
    l_0_target = resolve('target')
    l_0_where = resolve('where')
    l_0_attributes = resolve('attributes')
    l_0_segments = resolve('segments')
    l_0_counts_only = resolve('counts_only')
    l_0_weight = resolve('weight')
    l_0_drop_missing = resolve('drop_missing')
    l_0_log_ratio = resolve('log_ratio')
    l_0_z = resolve('z')
    l_0_target_label = resolve('target_label')
    l_0_whole_weights = resolve('whole_weights')
    l_0_order_by_gain = resolve('order_by_gain')
    l_0_sums = l_0_grouping_key = l_0_measured = l_0_attribute_keys = l_0_segment_keys = l_0_segments_then = l_0_largest_double = l_0_measures = l_0_empty_measures = l_0_share = l_0_row_keys = l_0_attribute_column = l_0_rows_where = l_0_base_columns = l_0_count_columns = missing
    try:
        t_1 = environment.tests['defined']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No test named 'defined' found.")
    try:
        t_2 = environment.tests['none']
    except KeyError:
        @internalcode
        def t_2(*unused):
            raise TemplateRuntimeError("No test named 'none' found.")
    pass
    l_0_sums = context.vars['sums'] = environment.get_template('sums.sql.j2', 'rank.sql.j2')._get_default_module(context)
    context.exported_vars.discard('sums')
    included_template = environment.get_template('measured.sql.j2', 'rank.sql.j2')._get_default_module(context)
    l_0_grouping_key = getattr(included_template, 'grouping_key', missing)
    if l_0_grouping_key is missing:
        l_0_grouping_key = undefined(f"the template {included_template.__name__!r} (imported on line 10 in 'rank.sql.j2') does not export the requested name 'grouping_key'", name='grouping_key')
    l_0_measured = getattr(included_template, 'measured', missing)
    if l_0_measured is missing:
        l_0_measured = undefined(f"the template {included_template.__name__!r} (imported on line 10 in 'rank.sql.j2') does not export the requested name 'measured'", name='measured')
    context.vars.update({'grouping_key': l_0_grouping_key, 'measured': l_0_measured})
    context.exported_vars.difference_update(('grouping_key', 'measured'))
    def macro():
        t_3 = []
        pass
        for l_2_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
            _loop_vars = {}
            pass
            t_3.extend((
                ', a',
                str(environment.getattr(l_2_a, 'index')),
            ))
        l_2_a = missing
        return concat(t_3)
    context.exported_vars.add('attribute_keys')
    context.vars['attribute_keys'] = l_0_attribute_keys = Macro(environment, macro, 'attribute_keys', (), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_prefix):
        t_4 = []
        if l_1_prefix is missing:
            l_1_prefix = ''
        pass
        for l_2_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            t_4.extend((
                ', ',
                str(l_1_prefix),
                's',
                str(environment.getattr(l_2_s, 'index')),
            ))
        l_2_s = missing
        return concat(t_4)
    context.exported_vars.add('segment_keys')
    context.vars['segment_keys'] = l_0_segment_keys = Macro(environment, macro, 'segment_keys', ('prefix',), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_5 = []
        pass
        for l_2_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            t_5.extend((
                's',
                str(environment.getattr(l_2_s, 'index')),
                ', ',
            ))
        l_2_s = missing
        return concat(t_5)
    context.exported_vars.add('segments_then')
    context.vars['segments_then'] = l_0_segments_then = Macro(environment, macro, 'segments_then', (), False, False, False, context.eval_ctx.autoescape)
    l_0_largest_double = '1.7976931348623157e308'
    context.vars['largest_double'] = l_0_largest_double
    context.exported_vars.add('largest_double')
    def macro(l_1_prefix):
        t_6 = []
        if l_1_prefix is missing:
            l_1_prefix = ''
        pass
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            t_6.extend((
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
            t_6.append(
                '\n    COUNT(*) AS n',
            )
        return concat(t_6)
    context.exported_vars.add('measures')
    context.vars['measures'] = l_0_measures = Macro(environment, macro, 'measures', ('prefix',), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_7 = []
        pass
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            t_7.append(
                'CAST(0 AS DOUBLE) AS n, 0 AS m, 0 AS r, 0 AS w_negative, 0 AS w_fractional',
            )
        else:
            pass
            t_7.append(
                '0 AS n',
            )
        return concat(t_7)
    context.exported_vars.add('empty_measures')
    context.vars['empty_measures'] = l_0_empty_measures = Macro(environment, macro, 'empty_measures', (), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_step, l_1_columns):
        t_8 = []
        if l_1_step is missing:
            l_1_step = undefined("parameter 'step' was not provided", name='step')
        if l_1_columns is missing:
            l_1_columns = undefined("parameter 'columns' was not provided", name='columns')
        pass
        if (l_1_step in (undefined(name='shared') if l_0_shared is missing else l_0_shared)):
            pass
            t_8.extend((
                '\n  UNION ALL\n  SELECT ',
                str(l_1_columns),
                ' FROM ',
                str(l_1_step),
                ' WHERE 1 = 0',
            ))
        return concat(t_8)
    context.exported_vars.add('share')
    context.vars['share'] = l_0_share = Macro(environment, macro, 'share', ('step', 'columns'), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_9 = []
        l_1_target_exact = resolve('target_exact')
        pass
        t_9.extend((
            str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), (undefined(name='target_exact') if l_1_target_exact is missing else l_1_target_exact), str_join(('src.', (undefined(name='target') if l_0_target is missing else l_0_target), )))),
            ' AS y',
        ))
        for l_2_s in (undefined(name='segments') if l_0_segments is missing else l_0_segments):
            _loop_vars = {}
            pass
            t_9.extend((
                ',\n    ',
                str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_2_s, 'exact'), str_join(('src.', environment.getattr(l_2_s, 'column'), )), _loop_vars=_loop_vars)),
                ' AS s',
                str(environment.getattr(l_2_s, 'index')),
            ))
        l_2_s = missing
        if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
            pass
            t_9.extend((
                ',\n    CAST(src.',
                str((undefined(name='weight') if l_0_weight is missing else l_0_weight)),
                ' AS DOUBLE) AS w',
            ))
        return concat(t_9)
    context.exported_vars.add('row_keys')
    context.vars['row_keys'] = l_0_row_keys = Macro(environment, macro, 'row_keys', (), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_a):
        t_10 = []
        if l_1_a is missing:
            l_1_a = undefined("parameter 'a' was not provided", name='a')
        pass
        t_10.extend((
            str(context.call((undefined(name='measured') if l_0_measured is missing else l_0_measured), l_1_a)),
            ' AS a',
            str(environment.getattr(l_1_a, 'index')),
        ))
        return concat(t_10)
    context.exported_vars.add('attribute_column')
    context.vars['attribute_column'] = l_0_attribute_column = Macro(environment, macro, 'attribute_column', ('a',), False, False, False, context.eval_ctx.autoescape)
    def macro():
        t_11 = []
        l_1_qualified_where = resolve('qualified_where')
        pass
        if (undefined(name='qualified_where') if l_1_qualified_where is missing else l_1_qualified_where):
            pass
            t_11.extend((
                '\n  WHERE ',
                str((undefined(name='qualified_where') if l_1_qualified_where is missing else l_1_qualified_where)),
            ))
        return concat(t_11)
    context.exported_vars.add('rows_where')
    context.vars['rows_where'] = l_0_rows_where = Macro(environment, macro, 'rows_where', (), False, False, False, context.eval_ctx.autoescape)
    t_12 = []
    pass
    t_12.extend((
        'y',
        str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys))),
    ))
    if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
        pass
        t_12.append(
            ', w',
        )
    t_12.append(
        str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys))),
    )
    l_0_base_columns = (Markup if context.eval_ctx.autoescape else identity)(concat(t_12))
    context.vars['base_columns'] = l_0_base_columns
    context.exported_vars.add('base_columns')
    t_13 = []
    pass
    t_13.extend((
        'attr',
        str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys))),
        str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys))),
        ', y, n',
    ))
    if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
        pass
        t_13.append(
            ', m, r, w_negative, w_fractional',
        )
    l_0_count_columns = (Markup if context.eval_ctx.autoescape else identity)(concat(t_13))
    context.vars['count_columns'] = l_0_count_columns
    context.exported_vars.add('count_columns')
    yield 'WITH'
    if (undefined(name='shared') if l_0_shared is missing else l_0_shared):
        pass
        yield ' RECURSIVE'
    if (t_1((undefined(name='stored_counts') if l_0_stored_counts is missing else l_0_stored_counts)) and (undefined(name='stored_counts') if l_0_stored_counts is missing else l_0_stored_counts)):
        pass
        yield '\n'
        yield str((undefined(name='stored_counts') if l_0_stored_counts is missing else l_0_stored_counts))
        yield ','
    else:
        pass
        l_0_scans = ((undefined(name='strategy') if l_0_strategy is missing else l_0_strategy) == 'union_scans')
        context.vars['scans'] = l_0_scans
        context.exported_vars.add('scans')
        if (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds):
            pass
            l_0_bounds_macros = context.vars['bounds_macros'] = environment.get_template('bounds.sql.j2', 'rank.sql.j2')._get_default_module(context)
            context.exported_vars.discard('bounds_macros')
            yield '\n'
            yield str(context.call(environment.getattr((undefined(name='bounds_macros') if l_0_bounds_macros is missing else l_0_bounds_macros), 'bounds_ctes'), (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds), (undefined(name='source') if l_0_source is missing else l_0_source), (undefined(name='target') if l_0_target is missing else l_0_target), (undefined(name='where') if l_0_where is missing else l_0_where), combined=(not (undefined(name='scans') if l_0_scans is missing else l_0_scans))))
            if (not (undefined(name='scans') if l_0_scans is missing else l_0_scans)):
                pass
                yield ','
        if (not (undefined(name='scans') if l_0_scans is missing else l_0_scans)):
            pass
            yield '\nbase AS (\n  SELECT\n'
            yield str(context.call((undefined(name='row_keys') if l_0_row_keys is missing else l_0_row_keys)))
            for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ',\n    '
                yield str(context.call((undefined(name='attribute_column') if l_0_attribute_column is missing else l_0_attribute_column), l_1_a, _loop_vars=_loop_vars))
            l_1_a = missing
            yield '\n  FROM '
            yield str((undefined(name='source') if l_0_source is missing else l_0_source))
            yield ' AS src'
            if (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds):
                pass
                yield ' CROSS JOIN bounds'
            yield str(context.call((undefined(name='rows_where') if l_0_rows_where is missing else l_0_rows_where)))
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
        elif (undefined(name='scans') if l_0_scans is missing else l_0_scans):
            pass
            yield '\ncounts AS (\n  SELECT 0 AS attr'
            yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
            yield str(context.call((undefined(name='attribute_keys') if l_0_attribute_keys is missing else l_0_attribute_keys)))
            yield ', y, '
            yield str(context.call((undefined(name='empty_measures') if l_0_empty_measures is missing else l_0_empty_measures)))
            yield '\n  FROM (\n    SELECT\n'
            yield str(context.call((undefined(name='row_keys') if l_0_row_keys is missing else l_0_row_keys)))
            for l_1_a in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ',\n    '
                if (not t_2(environment.getattr(l_1_a, 'cuts'))):
                    pass
                    yield '0'
                else:
                    pass
                    yield str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_1_a, 'exact'), environment.getattr(l_1_a, 'value'), _loop_vars=_loop_vars))
                yield ' AS a'
                yield str(environment.getattr(l_1_a, 'index'))
            l_1_a = missing
            yield '\n    FROM '
            yield str((undefined(name='source') if l_0_source is missing else l_0_source))
            yield ' AS src\n  ) AS typed_row\n  WHERE 1 = 0\n  UNION ALL\n  SELECT 0 AS attr'
            yield str(context.call((undefined(name='segment_keys') if l_0_segment_keys is missing else l_0_segment_keys)))
            for l_1_b in (undefined(name='attributes') if l_0_attributes is missing else l_0_attributes):
                _loop_vars = {}
                pass
                yield ', NULL AS a'
                yield str(environment.getattr(l_1_b, 'index'))
            l_1_b = missing
            yield ', y,'
            yield str(context.call((undefined(name='measures') if l_0_measures is missing else l_0_measures)))
            yield '\n  FROM (\n    SELECT\n'
            yield str(context.call((undefined(name='row_keys') if l_0_row_keys is missing else l_0_row_keys)))
            yield '\n    FROM '
            yield str((undefined(name='source') if l_0_source is missing else l_0_source))
            yield ' AS src'
            yield str(context.call((undefined(name='rows_where') if l_0_rows_where is missing else l_0_rows_where)))
            yield '\n  ) AS rows_0\n  GROUP BY '
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
                yield '\n  FROM (\n    SELECT\n'
                yield str(context.call((undefined(name='row_keys') if l_0_row_keys is missing else l_0_row_keys), _loop_vars=_loop_vars))
                yield ',\n    '
                yield str(context.call((undefined(name='attribute_column') if l_0_attribute_column is missing else l_0_attribute_column), l_1_a, _loop_vars=_loop_vars))
                yield '\n    FROM '
                yield str((undefined(name='source') if l_0_source is missing else l_0_source))
                yield ' AS src'
                if t_1(environment.getattr(l_1_a, 'method')):
                    pass
                    yield ' CROSS JOIN '
                    yield str(context.call(environment.getattr((undefined(name='bounds_macros') if l_0_bounds_macros is missing else l_0_bounds_macros), 'part_of'), (undefined(name='bounds') if l_0_bounds is missing else l_0_bounds), l_1_a, _loop_vars=_loop_vars))
                    yield ' AS bounds'
                yield str(context.call((undefined(name='rows_where') if l_0_rows_where is missing else l_0_rows_where), _loop_vars=_loop_vars))
                yield '\n  ) AS rows_'
                yield str(environment.getattr(l_1_a, 'index'))
                yield '\n  GROUP BY '
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
    if (t_1((undefined(name='counts_only') if l_0_counts_only is missing else l_0_counts_only)) and (undefined(name='counts_only') if l_0_counts_only is missing else l_0_counts_only)):
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
            t_14 = []
            if l_1_value is missing:
                l_1_value = undefined("parameter 'value' was not provided", name='value')
            pass
            if (undefined(name='weight') if l_0_weight is missing else l_0_weight):
                pass
                t_14.extend((
                    'CASE WHEN e.rows_fractional_weight = 0 THEN ',
                    str(l_1_value),
                    ' END',
                ))
            else:
                pass
                t_14.append(
                    str(l_1_value),
                )
            return concat(t_14)
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
        t_15 = 1
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
            t_15 = 0
        l_1_loop = l_1_s = missing
        if t_15:
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
debug_info = '7=43&10=45&11=54&12=57&16=68&17=73&19=86&20=89&27=101&28=104&29=109&30=113&31=121&33=127&34=133&39=152&40=155&44=168&45=175&47=179&51=187&52=192&53=195&54=200&56=205&57=209&62=215&63=221&67=228&68=232&69=236&73=245&72=255&76=262&75=271&78=275&81=278&82=281&84=285&85=288&88=290&89=293&90=294&92=297&98=300&99=301&100=305&102=308&105=316&108=319&109=331&111=333&113=347&117=350&121=355&123=365&124=367&126=371&128=391&129=396&131=398&138=401&141=406&142=407&143=411&145=421&149=423&152=433&153=435&155=439&156=441&158=445&161=465&162=467&163=469&164=471&165=478&166=480&167=485&172=490&173=494&179=498&180=502&182=506&183=510&185=517&188=519&194=532&196=535&204=541&206=543&209=547&210=550&211=553&212=555&213=557&216=559&219=562&220=565&227=576&234=580&235=582&239=589&240=591&241=593&242=595&244=597&248=599&261=601&283=603&286=605&287=609&290=613&302=615&307=617&309=631&313=633&316=636&317=638&318=645&325=649&326=653&337=667&338=671&341=677&342=687&345=697&362=701&363=706&365=722&367=724&368=726&369=728&370=730&374=734&376=755&378=769&380=783&381=787&383=790&385=793'