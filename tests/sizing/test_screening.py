"""Batched set evaluator against closed forms and python-control."""

import control
import numpy as np
import pytest
from sizingplants import random_plant, shape_plant

from dampctl.analysis.closedloop import match_modes, open_loop_poles
from dampctl.laws import dvf
from dampctl.sizing.screening import SetEvaluator, loop_template
from dampctl.testing import chain_plant


def _evaluator(plant, modes):
    templates = [loop_template(plant, dvf.design(plant, [p.name], modes=modes, gain=1.0))
                 for p in plant.pairs if p.sensor.startswith("v")]
    return SetEvaluator(plant, templates, modes)


def test_low_gain_slope_is_phi_squared_over_two_omega():
    # Low-authority DVF: dζ_i/dg = φ_i(a)²/(2ω_i) (Preumont, Vibration Control of Active
    # Structures, 2011, collocated control; from memory). Worked values for the chain
    # ground–5e5–1 kg–2e5–0.5 kg, DVF at m1: 2.7715e-4 and 3.9357e-4 per N·s/m.
    plant = chain_plant([1.0, 0.5], [5e5, 2e5])
    ev = _evaluator(plant, [1, 2])
    assert ev.templates[0].pair == "p1"
    np.testing.assert_allclose(ev.slopes_unit[0], [2.7715e-4, 3.9357e-4], rtol=1e-4)
    phi = plant.sites["m1"]
    np.testing.assert_allclose(ev.slopes_unit[0], phi**2 / (2 * plant.omegas), rtol=1e-9)


def test_scores_equal_python_control_feedback_and_damp():
    # The affine batched assembly must give the same closed loop as python-control's
    # feedback of the plant with K = γ κ (then damp), poles matched by assignment.
    plant = random_plant(3)
    ev = _evaluator(plant, [1, 2, 3])
    sets = np.array([[0, 2], [1, 4], [3, 5]])
    gammas = np.array([[0.01, 0.2], [0.05, 1.0], [0.3, 3.0]])
    got = ev.score(sets, gammas)
    open_poles = open_loop_poles(plant.omegas, plant.dampings)
    for s, row, values in zip(sets, gammas, got, strict=True):
        pairs = [plant.pair(ev.templates[p].pair) for p in s]
        G = plant.statespace([p.actuator for p in pairs], [p.sensor for p in pairs])
        for g, value in zip(row, values, strict=True):
            closed = control.feedback(G, g * np.diag(ev.kappa[s]))
            _wn, _z, poles = control.damp(closed, doprint=False)
            matched = match_modes(open_poles, poles)
            assert value == pytest.approx(matched.damping[:3].min(), rel=1e-8, abs=1e-12)


def test_fast_matching_agrees_with_assignment_on_near_repeated_modes():
    plant = shape_plant([10.0, 10.02, 10.05, 30.0],
                        {"a": [1.0, 0.3, 0.2, 0.5], "b": [0.2, 1.0, -0.4, 0.3]})
    ev = _evaluator(plant, [1, 2, 3])
    rng = np.random.default_rng(0)
    for gamma in rng.uniform(0.01, 2.0, 6):
        damping = ev.closed_loop([0, 1], gamma)
        A0, W = ev._assemble(np.array([[0, 1]]))
        poles = np.linalg.eigvals(A0[0] - gamma * W[0])
        reference = match_modes(ev.open_poles, poles).damping
        np.testing.assert_allclose(damping, reference, rtol=1e-12)


def test_tuned_equal_chain_reaches_coalescence_damping():
    # Equal two-mass chain, DVF at m1: both modes coalesce at ζ = 0.5 for g = 2√(km), which
    # maximizes the smallest damping (derived for dampctl from the palindromic
    # characteristic polynomial; DVF root locus, Preumont 2011).
    m, k = 1.0, 1e4
    plant = chain_plant([m, m], [k, k])
    ev = _evaluator(plant, [1, 2])
    tuned = ev.tune(np.array([[0]]), rounds=14)
    assert tuned.score[0] == pytest.approx(0.5, abs=2e-3)
    assert tuned.gamma[0] * ev.kappa[0] == pytest.approx(2 * np.sqrt(k * m), rel=2e-2)


def _with(plant, *, pairs=None, requirements=None):
    return type(plant)(
        modes=plant.modes, sites=plant.sites, actuators=plant.actuators, sensors=plant.sensors,
        pairs=plant.pairs if pairs is None else pairs,
        requirements=plant.requirements if requirements is None else requirements,
    )  # fmt: skip


@pytest.mark.parametrize("case", ["delay", "feedthrough"])
def test_loops_with_controller_states_match_closed_loop_modes(case):
    # delay: roll-off and Padé states (affine assembly); feedthrough: a displacement pair with
    # a static-gain correction (D ≠ 0) through the differentiator (D_c ≠ 0), built loop by loop
    from dampctl.analysis.closedloop import closed_loop_modes
    from dampctl.model.components import Pair, Requirements

    plant = chain_plant([1.0, 0.5, 0.8], [5e5, 2e5, 3e5], damping=0.01)
    if case == "delay":
        plant = _with(plant, requirements=Requirements(loop_delay_s=3e-4))
        names = ["p1", "p3"]
    else:
        static = float(np.sum(plant.sites["m1"] ** 2 / plant.omegas**2)) * 1.05
        plant = _with(plant, pairs=[*plant.pairs[:1], Pair("q1", "f1", "x1", static_gain=static),
                                    *plant.pairs[2:4]])  # fmt: skip
        names = ["q1", "p2"]
    templates = [
        loop_template(plant, dvf.design(plant, [n], modes=[1, 2, 3], gain=1.0)) for n in names
    ]
    ev = SetEvaluator(plant, templates, [1, 2, 3])
    assert (ev._assemble(np.array([[0, 1]])) is None) == (case == "feedthrough")
    for gamma in (0.05, 0.4):
        gains = gamma * ev.kappa
        design = dvf.design(plant, names, modes=[1, 2, 3], gain=list(gains))
        expected = closed_loop_modes(plant, design).damping
        np.testing.assert_allclose(ev.closed_loop([0, 1], gamma), expected, rtol=1e-9)
        assert ev.score(np.array([[0, 1]]), np.array([[gamma]]))[0, 0] == pytest.approx(
            expected.min(), rel=1e-9
        )
