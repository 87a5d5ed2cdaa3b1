"""Passive parts as values: validation naming the field, the design-file form and back."""

import pytest

from dampctl.errors import DesignError
from dampctl.model.passive import (
    GROUND,
    Absorber,
    Damper,
    Shunt,
    part_from_dict,
    part_to_dict,
)


@pytest.mark.parametrize(
    "part",
    [
        Absorber(2, "tip", 0.05, 120.0, 0.1),
        Damper(("a", GROUND), 30.0),
        Damper(("a", "b"), 30.0, 1e5),
        Shunt("p", "pz", "R", 1e3, mode=3),
        Shunt("p", "pz", "RL", 1e3, 2.5, 1),
    ],
)
def test_round_trip(part):
    data = part_to_dict(part)
    assert data["part"] == part.part
    assert part_from_dict(data) == part
    assert part.scaled(2.0) != part and part.scaled(1.0) == part


def test_absorber_values():
    a = Absorber(1, "x", 0.2, 10.0, 0.1)
    assert a.stiffness_n_per_m == pytest.approx(0.2 * (2 * 3.141592653589793 * 10.0) ** 2)
    assert a.damping_n_s_per_m == pytest.approx(2 * 0.1 * 0.2 * 2 * 3.141592653589793 * 10.0)
    assert a.price_kind == "absorber"
    assert Shunt("p", "s", "RL", 1.0, 1.0).price_kind == "rl_shunt"
    assert Shunt("p", "s", "R", 1.0).price_kind == "r_shunt"


@pytest.mark.parametrize(
    ("build", "field", "problem"),
    [
        (lambda: Absorber(0, "x", 1.0, 1.0, 0.1), "mode", "mode number"),
        (lambda: Absorber(1, "", 1.0, 1.0, 0.1), "site", "expected a name"),
        (lambda: Absorber(1, "x", -1.0, 1.0, 0.1), "mass_kg", "must be > 0"),
        (lambda: Absorber(1, "x", 1.0, float("nan"), 0.1), "freq_hz", "finite"),
        (lambda: Absorber(1, "x", 1.0, 1.0, -0.1), "damping", "must be >= 0"),
        (lambda: Damper(("a",), 1.0), "between", "two site names"),
        (lambda: Shunt("p", "s", "RL", 1.0), "inductance_h", "needs inductance_h"),
        (lambda: Shunt("p", "s", "R", 1.0, 2.0), "inductance_h", "no inductance"),
        (lambda: Shunt("p", "s", "C", 1.0), "kind", "R or RL"),
    ],
)
def test_bad_values(build, field, problem):
    with pytest.raises(DesignError, match=problem) as caught:
        build()
    assert caught.value.field == field


def test_bad_file_forms():
    with pytest.raises(DesignError, match="unknown part") as caught:
        part_from_dict({"part": "spring"}, "parts[2]")
    assert caught.value.field == "parts[2].part"
    with pytest.raises(DesignError, match="unexpected or missing key"):
        part_from_dict({"part": "absorber", "mode": 1})
    with pytest.raises(DesignError) as caught:
        part_from_dict({"part": "absorber", "mode": 1, "site": "x", "mass_kg": 0.0,
                        "freq_hz": 1.0, "damping": 0.1}, "parts[1]")
    assert caught.value.field == "parts[1].mass_kg"
