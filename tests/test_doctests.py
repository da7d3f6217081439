"""The ``>>>`` examples in bitsift's docstrings run and print what they say."""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import bitsift

MODULES = sorted(
    info.name for info in pkgutil.walk_packages(bitsift.__path__, prefix="bitsift.")
)
#: Modules whose public functions must carry runnable examples.
WITH_EXAMPLES = ("bitsift", "bitsift.run.api", "bitsift.run.reference", "bitsift.run.metrics",
                 "bitsift.spec.schema", "bitsift.spec.predicate", "bitsift.sql.sqlbuild",
                 "bitsift.sql.sqlstatements",
                 "bitsift.engines.sources")


@pytest.mark.parametrize("name", ["bitsift", *MODULES])
def test_module_doctests(name: str) -> None:
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS, verbose=False, report=True)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
    if name in WITH_EXAMPLES:
        assert result.attempted > 0, f"{name} lost its docstring examples"


def test_every_module_is_collected() -> None:
    assert {"bitsift.run.api", "bitsift.cli", "bitsift.run.reference",
            "bitsift.engines.duckdb_engine"} <= set(MODULES)
