"""A move with passive parts: exact step responses against dampctl's sampled open loop (modal
ZOH) and against scipy's LTI simulation of a lumped model built by hand."""

import numpy as np
import pytest
from scipy import signal

from dampctl.design import Design
from dampctl.discrete.passive_move import simulate_passive_move, step_responses
from dampctl.discrete.simulate import simulate_move
from dampctl.errors import UsageError
from dampctl.laws.shapers import shaper_for_mode
from dampctl.model.components import Actuator, Mode, Output, Requirements
from dampctl.model.passive import Absorber
from dampctl.model.plant import ModalPlant

M, K, CP = 2.0, 8.0e4, 8.0
ABSORBER = Absorber(1, "x", 0.1, 30.0, 0.12)


def plant(bandwidth_hz=None):
    return ModalPlant(
        modes=[Mode(np.sqrt(K / M) / (2 * np.pi), CP / (2 * np.sqrt(K * M)), modal_mass_kg=M)],
        sites={"x": [1.0]},
        actuators=[Actuator("push", "force", site="x", bandwidth_hz=bandwidth_hz)],
        outputs=[Output("xo", "displacement", site="x")],
        requirements=Requirements(sample_rate_hz=2000.0),
    )


def tmd(p):
    return Design(law="tmd", plant_fingerprint=p.fingerprint, actuators=(), sensors=(),
                  target_modes=(1,), parts=(ABSORBER,))


def lumped(force_lag_rad_s=None):
    """[x, x_a, v, v_a] of the primary with its absorber; output x (scipy LTI)."""
    m, k, c = ABSORBER.mass_kg, ABSORBER.stiffness_n_per_m, ABSORBER.damping_n_s_per_m
    Mm = np.diag([M, m])
    Km = np.array([[K + k, -k], [-k, k]])
    Cm = np.array([[CP + c, -c], [-c, c]])
    A = np.block([[np.zeros((2, 2)), np.eye(2)],
                  [-np.linalg.solve(Mm, Km), -np.linalg.solve(Mm, Cm)]])
    B = np.concatenate([np.zeros(2), np.linalg.solve(Mm, [1.0, 0.0])])[:, None]
    C = np.array([[1.0, 0.0, 0.0, 0.0]])
    if force_lag_rad_s is not None:  # force = lag of the command: one more state
        w = force_lag_rad_s
        A = np.block([[np.array([[-w]]), np.zeros((1, 4))], [B * 1.0, A]])
        B = np.concatenate([[w], np.zeros(4)])[:, None]
        C = np.hstack([[[0.0]], C])
    return signal.StateSpace(A, B, C, np.zeros((1, 1)))


def test_open_loop_matches_the_sampled_modal_simulation():
    p = plant(bandwidth_hz=300.0)
    mine = simulate_passive_move(p, tmd(p), drive="push", output="xo", distance_m=1e-6,
                                 duration_s=0.3)
    theirs = simulate_move(p, None, drive="push", output="xo", distance_m=1e-6, duration_s=0.3)
    a, b = mine.open_loop.output("xo"), theirs.result.output("xo")
    assert np.max(np.abs(a.values - b.values)) <= 1e-9 * 1e-6
    assert a.settling_time_s == b.settling_time_s and a.overshoot == pytest.approx(b.overshoot)
    assert mine.open_loop.actuator("push").stroke_m == pytest.approx(
        theirs.result.actuator("push").stroke_m, rel=1e-9
    )


@pytest.mark.parametrize("lag_hz", [None, 300.0])
def test_with_the_absorber_matches_a_lumped_model(lag_hz):
    p = plant(bandwidth_hz=lag_hz)
    r = simulate_passive_move(p, tmd(p), drive="push", output="xo", distance_m=1e-6,
                              duration_s=2.0)
    force = 1e-6 * K  # static input for 1 µm
    _, y = signal.step(lumped(None if lag_hz is None else 2 * np.pi * lag_hz), T=r.time_s)
    assert np.max(np.abs(r.result.output("xo").values - force * y)) <= 1e-9 * 1e-6
    assert r.result.output("xo").target == pytest.approx(1e-6, rel=1e-12)
    assert r.result.output("xo").settling_time_s is not None
    assert r.open_loop.output("xo").settling_time_s is None  # ζ = 0.014 rings past 2 s


def test_shaped_step_between_samples():
    # a ZV shaper whose second impulse falls between samples: superposition of two steps, the
    # second exact at its own time (scipy lsim on a grid holding that time)
    p = plant()
    shaper = shaper_for_mode(p.freqs_hz[0], p.dampings[0], "zv")
    r = simulate_passive_move(p, tmd(p), drive="push", output="xo", distance_m=1e-6,
                              shaper=shaper, duration_s=0.1)
    t2 = float(shaper.times_s[1])
    assert abs(t2 * 2000.0 - round(t2 * 2000.0)) > 1e-3  # really between samples
    # the step response in closed form from the eigenvalues: y(τ) = C V (e^{Λτ} − 1)/Λ V⁻¹ B
    sys = lumped()
    lam, V = np.linalg.eig(sys.A)
    weights = (sys.C @ V)[0] * np.linalg.solve(V, sys.B)[:, 0]

    def step(tau):
        tau = np.maximum(tau, 0.0)
        return np.real(((np.exp(np.outer(tau, lam)) - 1.0) / lam) @ weights)

    a0, a1 = shaper.amplitudes
    expected = 1e-6 * K * (a0 * step(r.time_s) + a1 * np.where(r.time_s >= t2,
                                                                 step(r.time_s - t2), 0.0))
    assert np.max(np.abs(r.result.output("xo").values - expected)) <= 1e-9 * 1e-6


def test_step_responses_sums_steps():
    A, B, C, D = np.array([[-2.0]]), np.array([[2.0]]), np.array([[1.0]]), np.zeros((1, 1))
    t = np.linspace(0.0, 3.0, 31)
    y = step_responses((A, B, C, D), t, np.array([0.0, 1.05]), np.array([1.0, -1.0]))[:, 0]
    expected = (1 - np.exp(-2 * t)) - np.where(t >= 1.05, 1 - np.exp(-2 * (t - 1.05)), 0.0)
    assert np.allclose(y, expected, atol=1e-13)


def test_refuses_an_active_design():
    p = plant()
    from dampctl.design import Branch, Loop

    active = Design(law="dvf", plant_fingerprint=p.fingerprint, actuators=("push",),
                    sensors=("push",), target_modes=(1,),
                    loops=(Loop("l", "push", "push", 1.0, (Branch(1.0),)),))
    with pytest.raises(UsageError, match="passive design"):
        simulate_passive_move(p, active, drive="push", output="xo", distance_m=1e-6)
