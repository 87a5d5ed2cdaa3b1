"""Value objects of a plant: validation, units, read-only data, PSD interpolation."""

import dataclasses
import math
import re

import numpy as np
import pytest

from dampctl.errors import PlantError
from dampctl.model.components import (
    ACTUATOR_KINDS,
    KIND_ORDER,
    KIND_UNIT,
    OUTPUT_KINDS,
    SENSOR_KINDS,
    Actuator,
    Disturbance,
    Mode,
    Output,
    Pair,
    Requirements,
    Sensor,
)
from dampctl.model.plant import ModalPlant


def test_mode_values_and_omega():
    mode = Mode(freq_hz=50.0, damping=0.02, modal_mass_kg=0.3, label="bending")
    assert mode.omega == pytest.approx(2 * math.pi * 50.0, rel=1e-15)
    with pytest.raises(dataclasses.FrozenInstanceError):
        mode.freq_hz = 3.0  # type: ignore[misc]


@pytest.mark.parametrize(
    ("kwargs", "field", "problem"),
    [
        ({"freq_hz": 0.0, "damping": 0.01}, "freq_hz", "must be in [1e-06, 1e+07] Hz, got 0"),
        ({"freq_hz": -1.0, "damping": 0.01}, "freq_hz", "must be in [1e-06, 1e+07] Hz"),
        ({"freq_hz": float("nan"), "damping": 0.01}, "freq_hz", "must be finite"),
        ({"freq_hz": "fast", "damping": 0.01}, "freq_hz", "expected a number"),
        ({"freq_hz": 1.0, "damping": 1.0}, "damping", "must be in [0, 1)"),
        ({"freq_hz": 1.0, "damping": -1e-9}, "damping", "must be in [0, 1)"),
        ({"freq_hz": 1.0, "damping": 0.1, "modal_mass_kg": 0.0}, "modal_mass_kg", "1e+12] kg"),
    ],
)
def test_mode_rejects(kwargs, field, problem):
    with pytest.raises(PlantError, match=f"^{field}: .*{re.escape(problem)}") as caught:
        Mode(**kwargs)
    assert caught.value.field == field
    assert problem in caught.value.message


def test_actuator_validation():
    strut = Actuator(name="s", kind="strut", between=["a", "b"], stiffness_n_per_m=1e6)
    assert strut.between == ("a", "b")
    cases = [
        ({"kind": "piezo", "site": "a"}, "kind", "kind must be one of force, strut"),
        ({"kind": "strut", "between": ("a", "b")}, "stiffness_n_per_m", "a strut needs"),
        ({"kind": "strut", "site": "a", "stiffness_n_per_m": 1.0}, "site", "between"),
        (
            {"kind": "strut", "between": ("a", "a"), "stiffness_n_per_m": 1.0},
            "between",
            "two different sites",
        ),
        ({"kind": "force", "between": ("a", "b")}, "between", "placed with site"),
        ({"kind": "force"}, "site", "needs a site"),
        (
            {"kind": "force", "site": "a", "stiffness_n_per_m": 1.0},
            "stiffness_n_per_m",
            "only a strut",
        ),
        ({"kind": "force", "site": "a", "max_force_n": -1.0}, "max_force_n", "(0, 1e+09] N"),
        ({"kind": "force", "site": "a", "cost": -5.0}, "cost", "must be in [0, 1e+15]"),
    ]
    for kwargs, field, problem in cases:
        with pytest.raises(PlantError) as caught:
            Actuator(name="x", **kwargs)
        assert caught.value.field == field, kwargs
        assert problem in caught.value.message, kwargs


def test_sensor_validation_and_units():
    assert Sensor(name="v", kind="velocity", site="a").unit == "m/s"
    assert Sensor(name="F", kind="force", actuator="s").unit == "N"
    assert Sensor(name="r", kind="relative_displacement", between=("a", "b")).unit == "m"
    cases = [
        ({"kind": "strain", "site": "a"}, "kind", "kind must be one of"),
        ({"kind": "force"}, "actuator", "needs actuator"),
        ({"kind": "force", "actuator": "s", "site": "a"}, "site", "placed by its strut"),
        ({"kind": "velocity", "site": "a", "actuator": "s"}, "actuator", "only a force"),
        ({"kind": "relative_velocity", "site": "a"}, "site", "between"),
        ({"kind": "velocity", "site": "a", "noise_density": -1.0}, "noise_density", "[0, 1e+09]"),
        ({"kind": "velocity", "site": "a", "bandwidth_hz": 0.0}, "bandwidth_hz", "(0, 1e+09] Hz"),
    ]
    for kwargs, field, problem in cases:
        with pytest.raises(PlantError) as caught:
            Sensor(name="x", **kwargs)
        assert caught.value.field == field, kwargs
        assert problem in caught.value.message, kwargs


def test_kind_tables_are_consistent():
    assert set(KIND_ORDER) == set(SENSOR_KINDS) == set(KIND_UNIT)
    assert set(OUTPUT_KINDS) == set(SENSOR_KINDS) - {"force"}
    assert ACTUATOR_KINDS == ("force", "strut")
    assert KIND_ORDER["acceleration"] == 2 and KIND_ORDER["relative_velocity"] == 1
    with pytest.raises(PlantError, match="kind must be one of"):
        Output(name="o", kind="force", site="a")


def test_pair_static_gain():
    assert Pair(name="p", actuator="a", sensor="s", static_gain=2).static_gain == 2.0
    with pytest.raises(PlantError, match="static_gain: must be finite"):
        Pair(name="p", actuator="a", sensor="s", static_gain=float("inf"))


def test_disturbance_psd():
    flat = Disturbance(name="w", site="a", psd=1e-3)
    np.testing.assert_array_equal(flat.psd_at(np.array([1.0, 1e4])), [1e-3, 1e-3])
    # log-log interpolation: halfway (in log f) between 1e-2 at 10 Hz and 1e-6 at 1 kHz is
    # 1e-4 at 100 Hz; zero outside the table
    table = Disturbance(name="w", site="a", psd=[[10.0, 1e-2], [1000.0, 1e-6]])
    np.testing.assert_allclose(
        table.psd_at(np.array([10.0, 100.0, 1000.0])), [1e-2, 1e-4, 1e-6], rtol=1e-12
    )
    np.testing.assert_array_equal(table.psd_at(np.array([5.0, 2000.0])), [0.0, 0.0])
    assert not table.psd.flags.writeable
    for psd, problem in [
        (-1.0, "must be in [0, 1e+15] N²/Hz"),
        ([[1.0, 1.0]], "at least two rows"),
        ([[10.0, 1.0], [5.0, 1.0]], "increasing"),
        ([[0.0, 1.0], [5.0, 1.0]], "psd[1][1]: must be in (0, 1e+07] Hz"),
        ([[1.0, -1.0], [5.0, 1.0]], "psd[1][2]: must be in [0, 1e+15] N²/Hz"),
        ([[1.0, float("nan")], [5.0, 1.0]], "psd[1][2]: must be finite"),
        (True, "psd: expected a number, got true (a boolean)"),
        ([[1.0, 1.0], [5.0, 1.0, 2.0]], "psd[2]: expected a row of 2 numbers, got a list of 3"),
        ([[1.0, "1"], [5.0, 1.0]], "psd[1][2]: expected a number, got '1' (a string)"),
        ([{"f": 1.0}, [5.0, 1.0]], "psd[1]: expected a row of 2 numbers, got a table"),
    ]:
        with pytest.raises(PlantError) as caught:
            Disturbance(name="w", site="a", psd=psd)
        assert str(caught.value).startswith("psd")
        assert problem in str(caught.value)
    with pytest.raises(PlantError, match="kind must be force"):
        Disturbance(name="w", site="a", psd=1.0, kind="base")


def test_requirements_validation():
    req = Requirements(modes=[1, 3], min_damping=0.05, max_rms={"tip": 1e-9})
    assert req.modes == (1, 3)
    with pytest.raises(TypeError):
        req.max_rms["tip"] = 2.0  # type: ignore[index]
    cases = [
        ({"modes": [0]}, "modes[1]", "mode numbers >= 1"),
        ({"modes": [1, True]}, "modes[2]", "mode numbers >= 1"),
        ({"modes": [1.5]}, "modes[1]", "mode numbers >= 1"),
        ({"min_damping": 1.0}, "min_damping", "(0, 1)"),
        ({"min_damping": 0.0}, "min_damping", "(0, 1)"),
        ({"sample_rate_hz": 0.0}, "sample_rate_hz", "must be in (0, 1e+09] Hz"),
        ({"loop_delay_s": -1e-6}, "loop_delay_s", "must be in [0, 1] s"),
        ({"min_gain_margin_db": -3.0}, "min_gain_margin_db", "must be in [0, 100] dB"),
        ({"max_rms": {"tip": 0.0}}, "max_rms.tip", "must be in (0, 1e+12]"),
    ]
    for kwargs, field, problem in cases:
        with pytest.raises(PlantError) as caught:
            Requirements(**kwargs)
        assert caught.value.field == field, kwargs
        assert problem in caught.value.message, kwargs


def test_plant_sites_are_read_only_copies():
    row = np.array([1.0, 2.0])
    plant = ModalPlant(modes=[Mode(1.0, 0.0), Mode(2.0, 0.0)], sites={"a": row})
    row[0] = 99.0
    assert plant.sites["a"][0] == 1.0
    with pytest.raises(ValueError, match="read-only"):
        plant.sites["a"][0] = 5.0
    with pytest.raises(TypeError):
        plant.sites["b"] = np.zeros(2)  # type: ignore[index]
