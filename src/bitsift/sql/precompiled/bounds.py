# templates/bounds.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '36a93901f0c585353e2027e8de761a735d7cd59eca641b804de8caf98501f6bf'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'bounds.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_rows_filter = l_0_value_filter = l_0_bounds_ctes = l_0_part_of = missing
    try:
        t_1 = environment.filters['join']
    except KeyError:
        @internalcode
        def t_1(*unused):
            raise TemplateRuntimeError("No filter named 'join' found.")
    pass
    def macro(l_1_target, l_1_where):
        t_2 = []
        if l_1_target is missing:
            l_1_target = undefined("parameter 'target' was not provided", name='target')
        if l_1_where is missing:
            l_1_where = undefined("parameter 'where' was not provided", name='where')
        pass
        t_2.extend((
            'WHERE ',
            str(l_1_target),
            ' IS NOT NULL',
        ))
        if l_1_where:
            pass
            t_2.extend((
                ' AND (',
                str(l_1_where),
                ')',
            ))
        return concat(t_2)
    context.exported_vars.add('rows_filter')
    context.vars['rows_filter'] = l_0_rows_filter = Macro(environment, macro, 'rows_filter', ('target', 'where'), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_value, l_1_target, l_1_where):
        t_3 = []
        if l_1_value is missing:
            l_1_value = undefined("parameter 'value' was not provided", name='value')
        if l_1_target is missing:
            l_1_target = undefined("parameter 'target' was not provided", name='target')
        if l_1_where is missing:
            l_1_where = undefined("parameter 'where' was not provided", name='where')
        pass
        t_3.extend((
            'WHERE ',
            str(l_1_target),
            ' IS NOT NULL AND ',
            str(l_1_value),
            ' IS NOT NULL',
        ))
        if l_1_where:
            pass
            t_3.extend((
                ' AND (',
                str(l_1_where),
                ')',
            ))
        return concat(t_3)
    context.exported_vars.add('value_filter')
    context.vars['value_filter'] = l_0_value_filter = Macro(environment, macro, 'value_filter', ('value', 'target', 'where'), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_bounds, l_1_source, l_1_target, l_1_where, l_1_combined):
        t_4 = []
        l_1__ = resolve('_')
        l_1_parts = missing
        if l_1_bounds is missing:
            l_1_bounds = undefined("parameter 'bounds' was not provided", name='bounds')
        if l_1_source is missing:
            l_1_source = undefined("parameter 'source' was not provided", name='source')
        if l_1_target is missing:
            l_1_target = undefined("parameter 'target' was not provided", name='target')
        if l_1_where is missing:
            l_1_where = undefined("parameter 'where' was not provided", name='where')
        if l_1_combined is missing:
            l_1_combined = True
        pass
        l_1_parts = []
        if environment.getattr(l_1_bounds, 'aggregated'):
            pass
            t_4.append(
                '\nbound_aggregates AS (\n  SELECT',
            )
            l_2_loop = missing
            for l_2_a, l_2_loop in LoopContext(environment.getattr(l_1_bounds, 'aggregated'), undefined):
                l_2_outer = missing
                _loop_vars = {}
                pass
                l_2_outer = l_2_loop
                _loop_vars['outer'] = l_2_outer
                if (environment.getattr(l_2_a, 'method') == 'equal-width'):
                    pass
                    t_4.extend((
                        '\n    MIN(CAST(',
                        str(environment.getattr(l_2_a, 'raw')),
                        ' AS DOUBLE)) AS lo',
                        str(environment.getattr(l_2_a, 'index')),
                        ',\n    MAX(CAST(',
                        str(environment.getattr(l_2_a, 'raw')),
                        ' AS DOUBLE)) AS hi',
                        str(environment.getattr(l_2_a, 'index')),
                    ))
                elif (environment.getattr(l_1_bounds, 'quantile') in ('quantile_cont', 'percentile')):
                    pass
                    t_4.extend((
                        '\n    ',
                        str(environment.getattr(l_1_bounds, 'quantile')),
                        '(CAST(',
                        str(environment.getattr(l_2_a, 'raw')),
                        ' AS DOUBLE), [',
                        str(t_1(context.eval_ctx, environment.getattr(l_2_a, 'probabilities'), ', ')),
                        ']) AS q',
                        str(environment.getattr(l_2_a, 'index')),
                    ))
                else:
                    pass
                    l_3_loop = missing
                    for l_3_p, l_3_loop in LoopContext(environment.getattr(l_2_a, 'probabilities'), undefined):
                        _loop_vars = {}
                        pass
                        t_4.extend((
                            '\n    PERCENTILE_CONT(',
                            str(l_3_p),
                            ') WITHIN GROUP (ORDER BY CAST(',
                            str(environment.getattr(l_2_a, 'raw')),
                            ' AS DOUBLE)) AS c',
                            str(environment.getattr(l_2_a, 'index')),
                            '_',
                            str(environment.getattr(l_3_loop, 'index')),
                        ))
                        if (not environment.getattr(l_3_loop, 'last')):
                            pass
                            t_4.append(
                                ',',
                            )
                    l_3_loop = l_3_p = missing
                if (not environment.getattr((undefined(name='outer') if l_2_outer is missing else l_2_outer), 'last')):
                    pass
                    t_4.append(
                        ',',
                    )
            l_2_loop = l_2_a = l_2_outer = missing
            t_4.extend((
                '\n  FROM ',
                str(l_1_source),
                '\n  ',
                str(context.call((undefined(name='rows_filter') if l_0_rows_filter is missing else l_0_rows_filter), l_1_target, l_1_where)),
                '\n),\nbounds_aggregated AS (\n  SELECT',
            ))
            l_2_loop = missing
            for l_2_a, l_2_loop in LoopContext(environment.getattr(l_1_bounds, 'aggregated'), undefined):
                l_2_range = resolve('range')
                l_2_outer = missing
                _loop_vars = {}
                pass
                l_2_outer = l_2_loop
                _loop_vars['outer'] = l_2_outer
                l_3_loop = missing
                for l_3_j, l_3_loop in LoopContext(context.call((undefined(name='range') if l_2_range is missing else l_2_range), 1, (environment.getattr(l_2_a, 'cut_count') + 1), _loop_vars=_loop_vars), undefined):
                    _loop_vars = {}
                    pass
                    if (environment.getattr(l_2_a, 'method') == 'equal-width'):
                        pass
                        t_4.extend((
                            '\n    lo',
                            str(environment.getattr(l_2_a, 'index')),
                            ' + (hi',
                            str(environment.getattr(l_2_a, 'index')),
                            ' - lo',
                            str(environment.getattr(l_2_a, 'index')),
                            ') * ',
                            str(l_3_j),
                            ' / ',
                            str(environment.getattr(l_2_a, 'bins')),
                            ' AS c',
                            str(environment.getattr(l_2_a, 'index')),
                            '_',
                            str(l_3_j),
                        ))
                    elif (environment.getattr(l_1_bounds, 'quantile') in ('quantile_cont', 'percentile')):
                        pass
                        t_4.extend((
                            '\n    q',
                            str(environment.getattr(l_2_a, 'index')),
                            '[',
                            str(l_3_j),
                            '] AS c',
                            str(environment.getattr(l_2_a, 'index')),
                            '_',
                            str(l_3_j),
                        ))
                    else:
                        pass
                        t_4.extend((
                            '\n    c',
                            str(environment.getattr(l_2_a, 'index')),
                            '_',
                            str(l_3_j),
                        ))
                    if (not (environment.getattr((undefined(name='outer') if l_2_outer is missing else l_2_outer), 'last') and environment.getattr(l_3_loop, 'last'))):
                        pass
                        t_4.append(
                            ',',
                        )
                l_3_loop = l_3_j = missing
            l_2_loop = l_2_a = l_2_outer = l_2_range = missing
            t_4.append(
                '\n  FROM bound_aggregates\n),',
            )
            l_1__ = context.call(environment.getattr((undefined(name='parts') if l_1_parts is missing else l_1_parts), 'append'), 'bounds_aggregated')
        l_2_loop = missing
        for l_2_a, l_2_loop in LoopContext(environment.getattr(l_1_bounds, 'windowed'), undefined):
            l_2__ = l_1__
            _loop_vars = {}
            pass
            t_4.extend((
                '\nordered_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT\n    CAST(',
                str(environment.getattr(l_2_a, 'raw')),
                ' AS DOUBLE) AS v,\n    ROW_NUMBER() OVER (ORDER BY CAST(',
                str(environment.getattr(l_2_a, 'raw')),
                ' AS DOUBLE)) AS rn,\n    COUNT(*) OVER () AS cnt\n  FROM ',
                str(l_1_source),
                '\n  ',
                str(context.call((undefined(name='value_filter') if l_0_value_filter is missing else l_0_value_filter), environment.getattr(l_2_a, 'raw'), l_1_target, l_1_where, _loop_vars=_loop_vars)),
                '\n),\nbounds_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT',
            ))
            l_3_loop = missing
            for l_3_p, l_3_loop in LoopContext(environment.getattr(l_2_a, 'probabilities'), undefined):
                _loop_vars = {}
                pass
                t_4.extend((
                    '\n    MAX(CASE WHEN rn = FLOOR((cnt - 1) * ',
                    str(l_3_p),
                    ') + 1 THEN v END)\n      + ((MAX(cnt) - 1) * ',
                    str(l_3_p),
                    ' - FLOOR((MAX(cnt) - 1) * ',
                    str(l_3_p),
                    '))\n      * (COALESCE(MAX(CASE WHEN rn = FLOOR((cnt - 1) * ',
                    str(l_3_p),
                    ') + 2 THEN v END), MAX(CASE WHEN rn = FLOOR((cnt - 1) * ',
                    str(l_3_p),
                    ') + 1 THEN v END))\n         - MAX(CASE WHEN rn = FLOOR((cnt - 1) * ',
                    str(l_3_p),
                    ') + 1 THEN v END)) AS c',
                    str(environment.getattr(l_2_a, 'index')),
                    '_',
                    str(environment.getattr(l_3_loop, 'index')),
                ))
                if (not environment.getattr(l_3_loop, 'last')):
                    pass
                    t_4.append(
                        ',',
                    )
            l_3_loop = l_3_p = missing
            t_4.extend((
                '\n  FROM ordered_',
                str(environment.getattr(l_2_a, 'index')),
                '\n),',
            ))
            l_2__ = context.call(environment.getattr((undefined(name='parts') if l_1_parts is missing else l_1_parts), 'append'), str_join(('bounds_', environment.getattr(l_2_a, 'index'), )), _loop_vars=_loop_vars)
            _loop_vars['_'] = l_2__
        l_2_loop = l_2_a = l_2__ = missing
        for l_2_a in environment.getattr(l_1_bounds, 'splits'):
            l_2__ = l_1__
            _loop_vars = {}
            pass
            t_4.extend((
                '\nsplit_cells_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT\n    CAST(',
                str(environment.getattr(l_2_a, 'raw')),
                ' AS DOUBLE) AS v,\n    ',
                str(environment.getattr(l_1_bounds, 'target_key')),
                ' AS y,\n    COUNT(*) AS n\n  FROM ',
                str(l_1_source),
                '\n  ',
                str(context.call((undefined(name='value_filter') if l_0_value_filter is missing else l_0_value_filter), environment.getattr(l_2_a, 'raw'), l_1_target, l_1_where, _loop_vars=_loop_vars)),
                '\n  GROUP BY CAST(',
                str(environment.getattr(l_2_a, 'raw')),
                ' AS DOUBLE), ',
                str(environment.getattr(l_1_bounds, 'target_key')),
                '\n),\nsplit_values_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT DISTINCT v FROM split_cells_',
                str(environment.getattr(l_2_a, 'index')),
                '\n),\nsplit_classes_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT DISTINCT y FROM split_cells_',
                str(environment.getattr(l_2_a, 'index')),
                '\n),\nsplit_running_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT\n    d.v AS v,\n    SUM(COALESCE(k.n, 0)) OVER (PARTITION BY c.y ORDER BY d.v NULLS FIRST ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW) AS left_n,\n    SUM(COALESCE(k.n, 0)) OVER (PARTITION BY c.y) AS class_n\n  FROM split_values_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS d\n  CROSS JOIN split_classes_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS c\n  LEFT JOIN split_cells_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS k\n    ON k.v = d.v AND k.y = c.y\n),\nsplit_sides_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT\n    v,\n    CAST(SUM(left_n) AS DOUBLE) AS left_rows,\n    CAST(SUM(class_n - left_n) AS DOUBLE) AS right_rows,\n    SUM(CASE WHEN left_n > 0 THEN CAST(left_n AS DOUBLE) * LN(CAST(left_n AS DOUBLE)) ELSE 0 END) AS left_terms,\n    SUM(CASE WHEN class_n - left_n > 0 THEN CAST(class_n - left_n AS DOUBLE) * LN(CAST(class_n - left_n AS DOUBLE)) ELSE 0 END) AS right_terms\n  FROM split_running_',
                str(environment.getattr(l_2_a, 'index')),
                '\n  GROUP BY v\n),\nsplit_scores_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT\n    v,\n    LEAD(v) OVER (ORDER BY v NULLS FIRST) AS next_v,\n    left_rows * LN(left_rows) - left_terms\n      + CASE WHEN right_rows > 0 THEN right_rows * LN(right_rows) ELSE 0 END - right_terms AS nats\n  FROM split_sides_',
                str(environment.getattr(l_2_a, 'index')),
                '\n),\nsplit_best_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT MIN(nats) AS nats\n  FROM split_scores_',
                str(environment.getattr(l_2_a, 'index')),
                '\n  WHERE next_v IS NOT NULL\n),\nsplit_bound_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS (\n  SELECT MIN((s.v + s.next_v) / 2) AS c',
                str(environment.getattr(l_2_a, 'index')),
                '_1\n  FROM split_scores_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS s\n  CROSS JOIN split_best_',
                str(environment.getattr(l_2_a, 'index')),
                ' AS b\n  WHERE s.next_v IS NOT NULL AND s.nats <= b.nats + 1e-9 * (1 + ABS(b.nats))\n),',
            ))
            l_2__ = context.call(environment.getattr((undefined(name='parts') if l_1_parts is missing else l_1_parts), 'append'), str_join(('split_bound_', environment.getattr(l_2_a, 'index'), )), _loop_vars=_loop_vars)
            _loop_vars['_'] = l_2__
        l_2_a = l_2__ = missing
        if l_1_combined:
            pass
            t_4.extend((
                '\nbounds AS (\n  SELECT *\n  FROM ',
                str(t_1(context.eval_ctx, (undefined(name='parts') if l_1_parts is missing else l_1_parts), ' CROSS JOIN ')),
                '\n)',
            ))
        return concat(t_4)
    context.exported_vars.add('bounds_ctes')
    context.vars['bounds_ctes'] = l_0_bounds_ctes = Macro(environment, macro, 'bounds_ctes', ('bounds', 'source', 'target', 'where', 'combined'), False, False, False, context.eval_ctx.autoescape)
    def macro(l_1_bounds, l_1_a):
        t_5 = []
        if l_1_bounds is missing:
            l_1_bounds = undefined("parameter 'bounds' was not provided", name='bounds')
        if l_1_a is missing:
            l_1_a = undefined("parameter 'a' was not provided", name='a')
        pass
        if (l_1_a in environment.getattr(l_1_bounds, 'windowed')):
            pass
            t_5.extend((
                'bounds_',
                str(environment.getattr(l_1_a, 'index')),
            ))
        elif (l_1_a in environment.getattr(l_1_bounds, 'splits')):
            pass
            t_5.extend((
                'split_bound_',
                str(environment.getattr(l_1_a, 'index')),
            ))
        else:
            pass
            t_5.append(
                'bounds_aggregated',
            )
        return concat(t_5)
    context.exported_vars.add('part_of')
    context.vars['part_of'] = l_0_part_of = Macro(environment, macro, 'part_of', ('bounds', 'a'), False, False, False, context.eval_ctx.autoescape)

blocks = {}
debug_info = '17=18&18=27&20=40&21=51&23=66&24=81&25=82&29=88&30=94&31=98&32=102&33=106&35=110&37=121&38=126&40=140&42=148&43=150&47=154&48=162&49=165&50=169&51=183&52=187&54=199&55=203&60=213&62=215&65=221&67=223&68=225&70=227&71=229&73=231&75=235&76=240&77=242&78=246&79=250&81=264&83=267&85=270&96=276&98=278&99=280&101=282&102=284&103=286&105=290&106=292&108=294&109=296&111=298&116=300&117=302&118=304&121=306&128=308&131=310&137=312&139=314&141=316&144=318&145=320&146=322&147=324&150=327&152=330&155=334&161=340&162=347&163=353'