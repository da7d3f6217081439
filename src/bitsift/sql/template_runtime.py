"""What the SQL templates' compiled modules call at render time, without importing Jinja2.

The modules in ``bitsift/sql/precompiled/`` are the Python code Jinja2's compiler writes for
each ``templates/*.sql.j2`` (:mod:`bitsift.sql.precompile`). That code calls a small runtime:
a context to resolve names in, macros, loops, the environment's attribute lookup, two filters,
two tests and the undefined value. Jinja2's own runtime is a module of the ``jinja2`` package,
and importing any of it imports the whole package (the compiler, lexer, parser and every
filter: 40-50 ms of CPU per command on the 2-core machine, about a tenth of a 10,000-row
ranking; benchmarks/RESULTS.md, "Fixed costs, fourth step"). This module implements the same
calls, and only those the SQL templates' code makes, with Jinja2 3.1's meaning:

- names resolve in the render's variables, then in the globals (``range``, ``dict``,
  ``namespace``); an unknown name, attribute or missing macro argument is a
  :class:`StrictUndefined` that raises :class:`UndefinedError` when used, as the SQL
  environment's ``StrictUndefined`` does (a template bug, never SQL with a hole in it);
- ``a.b`` is the attribute ``b``, else the item ``"b"`` (``Environment.getattr``);
- macros take positional, then keyword arguments, ``missing`` for the rest (the generated
  code fills in the defaults); ``_loop_vars``/``_block_vars`` are the compiler's, dropped;
- ``loop.index``, ``index0``, ``first``, ``last``, ``length``, ``revindex``, ``revindex0``,
  ``previtem``, ``nextitem``, ``depth``, ``depth0``;
- ``{% import %}``/``{% from ... import %}`` run the imported template once per process
  without the importer's variables (Jinja2's default module) and read its exported names.

No autoescaping (SQL), so ``Markup`` and ``escape`` are only named for the generated import
line (MarkupSafe is imported if one is ever called). Which Jinja2 versions' generated code
this was checked against: :data:`SUPPORTED_JINJA2`; a module written by another is passed
over and the template is compiled by Jinja2 itself (:mod:`bitsift.sql.templates`).
tests/test_template_runtime.py renders each construct, and every statement of a spread of
commands, both ways and compares the text (or the error).
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterable, Iterator, Mapping
from types import ModuleType
from typing import Any

__all__ = [
    "LoopContext", "Macro", "Markup", "Namespace", "TemplateNotFound", "TemplateReference",
    "TemplateRuntimeError", "Undefined", "escape", "identity", "internalcode", "markup_join",
    "missing", "str_join",
]

#: The Jinja2 versions whose generated code this runtime was checked against (the equality
#: test in tests/test_template_runtime.py, with the version the constraints pin).
SUPPORTED_JINJA2: frozenset[str] = frozenset({"3.1.6"})


class _Missing:
    """The generated code's "no value here" (an argument not passed, a name not set)."""

    def __repr__(self) -> str:
        return "missing"

    def __reduce__(self) -> str:
        return "missing"


missing: Any = _Missing()


class TemplateError(Exception):
    """A SQL template failed to render: a bug in bitsift, never the user's input."""


class UndefinedError(TemplateError):
    """A template used a name, attribute or argument it was not given."""


class TemplateRuntimeError(TemplateError):
    """A template called a filter or test this runtime does not have."""


class TemplateNotFound(TemplateError):
    """A template imported another that has no current compiled module."""


def Markup(value: Any = "") -> Any:  # noqa: N802 - the name the generated code imports
    """MarkupSafe's ``Markup`` (escaped text), imported on first use: never in the SQL
    templates, which are not autoescaped."""
    from markupsafe import Markup as markup

    return markup(value)


def escape(value: Any) -> Any:
    """MarkupSafe's ``escape``, imported on first use (never in the SQL templates)."""
    from markupsafe import escape as markup_escape

    return markup_escape(value)


def identity(value: Any) -> Any:
    return value


def internalcode(function: Callable[..., Any]) -> Callable[..., Any]:
    return function


def str_join(values: Iterable[Any]) -> str:
    """``a ~ b``: the operands as text, joined."""
    return "".join(map(str, values))


def markup_join(values: Iterable[Any]) -> str:
    """``a ~ b`` where an operand may be markup (never in the SQL templates: no escaping)."""
    parts = list(values)
    if any(hasattr(part, "__html__") for part in parts):
        joined: str = Markup("").join(escape(part) for part in parts)
        return joined
    return str_join(parts)


class Namespace:
    """``namespace(...)``: attributes a loop may set."""

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        self.__dict__.update(dict(*args, **kwargs))


class TemplateReference:
    """``self`` in a template: its blocks (the SQL templates have none)."""

    def __init__(self, context: Context) -> None:
        self._context = context


def _type_name(value: Any) -> str:
    """A value's type as Jinja2's messages name it."""
    if value is None:
        return "None"
    if value is Ellipsis:
        return "Ellipsis"
    kind = type(value)
    if kind.__module__ == "builtins":
        return f"{kind.__name__} object"
    return f"{kind.__module__}.{kind.__name__} object"


class Undefined:
    """A name, attribute or argument a template was not given: any use of it raises
    :class:`UndefinedError` (Jinja2's ``StrictUndefined``, the SQL environment's)."""

    __slots__ = ("_undefined_hint", "_undefined_obj", "_undefined_name")

    def __init__(self, hint: str | None = None, obj: Any = missing, name: Any = None,
                 exc: type[Exception] = UndefinedError) -> None:
        self._undefined_hint = hint
        self._undefined_obj = obj
        self._undefined_name = name

    @property
    def _undefined_message(self) -> str:
        if self._undefined_hint:
            return self._undefined_hint
        if self._undefined_obj is missing:
            return f"{self._undefined_name!r} is undefined"
        if not isinstance(self._undefined_name, str):
            return f"{_type_name(self._undefined_obj)} has no element {self._undefined_name!r}"
        return f"{_type_name(self._undefined_obj)!r} has no attribute {self._undefined_name!r}"

    def _fail_with_undefined_error(self, *args: Any, **kwargs: Any) -> Any:
        raise UndefinedError(self._undefined_message)

    def __getattr__(self, name: str) -> Any:
        if name[:2] == "__":
            raise AttributeError(name)
        return self._fail_with_undefined_error()

    __str__ = __iter__ = __len__ = __bool__ = __eq__ = __ne__ = __hash__ = __contains__ = (
        _fail_with_undefined_error)
    __add__ = __radd__ = __sub__ = __rsub__ = __mul__ = __rmul__ = __truediv__ = (
        _fail_with_undefined_error)
    __rtruediv__ = __floordiv__ = __rfloordiv__ = __mod__ = __rmod__ = __pos__ = (
        _fail_with_undefined_error)
    __neg__ = __call__ = __getitem__ = __lt__ = __le__ = __gt__ = __ge__ = __int__ = (
        _fail_with_undefined_error)
    __float__ = __complex__ = __pow__ = __rpow__ = _fail_with_undefined_error


StrictUndefined = Undefined


class _EvalContext:
    """The compiler's evaluation context: never autoescaping, never volatile."""

    autoescape = False
    volatile = False


class Context:
    """The variables of one render (or one imported template's run), then the globals."""

    def __init__(self, environment: SqlEnvironment, variables: Mapping[str, Any],
                 name: str) -> None:
        self.environment = environment
        self.parent = environment.globals
        self.vars: dict[str, Any] = dict(variables)
        self.name = name
        self.eval_ctx = _EvalContext()
        self.exported_vars: set[str] = set()

    def resolve_or_missing(self, key: str) -> Any:
        if key in self.vars:
            return self.vars[key]
        if key in self.parent:
            return self.parent[key]
        return missing

    def get_exported(self) -> dict[str, Any]:
        return {key: self.vars[key] for key in self.exported_vars}

    def call(__self, __obj: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:  # noqa: N805
        kwargs.pop("_block_vars", None)
        kwargs.pop("_loop_vars", None)
        try:
            return __obj(*args, **kwargs)
        except StopIteration:
            return __self.environment.undefined(
                "value was undefined because a callable raised a StopIteration exception")


class Macro:
    """A ``{% macro %}``: arguments bound by position, then by name, ``missing`` for the rest
    (the generated body fills in defaults and undefined values)."""

    def __init__(self, environment: SqlEnvironment, func: Callable[..., str], name: str,
                 arguments: tuple[str, ...], catch_kwargs: bool, catch_varargs: bool,
                 caller: bool, default_autoescape: bool | None = None) -> None:
        self._environment = environment
        self._func = func
        self._argument_count = len(arguments)
        self.name = name
        self.arguments = arguments
        self.catch_kwargs = catch_kwargs
        self.catch_varargs = catch_varargs
        self.caller = caller
        self.explicit_caller = "caller" in arguments

    def __call__(self, *args: Any, **kwargs: Any) -> str:
        if args and isinstance(args[0], _EvalContext):
            args = args[1:]
        arguments = list(args[: self._argument_count])
        found_caller = self.explicit_caller
        if len(arguments) != self._argument_count:
            found_caller = False
            for name in self.arguments[len(arguments):]:
                found_caller = found_caller or name == "caller"
                arguments.append(kwargs.pop(name, missing))
        if self.caller and not found_caller:
            caller = kwargs.pop("caller", None)
            arguments.append(caller if caller is not None else self._environment.undefined(
                "No caller defined", name="caller"))
        if self.catch_kwargs:
            arguments.append(kwargs)
        elif kwargs:
            raise TypeError(f"macro {self.name!r} takes no keyword argument "
                            f"{next(iter(kwargs))!r}")
        if self.catch_varargs:
            arguments.append(args[self._argument_count:])
        elif len(args) > self._argument_count:
            raise TypeError(f"macro {self.name!r} takes not more than "
                            f"{len(self.arguments)} argument(s)")
        return self._func(*arguments)

    def __repr__(self) -> str:
        return f"<Macro {self.name!r}>"


class LoopContext:
    """``loop`` in a ``{% for %}``: the items are read into a list first (the SQL templates
    loop over lists and ranges), so ``length``, ``last`` and ``nextitem`` need no peeking."""

    def __init__(self, iterable: Iterable[Any], undefined: type[Undefined],
                 recurse: Any = None, depth0: int = 0) -> None:
        self._items = list(iterable)
        self._undefined = undefined
        self._recurse = recurse
        self.index0 = -1
        self.depth0 = depth0

    @property
    def length(self) -> int:
        return len(self._items)

    @property
    def depth(self) -> int:
        return self.depth0 + 1

    @property
    def index(self) -> int:
        return self.index0 + 1

    @property
    def revindex0(self) -> int:
        return self.length - self.index

    @property
    def revindex(self) -> int:
        return self.length - self.index0

    @property
    def first(self) -> bool:
        return self.index0 == 0

    @property
    def last(self) -> bool:
        return self.index0 == len(self._items) - 1

    @property
    def previtem(self) -> Any:
        if self.index0 <= 0:
            return self._undefined("there is no previous item")
        return self._items[self.index0 - 1]

    @property
    def nextitem(self) -> Any:
        if self.index0 + 1 >= len(self._items):
            return self._undefined("there is no next item")
        return self._items[self.index0 + 1]

    def __iter__(self) -> Iterator[tuple[Any, LoopContext]]:
        return self

    def __next__(self) -> tuple[Any, LoopContext]:
        if self.index0 + 1 >= len(self._items):
            raise StopIteration
        self.index0 += 1
        return self._items[self.index0], self

    def __repr__(self) -> str:
        return f"<LoopContext {self.index}/{self.length}>"


def _join(eval_ctx: _EvalContext, value: Iterable[Any], separator: str = "",
          attribute: Any = None) -> str:
    """The ``join`` filter (no autoescaping): the items as text, joined."""
    if attribute is not None:
        raise TemplateRuntimeError("join(attribute=...) is not used by the SQL templates")
    return separator.join(map(str, value))


def _length(value: Any) -> int:
    """The ``length`` filter."""
    return len(value)


def _defined(value: Any) -> bool:
    return not isinstance(value, Undefined)


def _none(value: Any) -> bool:
    return value is None


class TemplateModule:
    """An imported template: its exported macros and variables as attributes."""

    def __init__(self, template: Template) -> None:
        context = template.new_context({})
        # Run the body for its side effects (macros defined, names set); its text is dropped.
        for _ in template.root_render_func(context):
            pass
        self.__dict__.update(context.get_exported())
        self.__name__ = template.name


class Template:
    """A SQL template's compiled module, bound to the one :class:`SqlEnvironment`."""

    def __init__(self, environment: SqlEnvironment, module: ModuleType) -> None:
        self.environment = environment
        self.name: str = module.name
        self.filename: str | None = module.__file__
        self.blocks: dict[str, Any] = module.blocks
        self.root_render_func: Callable[[Context], Iterator[str]] = module.root
        self._module: TemplateModule | None = None
        # As Jinja2 binds a compiled module: the generated code reads its environment as a
        # global of the module.
        setattr(module, "environment", environment)  # noqa: B010 - a module's global

    def new_context(self, variables: Mapping[str, Any]) -> Context:
        return Context(self.environment, variables, self.name)

    def render(self, **variables: Any) -> str:
        return "".join(self.root_render_func(self.new_context(variables)))

    def _get_default_module(self, context: Context | None = None) -> TemplateModule:
        """The template run once without the importer's variables (``{% import %}``)."""
        if self._module is None:
            self._module = TemplateModule(self)
        return self._module


class SqlEnvironment:
    """The environment the compiled modules see: lookups, filters, tests, imports."""

    undefined = Undefined

    def __init__(self, load: Callable[[str], ModuleType | None]) -> None:
        self._load = load
        self._templates: dict[str, Template] = {}
        self._lock = threading.Lock()
        self.globals: dict[str, Any] = {"range": range, "dict": dict, "namespace": Namespace}
        self.filters: dict[str, Callable[..., Any]] = {"join": _join, "length": _length}
        self.tests: dict[str, Callable[..., bool]] = {"defined": _defined, "none": _none}

    @staticmethod
    def concat(parts: Iterable[str]) -> str:
        return "".join(parts)

    def getattr(self, obj: Any, attribute: str) -> Any:
        try:
            return getattr(obj, attribute)
        except AttributeError:
            pass
        try:
            return obj[attribute]
        except (TypeError, LookupError, AttributeError):
            return self.undefined(obj=obj, name=attribute)

    def get_template(self, name: str, parent: str | None = None) -> Template:
        """Template ``name`` from its current compiled module; :class:`TemplateNotFound`
        when it has none (the caller then renders with Jinja2 itself)."""
        with self._lock:
            found = self._templates.get(name)
            if found is None:
                module = self._load(name)
                if module is None:
                    raise TemplateNotFound(name)
                found = self._templates[name] = Template(self, module)
            return found
