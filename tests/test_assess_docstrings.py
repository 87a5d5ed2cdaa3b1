"""Every public function and class of the assessment modules documents every parameter."""

import importlib
import inspect
import re

import pytest

MODULES = [
    "dampctl.assess",
    "dampctl.figures",
    "dampctl.loopmodel",
    "dampctl.margins",
    "dampctl.response",
    "dampctl.robustness",
    "dampctl.vc",
]


def _documented(doc: str) -> set[str]:
    match = re.search(r"Parameters\n-+\n(.*?)(\n\n[A-Z][a-z]+\n-+\n|\Z)", doc, re.S)
    if not match:
        return set()
    names = set()
    for line in match.group(1).splitlines():
        if line and not line.startswith(" "):
            head = line.split(":")[0]
            names.update(part.strip() for part in head.split(","))
    return names


@pytest.mark.parametrize("module", MODULES)
def test_public_parameters_documented(module):
    mod = importlib.import_module(module)
    for name in mod.__all__:
        obj = getattr(mod, name)
        if not inspect.isfunction(obj):
            continue
        doc = inspect.getdoc(obj) or ""
        assert doc, f"{module}.{name} has no docstring"
        params = set(inspect.signature(obj).parameters)
        missing = params - _documented(doc)
        assert not missing, f"{module}.{name}: undocumented {sorted(missing)}"
