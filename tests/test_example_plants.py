"""The example plants: written by their scripts from lumped models, and their targets reachable.

These are consistency checks of our own demo scenarios (invented numbers), not comparisons
with published values; the physics they rely on is tested in test_plant.py.
"""

import importlib.util
import re
import tomllib

import numpy as np
import pytest
from repo import ROOT
from scipy.linalg import eigh

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.design import Branch, Design, Loop, Section
from dampctl.model.plantfile import dump_plant, load_plant

NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def _words(text: str) -> str:
    return NUMBER.sub("#", text)


def assert_same_values(a, b, path="") -> None:
    if isinstance(a, dict):
        assert isinstance(b, dict) and a.keys() == b.keys(), path
        for key in a:
            assert_same_values(a[key], b[key], f"{path}.{key}")
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), path
        for k, (x, y) in enumerate(zip(a, b, strict=True)):
            assert_same_values(x, y, f"{path}[{k}]")
    elif isinstance(a, float):
        assert isinstance(b, float), path
        assert b == pytest.approx(a, rel=1e-12, abs=1e-15), path
    else:
        assert a == b, path


def script(name: str):
    spec = importlib.util.spec_from_file_location(name, ROOT / "scripts" / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.mark.parametrize(
    ("name", "plant_file"),
    [("make_stage_plant", "scanning_stage"), ("make_truss_plant", "light_truss")],
)
def test_plant_file_is_what_its_script_writes(name, plant_file):
    module = script(name)
    text = (ROOT / "plants" / f"{plant_file}.toml").read_text(encoding="utf-8")
    expected = module.HEADER + "\n" + dump_plant(module.build())
    # the same keys, comments and strings; numbers equal to rounding (the script's eigenvectors
    # differ in the last bits between LAPACK builds)
    assert _words(text) == _words(expected)
    assert_same_values(tomllib.loads(text), tomllib.loads(expected))
    M, K = module.lumped_model()[:2]
    plant = load_plant(ROOT / "plants" / f"{plant_file}.toml")
    np.testing.assert_allclose(plant.omegas, np.sqrt(eigh(K, M, eigvals_only=True)), rtol=1e-12)


def test_every_example_states_it_is_invented():
    for path in sorted((ROOT / "plants").glob("*.toml")):
        head = path.read_text(encoding="utf-8").splitlines()[:3]
        assert any("invented demo scenario" in line for line in head), path.name


def test_stage_has_near_repeated_pair_and_six_collocated_pairs():
    plant = load_plant(ROOT / "plants" / "scanning_stage.toml")
    f = plant.freqs_hz
    assert 80.0 < f.min() and f.max() < 3000.0
    labels = [m.label for m in plant.modes]
    fx, fy = f[labels.index("stage x")], f[labels.index("stage y")]
    assert 0.0 < abs(fy - fx) / fx < 0.01
    assert len(plant.pairs) == 6
    assert plant.requirements.sample_rate_hz == 20000.0


def decentralized(plant, pairs, branch_of):
    loops = tuple(
        Loop(
            pair=p,
            actuator=plant.pair(p).actuator,
            sensor=plant.pair(p).sensor,
            gain=1.0,
            branches=(branch_of(p),),
        )
        for p in pairs
    )
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=tuple(lp.actuator for lp in loops),
        sensors=tuple(lp.sensor for lp in loops),
        target_modes=plant.requirements.modes,
        loops=loops,
        pairs=tuple(pairs),
    )


def test_stage_target_reachable_by_velocity_feedback_with_stated_delay():
    # two velocity loops (x1, y1) at 200 N·s/m, with the plant's stated delay (loop_delay_s
    # plus ZOH and one sample at 20 kHz, as a Padé approximant) and the hardware roll-offs
    plant = load_plant(ROOT / "plants" / "scanning_stage.toml")
    design = decentralized(plant, ["vx1", "vy1"], lambda p: Branch(200.0))
    modes = closed_loop_modes(plant, design)
    assert modes.stable
    targets = np.array(plant.requirements.modes) - 1
    assert np.all(modes.damping[targets] >= plant.requirements.min_damping)


def test_truss_target_reachable_by_integral_force_feedback():
    # δ = −(g/k_s)/(s + ε) · F on each strut (integral force feedback, Preumont 2011, from
    # memory), g = 3000 rad/s, ε = 2π·2 rad/s leak, with the stated delay and roll-offs
    plant = load_plant(ROOT / "plants" / "light_truss.toml")
    pairs = [p.name for p in plant.pairs]

    def branch(p):
        k_s = plant.actuator(plant.pair(p).actuator).stiffness_n_per_m
        return Branch(-3000.0 / k_s, sections=(Section((1.0,), (1.0, 2 * np.pi * 2.0)),))

    modes = closed_loop_modes(plant, decentralized(plant, pairs, branch))
    assert modes.stable
    targets = np.array(plant.requirements.modes) - 1
    assert np.all(modes.damping[targets] >= plant.requirements.min_damping)
