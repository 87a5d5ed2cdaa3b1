"""Every public function of the laws, the mode table and ``tune`` documents every parameter."""

import inspect

import pytest

from dampctl import modetable
from dampctl.commands import tune
from dampctl.laws import dvf, iff, ppf

MODULES = [dvf, iff, ppf, modetable, tune]


def _public_functions():
    for module in MODULES:
        for name in getattr(module, "__all__", None) or dir(module):
            obj = getattr(module, name)
            if inspect.isfunction(obj) and obj.__module__ == module.__name__:
                if not name.startswith("_"):
                    yield f"{module.__name__}.{name}", obj


@pytest.mark.parametrize(("name", "function"), list(_public_functions()))
def test_parameters_are_documented(name, function):
    doc = inspect.getdoc(function) or ""
    assert doc, f"{name} has no docstring"
    for parameter in inspect.signature(function).parameters:
        if parameter in ("self", "cls"):
            continue
        assert parameter in doc, f"{name}: parameter {parameter!r} is not documented"
