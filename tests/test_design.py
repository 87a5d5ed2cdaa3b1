"""The Design value: file round trip, state space vs branch responses, plant fingerprint."""

import json
import re

import control
import numpy as np
import pytest

from dampctl.design import Branch, Design, Loop, Section, design_from_dict, load_design
from dampctl.errors import DesignError
from dampctl.testing import chain_plant


def loop_design(plant) -> Design:
    w = 2 * np.pi * 300.0
    loops = (
        Loop(
            pair="p1",
            actuator="f1",
            sensor="v1",
            gain=40.0,
            branches=(Branch(40.0, sections=(Section((w,), (1.0, w)),), label="roll-off"),),
        ),
        Loop(
            pair="q2",
            actuator="f2",
            sensor="x2",
            gain=-0.5,
            branches=(
                Branch(-5e3, sections=(Section((1.0,), (1.0, 2 * 0.3 * 60.0, 60.0**2)),)),
                Branch(
                    2.0, sections=(Section((1.0, 0.0), (1.0, 10.0)), Section((3.0,), (1.0, 3.0)))
                ),
            ),
        ),
    )
    return Design(
        law="ppf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f1", "f2"),
        sensors=("v1", "x2"),
        target_modes=(1, 2),
        loops=loops,
        pairs=("p1", "q2"),
        plant_title=plant.title,
        info={"target_damping": 0.05, "freqs": np.array([1.0, 2.0]), "none": float("inf")},
    )


def lqg_design(plant) -> Design:
    rng = np.random.default_rng(3)
    A = -np.eye(3) * 50.0 + rng.normal(size=(3, 3))
    return Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        actuators=("f1",),
        sensors=("x1", "x2"),
        target_modes=(1,),
        controller=(A, rng.normal(size=(3, 2)), rng.normal(size=(1, 3)), np.zeros((1, 2))),
    )


@pytest.fixture(scope="module")
def plant():
    return chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)


def test_json_round_trip(tmp_path, plant):
    for design in (loop_design(plant), lqg_design(plant)):
        path = tmp_path / f"{design.law}.json"
        path.write_text(design.to_json(), encoding="utf-8")
        again = load_design(path)
        assert again.to_json() == design.to_json()
        assert again.loops == design.loops
        f = np.geomspace(1.0, 1e4, 50)
        np.testing.assert_array_equal(again.response(f), design.response(f))
        data = json.loads(path.read_text())
        assert data["sign_convention"] == "u = -K(s) y"
    info = json.loads(loop_design(plant).to_json())["info"]
    assert info == {"target_damping": 0.05, "freqs": [1.0, 2.0], "none": None}


def test_loop_state_space_matches_branch_responses(plant):
    # The state-space realization of each loop (our code) against python-control's frequency
    # response of it, and against the sum of the branches' rational functions evaluated directly.
    design = loop_design(plant)
    f = np.geomspace(0.5, 5e3, 200)
    s = 2j * np.pi * f
    for loop in design.loops:
        A, B, C, D = loop.statespace_matrices()
        direct = sum(
            b.gain
            * np.prod([np.polyval(x.num, s) / np.polyval(x.den, s) for x in b.sections], axis=0)
            for b in loop.branches
        )
        np.testing.assert_allclose(loop.response(f), direct, rtol=1e-12)
        ref = control.frequency_response(control.ss(A, B, C, D), 2 * np.pi * f).complex
        np.testing.assert_allclose(np.ravel(ref), direct, rtol=1e-10)
    whole = control.frequency_response(design.statespace(), 2 * np.pi * f).complex
    np.testing.assert_allclose(
        np.asarray(whole).reshape(2, 2, -1), design.response(f), rtol=1e-10, atol=1e-14
    )
    lqg = lqg_design(plant)
    ref = control.frequency_response(lqg.statespace(), 2 * np.pi * f).complex
    np.testing.assert_allclose(np.asarray(ref).reshape(1, 2, -1), lqg.response(f), rtol=1e-10)


def test_fingerprint_mismatch(plant):
    design = loop_design(plant)
    design.check_plant(plant)
    other = chain_plant([1.0, 0.5], [5e5, 2.1e5], damping=0.01)
    with pytest.raises(DesignError, match=r"d\.json: plant_fingerprint: was designed for another"):
        design.check_plant(other, source="d.json")
    # the design file keeps a plant summary (the laws store it): the message names what changed
    from dataclasses import replace

    from dampctl.model.summary import plant_summary

    named = r"designed for another plant .*: mode 1 freq_hz 76.3021 → 77.0724; mode 2"
    with pytest.raises(DesignError, match=named):
        replace(design, plant_summary=plant_summary(plant)).check_plant(other)
    bare = design  # no summary, as a design file from before it
    with pytest.raises(DesignError, match="no plant summary"):
        bare.check_plant(other)


def test_fingerprint_ignores_outputs_and_requirements(plant):
    from dataclasses import replace

    from dampctl.model.components import Requirements

    assert replace(plant, requirements=Requirements(modes=(1,)), title="x").fingerprint == (
        plant.fingerprint
    )


def test_invalid_designs(plant, tmp_path):
    with pytest.raises(DesignError, match="law must be one of"):
        Design(law="pid", plant_fingerprint="x", actuators=(), sensors=(), target_modes=())
    with pytest.raises(DesignError, match="either loops"):
        Design(law="dvf", plant_fingerprint="x", actuators=(), sensors=(), target_modes=())
    with pytest.raises(DesignError, match="proper"):
        Section((1.0, 0.0, 0.0), (1.0, 1.0))
    with pytest.raises(DesignError, match="degree <= 2"):
        Section((1.0,), (1.0, 1.0, 1.0, 1.0))
    with pytest.raises(DesignError, match="no controller branches"):
        Loop(pair="p", actuator="a", sensor="s", gain=1.0, branches=())
    data = json.loads(loop_design(plant).to_json())
    del data["law"]
    with pytest.raises(DesignError, match=r"f\.json: law: missing required key"):
        design_from_dict(data, source="f.json")
    bad = tmp_path / "bad.json"
    bad.write_text("{not json", encoding="utf-8")
    with pytest.raises(DesignError, match="not a JSON design file"):
        load_design(bad)
    bad.write_text('{"format": "other"}', encoding="utf-8")
    with pytest.raises(DesignError, match="format: not a dampctl design"):
        load_design(bad)


# ---------------------------------------------------------------------- passive designs
def passive_design(plant, **changes) -> Design:
    from dampctl.model.passive import Absorber

    values = dict(
        law="tmd",
        plant_fingerprint=plant.fingerprint,
        actuators=(),
        sensors=(),
        target_modes=(1,),
        parts=(Absorber(1, "m1", 0.05, 10.0, 0.1),),
        info={"tuning": "by hand"},
    )
    values.update(changes)
    return Design(**values)


def test_passive_design_round_trip(plant, tmp_path):
    design = passive_design(plant)
    assert design.passive and not design.decentralized
    path = tmp_path / "tmd.json"
    path.write_text(design.to_json())
    again = load_design(path)
    assert again == design
    data = json.loads(path.read_text())
    assert data["passive"] is True and "loops" not in data and "sign_convention" not in data
    assert data["parts"][0]["part"] == "absorber"
    again.check_plant(plant)


def test_passive_design_has_no_loop(plant):
    design = passive_design(plant)
    for call in (design.statespace_matrices, design.statespace, lambda: design.response([1.0])):
        with pytest.raises(DesignError, match="passive design"):
            call()


@pytest.mark.parametrize(
    ("changes", "match"),
    [
        ({"parts": ()}, "needs at least one part"),
        ({"actuators": ("f1",), "sensors": ("v1",)}, "parts only"),
        ({"law": "viscous"}, "holds dampers"),
    ],
)
def test_passive_design_validation(plant, changes, match):
    with pytest.raises(DesignError, match=match):
        passive_design(plant, **changes)


def test_active_design_with_parts_is_refused(plant):
    from dampctl.model.passive import Damper

    design = loop_design(plant)
    with pytest.raises(DesignError, match="no passive parts"):
        Design(**{**design.__dict__, "parts": (Damper(("m1", "ground"), 1.0),)})


def test_passive_parts_must_exist_on_the_plant(plant, tmp_path):
    from dampctl.model.passive import Absorber, Damper, Shunt

    bad = {
        "site": passive_design(plant, parts=(Absorber(1, "nowhere", 0.05, 10.0, 0.1),)),
        "mode": passive_design(plant, parts=(Absorber(9, "m1", 0.05, 10.0, 0.1),)),
        "between": passive_design(plant, law="viscous", parts=(Damper(("m1", "elsewhere"), 1.0),)),
        "actuator": passive_design(plant, law="shunt", parts=(Shunt("p1", "f1", "R", 10.0),)),
    }
    for field, design in bad.items():
        with pytest.raises(DesignError) as caught:
            design.check_plant(plant, source="d.json")
        assert caught.value.field == f"parts[1].{field}"
        assert str(caught.value).startswith("d.json: parts[1].")
    path = tmp_path / "broken.json"
    data = passive_design(plant).to_dict()
    data["parts"][0]["mass_kg"] = -1
    path.write_text(json.dumps(data))
    with pytest.raises(DesignError, match="must be > 0") as caught:
        load_design(path)
    assert caught.value.field == "parts[1].mass_kg"


def test_a_design_file_with_the_earlier_fingerprint_is_still_accepted(plant):
    from dataclasses import replace

    old = replace(loop_design(plant), plant_fingerprint=plant.legacy_fingerprint)
    old.check_plant(plant)  # written before delay and rate entered the fingerprint
    assert plant.legacy_fingerprint != plant.fingerprint


@pytest.mark.parametrize(
    ("path", "value", "field"),
    [
        (("loops", 0, "gain"), True, "loops[1].gain"),
        (("loops", 1, "branches", 0, "gain"), "5", "loops[2].branches[1].gain"),
        (("loops", 0, "branches", 0, "sections", 0, "den"), [1.0, None],
         "loops[1].branches[1].sections[1].den[2]"),
        (("target_modes",), [1, 2.5], "target_modes[2]"),
        (("actuators",), ["f1", 3], "actuators[2]"),
    ],
)
def test_design_file_fields_are_read_strictly(plant, path, value, field):
    data = loop_design(plant).to_dict()
    at = data
    for key in path[:-1]:
        at = at[key]
    at[path[-1]] = value
    with pytest.raises(DesignError, match=re.escape(f"d.json: {field}: ")):
        design_from_dict(data, source="d.json")


def test_a_loop_written_twice_and_a_law_with_the_wrong_fields_are_refused(plant):
    data = loop_design(plant).to_dict()
    data["loops"][1]["pair"] = data["loops"][0]["pair"]
    with pytest.raises(DesignError, match=r"loops\[2\]\.pair: pair 'p1' has a loop already"):
        design_from_dict(data)
    data = loop_design(plant).to_dict()
    data["law"] = "lqg"
    with pytest.raises(DesignError, match="a lqg design holds controller, not loops"):
        design_from_dict(data)
