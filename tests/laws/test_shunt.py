"""Piezoelectric shunts against Hagood & von Flotow's model (N. W. Hagood & A. von Flotow,
J. Sound Vib. 146(2), 1991; from memory), the closed forms derived in dampctl.laws.shunt by Den
Hartog's fixed points, and brute-force optima on a coupled electromechanical state space written
here by hand (mechanical mode q, q' plus the network's charge Q, Q')."""

import numpy as np
import pytest
from scipy.optimize import minimize, minimize_scalar

from dampctl.errors import DesignRefused, UsageError
from dampctl.laws import shunt
from dampctl.model.components import Actuator, Disturbance, Mode, Output, Pair, Sensor
from dampctl.model.plant import ModalPlant

M, W = 1.5, 2 * np.pi * 80.0  # one mode: 1.5 kg at 80 Hz with the strut short-circuited


def plant_with_strut(coupling=0.3, share=0.3, cap=1.2e-6, damping=0.0):
    """A mass on a flexure in parallel with a piezo strut (short-circuit stiffness = share of
    the total), strut from ground to the mass."""
    ks = share * M * W**2
    return ModalPlant(
        modes=[Mode(W / (2 * np.pi), damping, modal_mass_kg=M)],
        sites={"x": [1.0], "g": [0.0]},
        actuators=[Actuator("pz", "strut", between=("g", "x"), stiffness_n_per_m=ks,
                            capacitance_f=cap, coupling_k=coupling),
                   Actuator("f", "force", site="x")],
        sensors=[Sensor("F", "force", actuator="pz"), Sensor("v", "velocity", site="x")],
        pairs=[Pair("p", "pz", "F"), Pair("fv", "f", "v")],
        outputs=[Output("xo", "displacement", site="x")],
        disturbances=[Disturbance("push", "x", 1.0)],
    )


def constants(plant):
    strut = plant.actuator("pz")
    k, C, ks = strut.coupling_k, strut.capacitance_f, strut.stiffness_n_per_m
    d = k * np.sqrt(C / ks)
    return d * ks, C * (1 - k**2)  # θ (N/V), blocked capacitance C_ε


LAM = np.linspace(0.5, 1.6, 8001)


def hand_peak(plant, R, L=None, lam=LAM):
    """Peak of |q/F|·k over ω/ω_E from the coupled state space:
    m q'' + k q − θ V = F,  V = (Q − θ q)/C_ε,  L Q'' + R Q' + V = 0 (R alone: R Q' + V = 0)."""
    theta, ce = constants(plant)
    k = M * W**2
    if L is None:
        A = np.array([[0, 1, 0], [-(k + theta**2 / ce) / M, 0, theta / (M * ce)],
                      [theta / (R * ce), 0, -1 / (R * ce)]])
        B = np.array([0, 1 / M, 0])
    else:
        A = np.array([[0, 1, 0, 0], [-(k + theta**2 / ce) / M, 0, theta / (M * ce), 0],
                      [0, 0, 0, 1], [theta / (L * ce), 0, -1 / (L * ce), -R / L]])
        B = np.array([0, 1 / M, 0, 0])
    # q(s)/F(s) = e₁ᵀ (sI − A)⁻¹ B by the eigen-decomposition (distinct poles)
    poles, V = np.linalg.eig(A)
    residues = V[0, :] * np.linalg.solve(V, B)
    s = 1j * W * lam
    return float(np.max(np.abs((residues[None, :] / (s[:, None] - poles[None, :])).sum(axis=1)))
                 * k)


def coupling_squared(plant):
    theta, ce = constants(plant)
    return theta**2 / (M * W**2 * ce)


@pytest.mark.parametrize("coupling", [0.3, 0.6])
def test_generalized_coupling(coupling):
    # K² = θ²/(k C_ε) = (ω_oc² − ω²)/ω², the open circuit adding θ²/C_ε = κ k_s to the stiffness
    plant = plant_with_strut(coupling)
    (K,) = shunt.generalized_coupling(plant, "pz")
    assert K**2 == pytest.approx(coupling_squared(plant), rel=1e-12)
    kappa = coupling**2 / (1 - coupling**2)
    ks = plant.actuator("pz").stiffness_n_per_m
    w_oc = np.sqrt((M * W**2 + kappa * ks) / M)
    assert K**2 == pytest.approx((w_oc**2 - W**2) / W**2, rel=1e-12)


@pytest.mark.parametrize("coupling", [0.3, 0.6])
def test_resistive_shunt_optimum(coupling):
    plant = plant_with_strut(coupling)
    K2 = coupling_squared(plant)
    _, ce = constants(plant)
    design = shunt.design(plant, ["p"], modes=[1], kind="R", refine=False)
    (part,) = design.parts
    # closed form: R C_ε ω = 1/√(1 + K²/2)
    assert part.resistance_ohm == pytest.approx(1 / (ce * W * np.sqrt(1 + K2 / 2)), rel=1e-12)
    assert part.inductance_h is None and design.info["shunts"][0]["kind"] == "R"
    # brute force on the hand-written electromechanical model
    brute = minimize_scalar(lambda x: hand_peak(plant, np.exp(x)),
                            bounds=(np.log(part.resistance_ohm) - 2, np.log(part.resistance_ohm)
                                    + 2), method="bounded", options={"xatol": 1e-8})
    assert np.exp(brute.x) == pytest.approx(part.resistance_ohm, rel=0.01)
    rule_peak = hand_peak(plant, part.resistance_ohm)
    assert rule_peak <= brute.fun * (1 + 1e-4)
    # the damping reached: one fixed point of height 2/K² (equivalent damping K²/4)
    assert rule_peak == pytest.approx(2 / K2, rel=2e-3)


@pytest.mark.parametrize("coupling", [0.3, 0.6])
def test_resistive_inductive_shunt_optimum(coupling):
    plant = plant_with_strut(coupling)
    K2 = coupling_squared(plant)
    _, ce = constants(plant)
    rule = shunt.design(plant, ["p"], modes=[1], kind="RL", refine=False)
    (part,) = rule.parts
    # closed forms: ω_e = ω √(1 + K²) (Hagood & von Flotow), R C_ε ω = K √(3/(2(1+K²)(1+K²/2)))
    assert part.inductance_h == pytest.approx(1 / (ce * W**2 * (1 + K2)), rel=1e-12)
    r = np.sqrt(K2 * 3 / (2 * (1 + K2) * (1 + K2 / 2)))
    assert part.resistance_ohm == pytest.approx(r / (ce * W), rel=1e-12)
    # brute force: Nelder–Mead on (R, L) of the hand-written model from three starts
    start = np.log([part.resistance_ohm, part.inductance_h])
    best = min(
        (minimize(lambda x: hand_peak(plant, *np.exp(x)), start + shift, method="Nelder-Mead",
                  options={"xatol": 1e-8, "fatol": 1e-10, "maxiter": 4000})
         for shift in ([0, 0], [0.3, -0.05], [-0.3, 0.05])),
        key=lambda res: res.fun,
    )
    height = np.sqrt(2) / np.sqrt(K2 * (1 + K2))  # the fixed points' height
    rule_peak = hand_peak(plant, part.resistance_ohm, part.inductance_h)
    assert height * (1 - 1e-6) <= best.fun <= rule_peak <= 1.01 * best.fun
    assert np.exp(best.x[1]) == pytest.approx(part.inductance_h, rel=0.01)
    assert np.exp(best.x[0]) == pytest.approx(part.resistance_ohm, rel=0.06)
    # the law's refinement on the full plant lands on the brute-force optimum
    refined = shunt.design(plant, ["p"], modes=[1], kind="RL")
    (tuned,) = refined.parts
    assert hand_peak(plant, tuned.resistance_ohm, tuned.inductance_h) <= 1.002 * best.fun
    assert refined.info["coupling"][0]["coupling"] == pytest.approx(np.sqrt(K2), rel=1e-12)


def test_large_inductance_caution_and_keys():
    plant = plant_with_strut(0.3, cap=1.2e-6)
    design = shunt.design(plant, ["p"], modes=[1])
    (part,) = design.parts
    assert part.inductance_h > shunt.INDUCTANCE_CAUTION_H
    assert any("synthetic inductor" in w for w in design.info["warnings"])
    assert set(design.info["shunts"][0]) == {"pair", "kind", "resistance_ohm", "inductance_h",
                                             "mode"}
    assert design.pairs == ("p",) and not design.actuators


def test_refusals():
    plant = plant_with_strut()
    with pytest.raises(DesignRefused, match="not a piezoelectric strut"):
        shunt.design(plant, ["fv"], modes=[1])
    with pytest.raises(UsageError, match="R or RL"):
        shunt.design(plant, ["p"], modes=[1], kind="L")
    with pytest.raises(UsageError, match="at least one pair"):
        shunt.design(plant, [], modes=[1])
