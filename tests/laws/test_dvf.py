"""Direct velocity feedback against closed forms (Balas, J. Guidance and Control 2(3), 1979;
Preumont 2011) and python-control."""

import control
import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st
from lawplants import cluster_plant, strut_plant

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.errors import DesignRefused, UsageError
from dampctl.laws import dvf
from dampctl.model.components import Requirements
from dampctl.testing import chain_plant, sdof_plant


def _sdof():
    return sdof_plant(2.0, 8.0e4, 8.0)  # ω_n = 200 rad/s, ζ = 0.01


def test_sdof_damping_is_zeta_plus_g_over_2m_omega():
    # Closed form m x'' + (c + g) x' + k x = 0 ⇒ ζ_cl = ζ + g/(2 m ω_n) (Rao, Mechanical
    # Vibrations, 6th ed. 2017, free damped vibration; Preumont 2011, DVF; from memory).
    plant = _sdof()
    for g in (8.0, 72.0, 300.0):
        design = dvf.design(plant, ["fv"], gain=g)
        modes = closed_loop_modes(plant, design, delay_s=0.0)
        assert modes.damping[0] == pytest.approx(0.01 + g / (2 * 2.0 * 200.0), rel=1e-12)
        assert modes.freq_hz[0] == pytest.approx(200.0 / (2 * np.pi), rel=1e-12)
    design = dvf.design(plant, ["fv"], gain=72.0)
    poles = closed_loop_modes(plant, design).poles
    np.testing.assert_allclose(poles, [-20 + 1j * np.sqrt(200.0**2 - 20.0**2)], rtol=1e-12)


def test_closed_loop_poles_agree_with_python_control_feedback():
    # Same loop computed by python-control's feedback() on its own StateSpace objects.
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    design = dvf.design(plant, ["p1", "p2"], gain=[40.0, 25.0], roll_off_hz=500.0)
    loop = control.feedback(
        plant.statespace(design.actuators, design.sensors), design.statespace(), sign=-1
    )
    ours = closed_loop_modes(plant, design, delay_s=0.0).poles
    theirs = np.linalg.eigvals(loop.A)
    for pole in ours:
        assert np.min(np.abs(theirs - pole)) < 1e-8 * abs(pole)


def test_sdof_target_tuning_inverts_the_closed_form():
    # Smallest gain reaching ζ_t: g = 2 m ω_n (ζ_t − ζ) = 72 N·s/m for ζ_t = 0.1.
    design = dvf.design(_sdof(), ["fv"], target_damping=0.1)
    assert design.loops[0].gain == pytest.approx(72.0, rel=2e-3)
    assert design.loops[0].gain >= 72.0 * (1 - 1e-9)
    assert design.info["target_met"] is True
    assert design.info["min_damping"] >= 0.1


def test_low_gain_slopes_of_two_mass_chain():
    # low-gain slopes ζ_i + g φ_i²/(2ω_i) (Preumont 2011, from memory): m1 = 1, m2 = 0.5 kg, k1 =
    # 5e5, k2 = 2e5 N/m, DVF at m1: dζ_i/dg = φ_i(1)²/(2 ω_i) = 2.7715e-4 and 3.9357e-4 per N·s/m
    # (first-order perturbation; Preumont 2011, from memory).
    plant = chain_plant([1.0, 0.5], [5e5, 2e5])
    design = dvf.design(plant, ["p1"], gain=1.0)
    damping = closed_loop_modes(plant, design).damping
    np.testing.assert_allclose(damping, [2.7715e-4, 3.9357e-4], rtol=1e-3)


def test_equal_chain_coalesces_at_zeta_half_for_gamma_two():
    # Derived closed form (derived for dampctl from the palindromic characteristic polynomial
    # σ⁴ + γσ³ + 3σ² + γσ + 1): at γ = g/√(km) = 2 both modes have ω = √(k/m), ζ = 0.5.
    m, k = 1.0, 1.0e4
    plant = chain_plant([m, m], [k, k])
    design = dvf.design(plant, ["p1"], gain=2.0 * np.sqrt(k * m))
    modes = closed_loop_modes(plant, design)
    np.testing.assert_allclose(np.sort(modes.damping), [0.5, 0.5], atol=1e-6)
    np.testing.assert_allclose(modes.freq_hz * 2 * np.pi, [100.0, 100.0], rtol=1e-6)
    # and the max-min tuning finds that gain (the optimum of the smaller damping)
    tuned = dvf.design(plant, ["p1"])
    assert tuned.info["min_damping"] == pytest.approx(0.5, abs=2e-3)
    assert tuned.loops[0].gain == pytest.approx(200.0, rel=1e-2)


@given(
    masses=st.lists(st.floats(0.2, 5.0), min_size=2, max_size=4),
    stiff=st.lists(st.floats(1e3, 1e5), min_size=4, max_size=4),
    damping=st.floats(0.0, 0.05),
    where=st.integers(0, 3),
    log_gain=st.floats(-3.0, 4.0),
)
def test_ideal_dvf_stable_for_any_positive_gain(masses, stiff, damping, where, log_gain):
    # Collocated force/velocity loops on a passive structure are stable for any g > 0
    # (Balas, "Direct velocity feedback control of large space structures", 1979; from memory).
    plant = chain_plant(masses, stiff[: len(masses)], damping=damping)
    pair = f"p{where % len(masses) + 1}"
    design = dvf.design(plant, [pair], gain=10.0**log_gain, delay_s=0.0)
    modes = closed_loop_modes(plant, design, delay_s=0.0)
    assert modes.max_real_part <= 1e-9 * np.max(plant.omegas)
    if damping > 0:
        assert modes.stable


@given(
    masses=st.lists(st.floats(0.2, 5.0), min_size=2, max_size=4),
    stiff=st.lists(st.floats(1e3, 1e5), min_size=4, max_size=4),
    damping=st.floats(0.001, 0.05),
)
def test_small_gain_never_lowers_any_modal_damping(masses, stiff, damping):
    # First-order perturbation: Δζ_i = g b_i c_i/(2 ω_i) ≥ 0 for a collocated pair.
    plant = chain_plant(masses, stiff[: len(masses)], damping=damping)
    g = 1e-4 * float(np.min(plant.omegas))
    design = dvf.design(plant, ["p1"], gain=g, delay_s=0.0)
    modes = closed_loop_modes(plant, design, delay_s=0.0)
    assert np.all(modes.damping >= plant.dampings - 1e-12)


def test_delay_gets_a_roll_off_and_tuning_keeps_the_loop_stable():
    masses, stiff = [1.0] * 6, [1.0e5] * 6
    plant = chain_plant(masses, stiff, damping=0.002)
    delay = 2.0e-3
    design = dvf.design(plant, ["p1", "p6"], modes=[1, 2], delay_s=delay)
    top = plant.freqs_hz[1]
    assert design.info["roll_off_hz"] == pytest.approx(dvf.roll_off_corner_hz(top, delay))
    assert dvf.roll_off_corner_hz(top, delay) == max(2 * top, min(5 * top, 1 / (8 * delay)))
    modes = closed_loop_modes(plant, design, delay_s=delay)
    assert modes.stable
    assert design.info["stable"] is True
    assert design.info["min_damping"] == pytest.approx(min(modes.damping[:2]), rel=1e-9)
    # modes outside the targets keep at least half their open-loop damping
    assert np.all(modes.damping[2:] >= 0.5 * plant.dampings[2:] - 1e-12)
    # the ideal max-min gains are too much for the delayed loop: tuning must account for it
    ideal = dvf.design(plant, ["p1", "p6"], modes=[1, 2], delay_s=0.0)
    assert not closed_loop_modes(plant, ideal, delay_s=delay).stable


def test_plant_requirements_give_delay_and_target():
    plant = chain_plant([1.0, 1.0], [1e4, 1e4], damping=0.01)
    plant = type(plant)(
        modes=plant.modes,
        sites=plant.sites,
        actuators=plant.actuators,
        sensors=plant.sensors,
        pairs=plant.pairs,
        requirements=Requirements(modes=(1,), min_damping=0.05, sample_rate_hz=2000.0),
    )
    design = dvf.design(plant, ["p2"])
    assert design.target_modes == (1,)
    assert design.info["delay_s"] == pytest.approx(1.5 / 2000.0)
    assert design.info["target_damping"] == 0.05
    assert design.info["target_met"] is True
    assert design.info["roll_off_hz"] is not None


def test_displacement_sensor_uses_a_band_limited_differentiator():
    plant = _sdof()
    design = dvf.design(plant, ["fx"], gain=72.0, roll_off_hz=1000.0)
    (section,) = design.loops[0].branches[0].sections
    w = 2 * np.pi * 1000.0
    assert section.num == (w, 0.0) and section.den == (1.0, w)
    # far below the corner it acts as velocity feedback: ζ ≈ 0.1 (to the corner's O(ω/ω_d))
    damping = closed_loop_modes(plant, design).damping[0]
    assert damping == pytest.approx(0.1, rel=0.05)


@pytest.mark.parametrize("count", [1, 2, 4])
def test_gains_are_chosen_for_the_number_of_pairs(count):
    plant = chain_plant([1.0] * 4, [1e4] * 4, damping=0.005)
    pairs = ["p1", "p2", "p3", "p4"][:count]
    design = dvf.design(plant, pairs, delay_s=0.0)
    assert len(design.loops) == count and design.info["pair_count"] == count
    assert design.info["stable"]
    single = dvf.design(plant, ["p1"], delay_s=0.0)
    assert design.info["min_damping"] >= single.info["min_damping"] - 1e-6


def test_fewer_pairs_than_a_cluster_needs_is_reported():
    plant = cluster_plant()
    short = dvf.design(plant, ["pc"], modes=[1, 2])
    assert short.info["cluster_shortfall"] == [{"modes": [1, 2], "pairs_needed": 2, "rank": 1}]
    assert any("cannot all be damped" in w for w in short.info["warnings"])
    damping = sorted(d["damping"] for d in short.info["closed_loop_damping"])
    assert damping[0] < 0.02 < damping[1]  # one of the two stays lightly damped
    full = dvf.design(plant, ["pa", "pb"], modes=[1, 2])
    assert full.info["cluster_shortfall"] == []
    assert full.info["min_damping"] > 0.1


def test_refuses_non_collocated_and_force_sensor_pairs():
    plant = strut_plant()
    with pytest.raises(DesignRefused, match="--law lqg"):
        dvf.design(plant, ["cross"])
    with pytest.raises(DesignRefused, match="--law iff"):
        dvf.design(plant, ["iff1"])
    nodal = type(plant)(
        modes=plant.modes,
        sites={**plant.sites, "node": [0.0, 0.0]},
        actuators=[*plant.actuators, type(plant.actuators[1])("fn", "force", site="node")],
        sensors=[*plant.sensors, type(plant.sensors[3])("vn", "velocity", site="node")],
        pairs=[*plant.pairs, type(plant.pairs[0])("pn", "fn", "vn")],
    )
    with pytest.raises(DesignRefused, match="cannot damp anything"):
        dvf.design(nodal, ["pn"])
    with pytest.raises(UsageError, match="one gain or 2 gains"):
        dvf.design(plant, ["dvf1", "fv2"], gain=[1.0, 2.0, 3.0])


def test_strut_with_relative_velocity_sensor_damps():
    plant = strut_plant(damping=0.001)
    design = dvf.design(plant, ["dvf1"])
    assert design.info["stable"] and design.info["min_damping"] > 0.01
    assert design.info["gain_units"] == ["m/(m/s)"]


@given(
    freqs=st.lists(st.floats(1.0, 1e4), min_size=1, max_size=8),
    shape=st.lists(st.floats(-2.0, 2.0), min_size=8, max_size=8),
    damping=st.floats(1e-4, 0.1),
    log_gain=st.floats(-4.0, 3.0),
)
def test_ideal_dvf_stable_on_random_modal_plants(freqs, shape, damping, log_gain):
    # Balas 1979 (from memory): any positive collocated velocity gain on a passive modal plant
    # leaves every mode stable, with damping not below its open-loop value at small gain.
    from dampctl.model.components import Actuator, Mode, Pair, Sensor
    from dampctl.model.plant import ModalPlant

    n = len(freqs)
    assume(np.any(np.abs(shape[:n]) > 1e-3))
    plant = ModalPlant(
        modes=[Mode(f, damping) for f in freqs],
        sites={"a": shape[:n]},
        actuators=[Actuator("f", "force", site="a")],
        sensors=[Sensor("v", "velocity", site="a")],
        pairs=[Pair("fv", "f", "v")],
    )
    design = dvf.design(plant, ["fv"], gain=10.0**log_gain, delay_s=0.0)
    modes = closed_loop_modes(plant, design, delay_s=0.0)
    assert modes.stable
    small = dvf.design(plant, ["fv"], gain=1e-6, delay_s=0.0)
    assert np.all(closed_loop_modes(plant, small).damping >= plant.dampings - 1e-9)


def test_target_already_met_without_control_is_said():
    design = dvf.design(_sdof(), ["fv"], target_damping=0.005)
    assert design.info["target_met"] is True
    assert any("without control" in w for w in design.info["warnings"])
