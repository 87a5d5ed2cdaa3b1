"""Fuzzing the plant-file reader: whatever arrives, only dampctl's own errors come out.

A valid plant (the two-mode stage below) is taken apart and put back with random damage: any
value swapped for a value of another TOML type (boolean, string, huge integer, NaN, nested
arrays, tables), keys dropped or added, rows of tables duplicated. Each document is written
with tomli-w, so it is valid TOML, and read with :func:`dampctl.model.plantfile.parse_plant`.
Raw text, deep nesting and byte noise go in too. The only exceptions allowed out are
:class:`~dampctl.errors.PlantError` and its subclass (both :class:`~dampctl.errors.DampctlError`);
a plant that is accepted must also survive ``dampctl check``'s survey without a numpy warning.
"""

from __future__ import annotations

import copy
import tomllib
import warnings

import tomli_w
from hypothesis import given
from hypothesis import strategies as st

from dampctl.errors import DampctlError, PlantError
from dampctl.model.plantfile import parse_plant
from dampctl.model.survey import survey_plant

BASE = """
title = "fuzz stage"

[[modes]]
freq_hz = 100.0
damping = 0.01
modal_mass_kg = 2.0

[[modes]]
freq_hz = 250.0
damping = 0.02

[sites]
a = [1.0, 0.5]
b = [0.2, -1.0]

[[actuators]]
name = "fa"
kind = "force"
site = "a"
max_force_n = 10.0

[[actuators]]
name = "st"
kind = "strut"
between = ["a", "b"]
stiffness_n_per_m = 1e6

[[sensors]]
name = "va"
kind = "velocity"
site = "a"
noise_density = 1e-8

[[sensors]]
name = "fs"
kind = "force"
actuator = "st"

[[pairs]]
name = "pa"
actuator = "fa"
sensor = "va"

[[pairs]]
name = "ps"
actuator = "st"
sensor = "fs"
static_gain = -5e5

[[outputs]]
name = "xb"
kind = "displacement"
site = "b"

[[disturbances]]
name = "w"
site = "b"
psd = [[1.0, 1e-3], [1000.0, 1e-6]]

[requirements]
modes = [1, 2]
min_damping = 0.05
sample_rate_hz = 10000.0
loop_delay_s = 1e-5
max_rms = { xb = 1e-6 }
"""
DOCUMENT = tomllib.loads(BASE)


def _paths(value, prefix=()):
    """Every path (tuple of keys / indices) to a node of the document."""
    yield prefix
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _paths(item, (*prefix, key))
    elif isinstance(value, list):
        for k, item in enumerate(value):
            yield from _paths(item, (*prefix, k))


PATHS = [p for p in _paths(DOCUMENT) if p]

leaves = st.one_of(
    st.booleans(),
    st.text(max_size=8),
    st.sampled_from(["10000", "1e3", "nan", "", "a", "fa", "va", "force", "strut", "velocity"]),
    st.integers(min_value=-(10**400), max_value=10**400),
    st.integers(min_value=-3, max_value=5),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -1.0, 1e-300, 1e300, 1e-13, 1e8, 0.999999, 1.0, 2.0]),
)
values = st.recursive(
    leaves,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4),
        st.dictionaries(st.sampled_from(["x", "a", "freq_hz", "name", "xb"]), inner, max_size=3),
    ),
    max_leaves=8,
)


def _set(document, path, value):
    node = document
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value


def _drop(document, path):
    node = document
    for key in path[:-1]:
        node = node[key]
    del node[path[-1]]


damage = st.lists(
    st.one_of(
        st.tuples(st.just("set"), st.sampled_from(PATHS), values),
        st.tuples(st.just("drop"), st.sampled_from(PATHS), st.none()),
        st.tuples(st.just("add"), st.sampled_from(PATHS), values),
    ),
    min_size=1,
    max_size=4,
)


def _damaged(steps):
    document = copy.deepcopy(DOCUMENT)
    for action, path, value in steps:
        try:
            if action == "set":
                _set(document, path, value)
            elif action == "drop":
                _drop(document, path)
            else:
                _set(document, (*path[:-1], "extra_key") if path else ("extra_key",), value)
        except (KeyError, IndexError, TypeError):
            continue  # an earlier step changed the shape: skip this one
    return document


def _read(text: str):
    """Parse and, when the plant is accepted, survey it; only DampctlError may escape."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a numpy overflow or division warning is a bug too
        try:
            plant = parse_plant(text, source="fuzz.toml")
        except PlantError as exc:
            assert str(exc).startswith("fuzz.toml"), str(exc)
            assert "\n" not in str(exc)
            return None
        survey_plant(plant)
        return plant


def test_the_base_document_is_a_valid_plant():
    plant = _read(BASE)
    assert plant is not None and plant.n_modes == 2


@given(damage)
def test_damaged_plant_files_give_only_plant_errors(steps):
    document = _damaged(steps)
    try:
        text = tomli_w.dumps(document)
    except (TypeError, ValueError):
        return  # not expressible as TOML (tomli-w refuses NaN keys etc.)
    try:
        _read(text)
    except DampctlError as exc:
        raise AssertionError(f"a DampctlError other than PlantError: {exc!r}") from None


@given(st.text(max_size=300))
def test_random_text_gives_only_plant_errors(text):
    _read(text)


@given(st.integers(min_value=1, max_value=4), st.integers(min_value=100, max_value=20000))
def test_deep_nesting_is_a_plant_error(where, depth):
    nested = "[" * depth + "1.0" + "]" * depth
    spots = {
        1: f'title = "x"\n[sites]\na = {nested}\n',
        2: f"[[modes]]\nfreq_hz = {nested}\ndamping = 0.01\n",
        3: f"x = {nested}\n",
        4: "a = " + "{b = " * depth + "1" + "}" * depth + "\n",
    }
    assert _read(spots[where]) is None
