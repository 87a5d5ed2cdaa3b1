"""House rules: numpydoc docstrings documenting every parameter, sorted complete __all__, one
error tree."""

import builtins
import importlib
import inspect
import pkgutil
import types

import pytest

import dampctl
from dampctl import errors

# modules whose own name starts with "_" are private helpers, not public API
MODULES = sorted(
    m.name
    for m in pkgutil.walk_packages(dampctl.__path__, prefix="dampctl.")
    if not m.name.rsplit(".", 1)[-1].startswith("_")
)
# subcommand modules follow the command protocol (NAME, HELP, add_arguments, run)
PROTOCOL_ONLY = {"dampctl.commands"}


def isort_key(name: str) -> tuple[int, str]:
    """Order used by ruff's RUF022: CONSTANTS, then Classes, then functions."""
    return (0 if name.isupper() else 1 if name[:1].isupper() else 2, name)


def load(name: str) -> types.ModuleType:
    return importlib.import_module(name)


def own_members(module: types.ModuleType):
    """Public functions and classes defined in ``module`` itself."""
    for name, obj in vars(module).items():
        if name.startswith("_"):
            continue
        if (inspect.isfunction(obj) or inspect.isclass(obj)) and obj.__module__ == module.__name__:
            yield name, obj


def documented_names(doc: str, sections=("Parameters",)) -> set[str]:
    """Names listed in the given numpydoc sections of a docstring."""
    lines = inspect.cleandoc(doc).splitlines()
    names: set[str] = set()
    k = 0
    while k < len(lines) - 1:
        title, rule = lines[k].strip(), lines[k + 1].strip()
        if title in sections and rule and set(rule) == {"-"}:
            k += 2
            while k < len(lines):
                line = lines[k]
                nxt = lines[k + 1].strip() if k + 1 < len(lines) else ""
                if line.strip() and nxt and set(nxt) == {"-"}:
                    break  # next section
                if line and not line.startswith(" "):
                    head = line.split(" : ")[0].strip()
                    for part in head.split(","):
                        names.add(part.strip().lstrip("*"))
                k += 1
            continue
        k += 1
    return names


def signature_names(fn) -> list[str]:
    try:
        sig = inspect.signature(fn)
    except (TypeError, ValueError):
        return []
    return [p for p in sig.parameters if p not in ("self", "cls")]


def callables():
    """(qualified name, object, parameter names) of every public function, class and method."""
    for module_name in MODULES:
        module = load(module_name)
        for name, obj in own_members(module):
            qual = f"{module_name}.{name}"
            if inspect.isfunction(obj):
                yield qual, obj, signature_names(obj), ("Parameters",)
                continue
            if issubclass(obj, BaseException):
                yield qual, obj, [], ("Parameters",)
            else:
                yield qual, obj, signature_names(obj), ("Parameters", "Attributes")
            for attr, member in vars(obj).items():
                if attr.startswith("_"):
                    continue
                if isinstance(member, property):
                    yield f"{qual}.{attr}", member.fget, [], ("Parameters",)
                elif isinstance(member, classmethod | staticmethod):
                    fn = member.__func__
                    yield f"{qual}.{attr}", fn, signature_names(fn), ("Parameters",)
                elif inspect.isfunction(member):
                    yield f"{qual}.{attr}", member, signature_names(member), ("Parameters",)


CALLABLES = list(callables())


def test_found_the_package():
    assert "dampctl.model.plant" in MODULES and "dampctl.commands.check" in MODULES
    assert len(CALLABLES) > 50


@pytest.mark.parametrize(
    ("qual", "obj", "params", "sections"), CALLABLES, ids=[c[0] for c in CALLABLES]
)
def test_every_parameter_is_documented(qual, obj, params, sections):
    doc = inspect.getdoc(obj) if not inspect.isclass(obj) else obj.__doc__
    assert doc and doc.strip(), f"{qual} has no docstring"
    if not params:
        return
    documented = documented_names(doc, sections)
    missing = [p for p in params if p not in documented]
    assert not missing, f"{qual}: parameters not documented in its docstring: {missing}"


@pytest.mark.parametrize("module_name", MODULES)
def test_module_all_is_sorted_and_exact(module_name):
    module = load(module_name)
    assert module.__doc__, f"{module_name} has no module docstring"
    if module_name.rsplit(".", 1)[0] in PROTOCOL_ONLY and not hasattr(module, "__all__"):
        for name in ("NAME", "HELP", "add_arguments", "run"):
            assert hasattr(module, name), f"{module_name} lacks {name}"
        return
    if module_name in PROTOCOL_ONLY:
        return
    assert hasattr(module, "__all__"), f"{module_name} has no __all__"
    listed = list(module.__all__)
    assert listed in (sorted(listed), sorted(listed, key=isort_key)), (
        f"{module_name}.__all__ is not sorted"
    )
    assert len(set(listed)) == len(listed)
    for name in listed:
        assert hasattr(module, name), f"{module_name}.__all__ lists missing {name}"
    own = {name for name, _ in own_members(module)}
    assert own <= set(listed), (
        f"{module_name}: public but not in __all__: {sorted(own - set(listed))}"
    )


def test_package_all_is_sorted_and_complete():
    listed = list(dampctl.__all__)
    assert listed == sorted(listed)
    public = {
        name
        for name, obj in vars(dampctl).items()
        if not name.startswith("_") and not isinstance(obj, types.ModuleType)
    }
    assert set(listed) == public
    # every error class and every public name of the plant, plant-file, survey and design
    # modules is reachable from the top level
    for module in (errors, load("dampctl.model.plant"), load("dampctl.model.plantfile")):
        missing = set(module.__all__) - set(listed)
        assert not missing, f"not exported by dampctl: {sorted(missing)}"
    assert {"Branch", "Design", "Loop", "Section", "load_design", "survey_plant"} <= set(listed)


BUILTIN_OF = {
    "PlantError": ValueError,
    "PlantFileError": ValueError,
    "DesignError": ValueError,
    "DesignRefused": ValueError,
    "MeasurementError": ValueError,
    "UsageError": ValueError,
    "OutputError": OSError,
    "MissingFeatureError": ImportError,
}


def test_error_tree():
    classes = {
        n: c for n, c in vars(errors).items() if inspect.isclass(c) and issubclass(c, BaseException)
    }
    assert set(classes) == {"DampctlError", *BUILTIN_OF}
    for name, cls in classes.items():
        assert issubclass(cls, errors.DampctlError), name
        if name != "DampctlError":
            assert issubclass(cls, BUILTIN_OF[name]), name
            assert any(b in vars(builtins).values() for b in cls.__mro__[1:] if b is not object)
    err = errors.PlantError("must be > 0", source="a.toml", field="modes[2].freq_hz")
    assert str(err) == "a.toml: modes[2].freq_hz: must be > 0"


def test_no_other_exception_classes():
    for module_name in MODULES:
        for name, obj in own_members(load(module_name)):
            if inspect.isclass(obj) and issubclass(obj, BaseException):
                assert issubclass(obj, errors.DampctlError), f"{module_name}.{name}"


def test_documented_names_parser():
    doc = """Summary.

    Parameters
    ----------
    a, b : float
        Two.
    *args
        More.
    c : int, optional
        See.

    Returns
    -------
    x : float
        Not a parameter.
    """
    assert documented_names(doc) == {"a", "b", "args", "c"}
