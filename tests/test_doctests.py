"""Run the doctest examples in the package docstrings (they document the public API)."""

import doctest
import importlib
import pkgutil

import pytest

import fvrans

MODULES = sorted(
    m.name for m in pkgutil.walk_packages(fvrans.__path__, prefix="fvrans.") if "._" not in m.name
)


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name: str) -> None:
    module = importlib.import_module(name)
    failures, _ = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert failures == 0, f"{failures} doctest example(s) failed in {name}"
