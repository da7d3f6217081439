# templates/measured.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '17b827b62620f8a1a4836d0a83b22e3b390e74b15d48b8b1b5371a0779e2096e'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'measured.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_grouping_key = l_0_measured = missing
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
    def macro(l_1_a):
        t_4 = []
        if l_1_a is missing:
            l_1_a = undefined("parameter 'a' was not provided", name='a')
        pass
        if (not t_2(environment.getattr(l_1_a, 'cuts'))):
            pass
            t_4.extend((
                'CASE WHEN ',
                str(environment.getattr(l_1_a, 'value')),
                ' IS NULL THEN NULL',
            ))
            l_2_loop = missing
            for l_2_cut, l_2_loop in LoopContext(environment.getattr(l_1_a, 'cuts'), undefined):
                _loop_vars = {}
                pass
                t_4.extend((
                    ' WHEN CAST(',
                    str(environment.getattr(l_1_a, 'value')),
                    ' AS DOUBLE) < ',
                    str(l_2_cut),
                    ' THEN ',
                    str(environment.getattr(l_2_loop, 'index0')),
                ))
            l_2_loop = l_2_cut = missing
            t_4.extend((
                ' ELSE ',
                str(t_1(environment.getattr(l_1_a, 'cuts'))),
                ' END',
            ))
        else:
            pass
            t_4.append(
                str(context.call((undefined(name='grouping_key') if l_0_grouping_key is missing else l_0_grouping_key), environment.getattr(l_1_a, 'exact'), environment.getattr(l_1_a, 'value'))),
            )
        return concat(t_4)
    context.exported_vars.add('measured')
    context.vars['measured'] = l_0_measured = Macro(environment, macro, 'measured', ('a',), False, False, False, context.eval_ctx.autoescape)

blocks = {}
debug_info = '6=24&7=31&11=46&12=51&13=55&14=59&15=79'