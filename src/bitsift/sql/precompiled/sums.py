# templates/sums.sql.j2 compiled by Jinja2 3.1.6: generated, do not edit.
# BITSIFT_REGENERATE_TEMPLATES=1 .venv/bin/pytest tests/test_precompiled_templates.py
# ruff: noqa
SOURCE_DIGEST = '0a768adc68938e50ee2cd55bfa37546912dbc46e994f60b3da71057192b213ee'
from jinja2.runtime import LoopContext, Macro, Markup, Namespace, TemplateNotFound, TemplateReference, TemplateRuntimeError, Undefined, escape, identity, internalcode, markup_join, missing, str_join
name = 'sums.sql.j2'

def root(context, missing=missing):
    resolve = context.resolve_or_missing
    undefined = environment.undefined
    concat = environment.concat
    cond_expr_undefined = Undefined
    if 0: yield None
    l_0_exact_sum = missing
    pass
    def macro(l_1_term):
        t_1 = []
        if l_1_term is missing:
            l_1_term = undefined("parameter 'term' was not provided", name='term')
        pass
        t_1.extend((
            'CAST(SUM(CAST(',
            str(l_1_term),
            ' AS DECIMAL(38, 18))) AS DOUBLE)',
        ))
        return concat(t_1)
    context.exported_vars.add('exact_sum')
    context.vars['exact_sum'] = l_0_exact_sum = Macro(environment, macro, 'exact_sum', ('term',), False, False, False, context.eval_ctx.autoescape)

blocks = {}
debug_info = '8=12&9=19'