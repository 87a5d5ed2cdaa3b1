"""Positive position feedback: static stability and the equal-damping rule (Fanson & Caughey
1990)."""

import numpy as np
import pytest
from lawplants import strut_plant

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.errors import DesignRefused
from dampctl.laws import ppf
from dampctl.testing import chain_plant, sdof_plant

W = 2 * np.pi * 100.0


def _mode(damping):
    return sdof_plant(1.0, W**2, 2 * damping * W)  # unit modal mass, ω = 2π·100 rad/s


def test_reference_stability_check():
    # computed: ω = 2π·100, ζ = 0.01, ζ_f = 0.196116, ω_f = 1.019804 ω:
    # max Re(λ) = −18.03 (g = 0.99), 0.0 (g = 1.00), +14.00 (g = 1.01).
    plant = _mode(0.01)
    for g, expected in ((0.99, -18.03), (1.01, 14.00)):
        design = ppf.design(plant, ["fx"], gain=g, target_damping=0.1, delay_s=0.0)
        (entry,) = design.info["filters"]
        assert entry["freq_hz"] * 2 * np.pi / W == pytest.approx(1.019804, rel=1e-6)
        assert entry["damping"] == pytest.approx(0.196116, rel=1e-5)
        assert closed_loop_modes(plant, design).max_real_part == pytest.approx(expected, abs=0.01)


@pytest.mark.parametrize("damping", [0.0, 0.01, 0.3])
@pytest.mark.parametrize("rule", [0.05, 0.2, 0.45])
def test_single_loop_stable_below_one_unstable_above(damping, rule):
    # Routh–Hurwitz on (s² + 2ζωs + ω²)(s² + 2ζ_f ω_f s + ω_f²) − g ω² ω_f²: only the constant
    # term ω²ω_f²(1 − g) changes sign (Routh–Hurwitz; Fanson & Caughey 1990, from
    # memory), for any damping and filter.
    plant = _mode(damping)
    below = ppf.design(plant, ["fx"], gain=0.999, target_damping=rule, delay_s=0.0)
    above = ppf.design(plant, ["fx"], gain=1.001, target_damping=rule, delay_s=0.0)
    assert closed_loop_modes(plant, below).stable
    assert below.info["dc_loop_gain"] == pytest.approx(0.999)
    assert not closed_loop_modes(plant, above).stable
    assert above.info["static_stability"] is False and above.info["stable"] is False
    assert any("UNSTABLE" in w for w in above.info["warnings"])


@pytest.mark.parametrize(
    ("zeta_c", "ratio", "zeta_f", "g"),
    [
        (0.05, 1.004988, 0.099504, 0.009901),
        (0.10, 1.019804, 0.196116, 0.038462),
        (0.20, 1.077033, 0.371391, 0.137931),
    ],
)
def test_equal_damping_rule_table(zeta_c, ratio, zeta_f, g):
    # equal-damping rule [derived for dampctl by matching to (s² + 2ζ_c ω s + ω²)²]: on an undamped
    # mode all four closed-loop poles have damping ζ_c (repeated: compare sorted values).
    w_f, z_f, gain = ppf.equal_damping_rule(W, zeta_c)
    assert (w_f / W, z_f, gain) == pytest.approx((ratio, zeta_f, g), rel=2e-5)
    assert ppf.rule_damping(gain) == pytest.approx(zeta_c, rel=1e-12)
    plant = _mode(0.0)
    design = ppf.design(plant, ["fx"], target_damping=zeta_c, delay_s=0.0)
    assert design.info["rule_damping"] == pytest.approx(zeta_c, rel=1e-9)
    assert design.loops[0].gain == pytest.approx(g, rel=2e-5)
    modes = closed_loop_modes(plant, design)
    poles = np.concatenate([modes.poles, modes.other_poles])
    damping = -poles.real / np.abs(poles)
    np.testing.assert_allclose(np.sort(damping), [zeta_c, zeta_c], atol=1e-6)
    np.testing.assert_allclose(np.abs(poles), [W, W], rtol=1e-6)


def test_rule_with_structural_damping():
    # computed: ζ = 0.01 with the ζ_c = 0.1 settings → ζ = 0.10185 and 0.10825 at
    # 1.0317 ω and 0.9693 ω.
    plant = _mode(0.01)
    design = ppf.design(
        plant, ["fx"], gain=ppf.equal_damping_rule(W, 0.1)[2], target_damping=0.1, delay_s=0.0
    )
    modes = closed_loop_modes(plant, design)
    poles = np.concatenate([modes.poles, modes.other_poles])
    order = np.argsort(np.abs(poles))
    np.testing.assert_allclose(np.abs(poles)[order] / W, [0.9693, 1.0317], atol=1e-4)
    np.testing.assert_allclose((-poles.real / np.abs(poles))[order], [0.10825, 0.10185], atol=1e-5)


def test_general_dc_condition_is_the_stability_boundary():
    # Negative-imaginary theory (Lanzon & Petersen 2008; Moheimani, Vautier & Bhikkaji 2006;
    # from memory): two PPF loops are stable iff λ_max(G(0) K(0)) < 1. Checked against the
    # full closed-loop eigenvalues on both sides of the boundary.
    plant = chain_plant([1.0, 0.5, 2.0], [1e4, 2e4, 1.5e4], damping=0.01)
    probe = ppf.design(plant, ["q1", "q3"], modes=[1, 2], gain=0.1, target_damping=0.1, delay_s=0.0)
    limit = 0.1 / probe.info["dc_loop_gain"]  # λ is linear in the gain
    for factor, stable in ((0.999, True), (1.001, False)):
        design = ppf.design(
            plant, ["q1", "q3"], modes=[1, 2], gain=factor * limit, target_damping=0.1, delay_s=0.0
        )
        assert design.info["dc_loop_gain"] == pytest.approx(factor, rel=1e-9)
        assert closed_loop_modes(plant, design).stable is stable


def test_target_breaking_the_static_condition_is_refused():
    plant = chain_plant([1.0] * 4, [1e4] * 4, damping=0.01)
    with pytest.raises(DesignRefused, match=r"static stability condition.*>= 1"):
        ppf.design(plant, ["q1"], target_damping=0.45)


@pytest.mark.parametrize("count", [1, 2, 4])
def test_tuning_for_the_number_of_pairs(count):
    plant = chain_plant([1.0] * 4, [1e4] * 4, damping=0.005)
    pairs = ["q1", "q2", "q3", "q4"][:count]
    design = ppf.design(plant, pairs, modes=[1, 2], delay_s=0.0)
    assert len(design.loops) == count
    assert design.info["stable"] and design.info["static_stability"]
    assert design.info["dc_loop_gain"] < 1.0
    # one filter per target mode the pair sees (mass 3 is a node of mode 2)
    expected = {"q1": 2, "q2": 2, "q3": 1, "q4": 2}
    assert [len(lp.branches) for lp in design.loops] == [expected[p] for p in pairs]
    assert all(b.gain < 0 for lp in design.loops for b in lp.branches)  # positive feedback
    assert design.info["min_damping"] > 0.05
    target = ppf.design(plant, pairs, modes=[1, 2], target_damping=0.08, delay_s=0.0)
    assert target.info["target_met"] is True
    assert target.info["min_damping"] >= 0.08 * (1 - 1e-6)


def test_strain_sensor_on_a_strut_and_refusals():
    plant = strut_plant(damping=0.005)
    design = ppf.design(plant, ["ppf1"], modes=[1])
    assert design.info["stable"] and design.info["min_damping"] > 0.01
    with pytest.raises(DesignRefused, match="--law dvf"):
        ppf.design(plant, ["dvf1"])
    with pytest.raises(DesignRefused, match="--law iff"):
        ppf.design(plant, ["iff1"])
    two = chain_plant([1.0, 1.0], [1e4, 1e4])
    noncollocated = type(two)(
        modes=two.modes,
        sites=two.sites,
        actuators=two.actuators,
        sensors=two.sensors,
        pairs=[*two.pairs, type(two.pairs[0])("x", "f1", "x2")],
    )
    with pytest.raises(DesignRefused, match="--law lqg"):
        ppf.design(noncollocated, ["x"])


def test_filter_gain_carries_its_unit():
    design = ppf.design(sdof_plant(1.0, W**2, 2 * 0.01 * W), ["fx"], target_damping=0.05)
    # force actuator on a displacement sensor: k in N per m
    assert [f["gain_unit"] for f in design.info["filters"]] == ["N/m"]
