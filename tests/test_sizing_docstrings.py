"""Every public function and method of the sizing modules documents every parameter."""

import inspect

import pytest

from dampctl import effort, figures_sizing, screening, setsearch, sizing
from dampctl.commands import size

MODULES = [sizing, screening, setsearch, effort, figures_sizing, size]


def _public():
    for module in MODULES:
        for name in getattr(module, "__all__", None) or dir(module):
            obj = getattr(module, name)
            if inspect.isfunction(obj) and obj.__module__ == module.__name__:
                if not name.startswith("_"):
                    yield f"{module.__name__}.{name}", obj
            if inspect.isclass(obj) and obj.__module__ == module.__name__:
                for attr, member in vars(obj).items():
                    if inspect.isfunction(member) and not attr.startswith("_"):
                        yield f"{module.__name__}.{name}.{attr}", member


@pytest.mark.parametrize(("name", "function"), list(_public()))
def test_parameters_are_documented(name, function):
    doc = inspect.getdoc(function) or ""
    assert doc, f"{name} has no docstring"
    for parameter in inspect.signature(function).parameters:
        if parameter in ("self", "cls"):
            continue
        assert f"{parameter} :" in doc or f"{parameter}," in doc or f", {parameter}" in doc, (
            f"{name}: parameter {parameter!r} is not documented"
        )
