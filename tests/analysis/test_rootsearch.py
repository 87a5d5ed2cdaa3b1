"""All closed-loop poles by Aberth iteration: against numpy's dense eigenvalues of the
closed-loop matrix (LAPACK computing the same poles another way)."""

import numpy as np
import pytest
from repo import ROOT
from scipy.optimize import linear_sum_assignment

from dampctl.analysis.closedloop import (
    closed_loop_matrix,
    closed_loop_modes,
    effective_controller,
    match_modes,
    open_loop_poles,
)
from dampctl.analysis.loopcontroller import LoopController
from dampctl.analysis.loopresponse import ModalChannels
from dampctl.analysis.rootsearch import (
    ABERTH,
    DENSE,
    closed_loop_roots,
    loop_roots,
    match_to_modes,
)
from dampctl.laws import dvf, iff, lqg, ppf
from dampctl.model.components import Actuator, Mode, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.model.plantfile import load_plant
from dampctl.testing import chain_plant


def same_roots(a, b, rtol):
    """Largest relative distance between two root sets paired by minimum total distance."""
    a, b = np.asarray(a), np.asarray(b)
    assert a.size == b.size
    rows, cols = linear_sum_assignment(np.abs(a[:, None] - b[None, :]))
    return float(np.max(np.abs(a[rows] - b[cols]) / np.maximum(np.abs(b[cols]), 1.0))) <= rtol


def dense_poles(plant, design):
    mats = plant.statespace_matrices(design.actuators, design.sensors)
    return np.linalg.eigvals(closed_loop_matrix(mats, effective_controller(plant, design)))


@pytest.fixture(scope="module")
def stage():
    return load_plant(ROOT / "plants" / "scanning_stage.toml")


@pytest.fixture(scope="module")
def long_chain():
    # 200 masses: 400 plant states, with a delay (Padé sections) and hardware roll-offs
    plant = chain_plant([1.0] * 200, [1e6] * 200, damping=0.004)
    return ModalPlant(
        modes=plant.modes,
        sites=plant.sites,
        actuators=[
            Actuator(a.name, "force", site=a.site, bandwidth_hz=3000.0) for a in plant.actuators
        ],
        sensors=plant.sensors,
        pairs=plant.pairs,
        requirements=Requirements(loop_delay_s=1e-4, sample_rate_hz=8000.0),
        title="long chain",
    )


def designs(stage):
    truss = load_plant(ROOT / "plants" / "light_truss.toml")
    return {
        "dvf": (stage, dvf.design(stage, ["vx1", "vy2"], gain=80.0)),
        "iff": (truss, iff.design(truss, ["iff_1", "iff_2", "iff_3"], gain=400.0)),
        "ppf": (stage, ppf.design(stage, ["dx1", "dy1"], gain=0.3)),
        "lqg": (stage, lqg.design(stage, ["coil_x1", "coil_y1"], ["vel_x1", "vel_y1"])),
    }


@pytest.mark.parametrize("law", ["dvf", "iff", "ppf", "lqg"])
def test_aberth_finds_every_pole_of_each_law(stage, law):
    plant, design = designs(stage)[law]
    loop = LoopController.for_design(plant, design)
    roots = loop_roots(plant, design.actuators, design.sensors, loop, method="aberth")
    assert roots.method == ABERTH and roots.complete
    # PPF's equal-damping rule makes coalesced (double) poles: both methods know them only
    # to about sqrt(eps)
    assert same_roots(roots.poles, dense_poles(plant, design), 1e-6 if law == "ppf" else 1e-9)


def test_aberth_on_a_long_chain_with_delay_and_roll_off(long_chain):
    design = dvf.design(long_chain, ["p1", "p40", "p80", "p200"], gain=[300, 500, 500, 800])
    loop = LoopController.for_design(long_chain, design)
    channels = ModalChannels.from_plant(long_chain, design.actuators, design.sensors)
    roots = closed_loop_roots(channels, loop)
    assert roots.complete and roots.method == ABERTH
    dense = dense_poles(long_chain, design)
    # the roll-off and delay roots come in near-equal groups (four equal channels), which
    # both methods know only to ~1e-8; the modes' poles agree to rounding
    assert same_roots(roots.poles, dense, 1e-6)
    assert roots.stable == bool(np.max(dense.real) < 0)
    lam = open_loop_poles(long_chain.omegas, long_chain.dampings)
    ours, reference = match_modes(lam, roots.poles), match_modes(lam, dense)
    assert np.max(np.abs(ours.poles - reference.poles) / np.abs(reference.poles)) < 1e-11
    assert np.max(np.abs(ours.damping - reference.damping)) < 1e-11


def test_closed_loop_modes_uses_the_iteration_on_large_loops(long_chain):
    design = dvf.design(long_chain, ["p3", "p150"], gain=400.0)
    matched = closed_loop_modes(long_chain, design)
    lam = open_loop_poles(long_chain.omegas, long_chain.dampings)
    reference = match_modes(lam, dense_poles(long_chain, design))
    assert np.allclose(matched.damping, reference.damping, rtol=0, atol=1e-10)
    assert matched.stable == reference.stable
    roots = loop_roots(
        long_chain, design.actuators, design.sensors, LoopController.for_design(long_chain, design)
    )
    assert roots.method == ABERTH


def test_small_loops_use_the_dense_eigenproblem(stage):
    design = dvf.design(stage, ["vx1"], gain=50.0)
    roots = loop_roots(
        stage, design.actuators, design.sensors, LoopController.for_design(stage, design)
    )
    assert roots.method == DENSE


def test_modes_the_loops_do_not_see_keep_their_poles():
    # mode 2 has no shape at the pair's site: no loop can move it
    modes = [Mode(10.0, 0.01), Mode(25.0, 0.02), Mode(40.0, 0.01)]
    plant = ModalPlant(
        modes=modes,
        sites={"a": [1.0, 0.0, 0.7]},
        actuators=[Actuator("f", "force", site="a")],
        sensors=[Sensor("v", "velocity", site="a")],
        pairs=[Pair("p", "f", "v")],
    )
    design = dvf.design(plant, ["p"], gain=5.0, modes=[1, 3])
    channels = ModalChannels.from_plant(plant, ["f"], ["v"])
    roots = closed_loop_roots(channels, effective_controller(plant, design))
    lam2 = open_loop_poles(plant.omegas, plant.dampings)[1]
    assert np.min(np.abs(roots.poles - lam2)) == 0.0
    assert same_roots(roots.poles, dense_poles(plant, design), 1e-10)


def test_quick_matching_equals_the_assignment(long_chain):
    lam = open_loop_poles(long_chain.omegas, long_chain.dampings)
    design = dvf.design(long_chain, ["p1", "p90"], gain=900.0)
    poles = dense_poles(long_chain, design)
    quick, full = match_to_modes(lam, poles), match_modes(lam, poles)
    assert np.array_equal(quick.poles, full.poles)
    assert np.array_equal(np.sort_complex(quick.other_poles), np.sort_complex(full.other_poles))
    # two modes that claim the same pole go to the assignment solver
    crowded = np.array([-1.0 + 10j, -1.0 + 10.01j])
    assert np.array_equal(
        match_to_modes(crowded, [-1 + 10.005j, -5 + 30j]).poles,
        match_modes(crowded, [-1 + 10.005j, -5 + 30j]).poles,
    )
