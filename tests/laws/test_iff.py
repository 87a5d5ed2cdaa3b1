"""Integral force feedback against Preumont's closed forms (Preumont, Dufour & Malekian, J.
Guidance, Control, and Dynamics 15(2), 1992)."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from lawplants import strut_chain, strut_plant

from dampctl.analysis.closedloop import closed_loop_matrix, closed_loop_modes, effective_controller
from dampctl.errors import DesignRefused
from dampctl.laws import iff


def _one_mode(omega, zero):
    # One mass m = 1 on a flexure kp = z² in parallel with a strut ka = ω² − z²: the IFF loop is
    # exactly Preumont's single-mode model 1 + g (s² + z²)/(s (s² + ω²)) = 0.
    return strut_chain([1.0], [zero**2], omega**2 - zero**2, 0)


@pytest.mark.parametrize(("omega", "zero"), [(1.0, 0.9), (1.0, 0.5), (1.0, 0.99)])
def test_single_mode_maximum_damping(omega, zero):
    # Preumont, Dufour & Malekian, J. Guidance Control Dyn. 15(2) 1992 / Preumont, Vibration
    # Control of Active Structures, 3rd ed. 2011 (from memory): ξ_max = (ω − z)/(2z) at
    # g = ω √(ω/z); exact for the single-mode model (checked numerically).
    plant = _one_mode(omega, zero)
    xi_max = (omega - zero) / (2 * zero)
    g_opt = omega * np.sqrt(omega / zero)
    (entry,) = iff.achievable_damping(plant, ["iff"])
    assert entry["max_damping"] == pytest.approx(xi_max, rel=1e-9)
    assert entry["optimal_gain"] == pytest.approx(g_opt, rel=1e-9)
    at_opt = iff.design(plant, ["iff"], gain=g_opt, leak_hz=0.0)
    assert closed_loop_modes(plant, at_opt).damping[0] == pytest.approx(xi_max, rel=1e-7)
    tuned = iff.design(plant, ["iff"], leak_hz=0.0)
    assert tuned.info["min_damping"] == pytest.approx(xi_max, rel=2e-3)
    assert tuned.info["min_damping"] <= xi_max * (1 + 1e-9)


def test_two_dof_example():
    # 2-DOF example (Preumont's set-up, dimensionless): poles 0.658642,
    # 1.663187; zeros 0.618034, 1.618034; formula ξ_max 0.032853 / 0.013953 at g 0.67994 /
    # 1.68623; exact maxima 0.032879 / 0.013964; closed-loop eigenvalues at g = 0.7.
    plant = strut_plant()
    np.testing.assert_allclose(plant.omegas, [0.658642, 1.663187], rtol=1e-6)
    achievable = iff.achievable_damping(plant, ["iff1"])
    np.testing.assert_allclose(
        [a["zero_hz"] * 2 * np.pi for a in achievable], [0.618034, 1.618034], rtol=1e-6
    )
    np.testing.assert_allclose(
        [a["max_damping"] for a in achievable], [0.032853, 0.013953], rtol=1e-4
    )
    np.testing.assert_allclose(
        [a["optimal_gain"] for a in achievable], [0.67994, 1.68623], rtol=1e-4
    )
    design = iff.design(plant, ["iff1"], gain=0.7, leak_hz=0.0)
    mats = plant.statespace_matrices(design.actuators, design.sensors)
    poles = np.linalg.eigvals(closed_loop_matrix(mats, effective_controller(plant, design)))
    expected = [-0.016407 + 1.656364j, -0.020987 + 0.638446j, -0.625211]
    for pole in expected:
        assert np.min(np.abs(poles - pole)) < 2e-6
    for mode, exact in ((1, 0.032879), (2, 0.013964)):
        tuned = iff.design(plant, ["iff1"], modes=[mode], leak_hz=0.0)
        assert tuned.info["min_damping"] == pytest.approx(exact, rel=2e-3)
        (entry,) = tuned.info["achievable"]
        assert entry["max_damping"] == pytest.approx(exact, rel=2e-3)  # formula vs exact


def test_negative_controller_sign_is_the_one_that_damps():
    # δ = +g F/(k_s s) (Preumont) is u = −K y with K = −g/(k_s s): the branch gain must be
    # negative. Flipping it (K = +g/(k_s s)) makes the loop unstable.
    plant = strut_plant(damping=0.001)
    design = iff.design(plant, ["iff1"], gain=0.7, leak_hz=0.0)
    branch = design.loops[0].branches[0]
    assert branch.gain == pytest.approx(-0.7 / 0.2)
    assert closed_loop_modes(plant, design).stable
    flipped = iff.design(plant, ["iff1"], gain=-0.7, leak_hz=0.0)
    assert not closed_loop_modes(plant, flipped).stable


def test_leak_default_and_cost():
    plant = strut_plant()
    design = iff.design(plant, ["iff1"], modes=[1])
    assert design.info["leak_hz"] == pytest.approx(iff.DEFAULT_LEAK_FRACTION * plant.freqs_hz[0])
    (section,) = design.loops[0].branches[0].sections
    assert section.den == (1.0, pytest.approx(2 * np.pi * design.info["leak_hz"]))
    pure = iff.design(plant, ["iff1"], modes=[1], leak_hz=0.0)
    # the leak trades a little damping: below the pure integrator's, above half of it
    assert 0.5 * pure.info["min_damping"] < design.info["min_damping"] < pure.info["min_damping"]


@given(
    masses=st.lists(st.floats(0.3, 3.0), min_size=1, max_size=3),
    springs=st.lists(st.floats(0.3, 3.0), min_size=3, max_size=3),
    strut=st.floats(0.05, 2.0),
    where=st.integers(0, 2),
    log_gain=st.floats(-3.0, 3.0),
    leak=st.sampled_from([0.0, 0.01, 0.1]),
)
def test_ideal_iff_stable_for_any_positive_gain(masses, springs, strut, where, log_gain, leak):
    # IFF with a collocated force sensor is unconditionally stable (Preumont et al. 2008,
    # Computers & Structures 86, abstract: "guaranteed stability") — pure and leaky integrator.
    plant = strut_chain(masses, springs[: len(masses)], strut, where % len(masses), damping=0.0)
    design = iff.design(plant, ["iff"], gain=10.0**log_gain, leak_hz=leak, delay_s=0.0)
    modes = closed_loop_modes(plant, design, delay_s=0.0)
    assert modes.max_real_part < 1e-9 * np.max(plant.omegas)
    # damping of every mode is at least its open-loop damping (0 here)
    assert np.all(modes.damping >= -1e-9)


@given(
    masses=st.lists(st.floats(0.3, 3.0), min_size=2, max_size=3),
    springs=st.lists(st.floats(0.3, 3.0), min_size=3, max_size=3),
    damping=st.floats(0.001, 0.05),
)
def test_small_gain_never_lowers_modal_damping(masses, springs, damping):
    plant = strut_chain(masses, springs[: len(masses)], 0.5, 0, damping=damping)
    design = iff.design(plant, ["iff"], gain=1e-4, leak_hz=0.0, delay_s=0.0)
    modes = closed_loop_modes(plant, design, delay_s=0.0)
    assert np.all(modes.damping >= plant.dampings - 1e-12)


def test_refuses_pairs_without_a_force_sensor_and_non_collocated():
    plant = strut_plant()
    with pytest.raises(DesignRefused, match="strut with its own force sensor"):
        iff.design(plant, ["dvf1"])
    with pytest.raises(DesignRefused, match="force/velocity"):
        iff.design(plant, ["fv2"])
    with pytest.raises(DesignRefused, match="strut with its own force sensor"):
        iff.design(plant, ["cross"])
    two = strut_plant(second=0.3)
    with pytest.raises(DesignRefused, match=r"not collocated.*--law lqg"):
        iff.design(two, ["mixed"])


@pytest.mark.parametrize("count", [1, 2])
def test_gains_for_the_number_of_struts(count):
    # Preumont's equal-gain result with several struts uses the zeros of the structure with
    # all of them removed: removing both struts of the two-strut plant (kp = 1, k2 = 1)
    # leaves the zeros of [[2, −1], [−1, 1]] (golden-ratio values 0.618034, 1.618034).
    plant = strut_plant(second=0.3, damping=0.001)
    pairs = ["iff1", "iff2"][:count]
    design = iff.design(plant, pairs, leak_hz=0.0)
    assert len(design.loops) == count and design.info["stable"]
    zeros = [a["zero_hz"] * 2 * np.pi for a in design.info["achievable"]]
    if count == 2:
        np.testing.assert_allclose(zeros, [0.618034, 1.618034], rtol=1e-3)
        one = iff.design(plant, ["iff1"], leak_hz=0.0)
        assert design.info["min_damping"] > one.info["min_damping"]


def test_target_damping_takes_the_smallest_gain():
    plant = strut_plant(damping=0.002)
    design = iff.design(plant, ["iff1"], modes=[1], target_damping=0.02, leak_hz=0.0)
    assert design.info["target_met"] is True
    assert design.info["min_damping"] == pytest.approx(0.02, rel=5e-3)
    too_much = iff.design(plant, ["iff1"], modes=[1], target_damping=0.2, leak_hz=0.0)
    assert too_much.info["target_met"] is False
    assert any("not reached" in w for w in too_much.info["warnings"])


@pytest.mark.parametrize(
    ("leak_hz", "words"),
    [(None, "the default"), (0.0, "pure integrator"), (2.5, "2.5 Hz as given")],
)
def test_leak_rule_states_the_leak_actually_used(leak_hz, words):
    # the design's branch holds the leak corner (den s + w_c); the rule names the same number
    plant = strut_plant()
    design = iff.design(plant, ["iff1"], leak_hz=leak_hz, target_damping=None)
    info = design.info
    corner_hz = design.loops[0].branches[0].sections[0].den[1] / (2 * np.pi)
    assert info["leak_hz"] == pytest.approx(corner_hz)
    assert words in info["leak_rule"]
    if leak_hz is None:
        assert f"{corner_hz:.4g} Hz" in info["leak_rule"]
