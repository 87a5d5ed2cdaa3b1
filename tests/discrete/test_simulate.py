"""Time simulation against closed forms (SDOF step), python-control / scipy on the same sampled
system, and the Lyapunov RMS of ``assess``."""

import dataclasses
import math

import control
import numpy as np
import pytest
import scipy.linalg
import scipy.signal
from repo import PLANTS

from dampctl.analysis.assessment import assess
from dampctl.analysis.closedloop import effective_controller
from dampctl.analysis.response import closed_loop_statespace, h2_variances
from dampctl.discrete.equivalents import discretize
from dampctl.discrete.simulate import simulate_disturbance, simulate_move
from dampctl.errors import DesignError, UsageError
from dampctl.laws import dvf
from dampctl.laws.shapers import convolve, shaper_for_mode
from dampctl.model.components import (
    Actuator,
    Disturbance,
    Output,
    Pair,
    Requirements,
    Sensor,
)
from dampctl.model.plant import ModalPlant
from dampctl.testing import chain_plant, sdof_plant


# ---------------------------------------------------------------------- SDOF closed forms
def test_sdof_step_overshoot_and_first_peak():
    # m x'' + c x' + k x = F step: overshoot exp(−ζπ/√(1−ζ²)) of the static value, first peak
    # at π/ω_d (Rao, Mechanical Vibrations, 6th ed. 2017, step response; from memory). The rate
    # puts π/ω_d on a sample: 1000 samples per half damped period.
    plant = sdof_plant(2.0, 8.0e4, 8.0)  # ω_n = 200 rad/s, ζ = 0.01
    zeta, wn = 0.01, 200.0
    wd = wn * math.sqrt(1 - zeta**2)
    rate = 1000 * wd / math.pi
    sim = simulate_move(plant, drive="f", output="x", distance_m=2e-6, rate_hz=rate,
                        duration_s=0.05)
    out = sim.result.output("x")
    assert sim.result.loop == "open" and sim.open_loop is sim.result
    assert out.target == pytest.approx(2e-6, rel=1e-12)
    assert sim.setup["static_input"] == pytest.approx(2e-6 * 8.0e4, rel=1e-12)
    expected = math.exp(-zeta * math.pi / math.sqrt(1 - zeta**2))
    assert out.overshoot == pytest.approx(100 * expected, rel=1e-9)
    assert out.peak == pytest.approx(2e-6 * (1 + expected), rel=1e-9)
    k = int(np.argmax(out.values))
    assert sim.time_s[k] == pytest.approx(math.pi / wd, rel=1e-9)


def test_sdof_settling_time_within_the_envelope_bound():
    # the error envelope e^{−ζω t}/√(1−ζ²) bounds the settling time into ±δ (relative) by
    # −ln(δ √(1−ζ²))/(ζ ω_n); the true settling time is within one damped period below it.
    plant = sdof_plant(2.0, 8.0e4, 80.0)  # ζ = 0.1
    zeta, wn = 0.1, 200.0
    sim = simulate_move(plant, drive="f", output="x", distance_m=1e-6, rate_hz=20000)
    settle = sim.result.output("x").settling_time_s
    bound = -math.log(0.01 * math.sqrt(1 - zeta**2)) / (zeta * wn)
    period = 2 * math.pi / (wn * math.sqrt(1 - zeta**2))
    assert bound - period <= settle <= bound


@pytest.mark.parametrize("kind", ["zv", "zvd", "zvdd"])
def test_shaped_step_leaves_no_residual(kind):
    # a step shaped on its design frequency leaves no residual vibration (Singer & Seering,
    # ASME J. Dyn. Syst. Meas. Control 112(1), 1990): below 1e-6 of the move, although the
    # impulse times fall between samples (they are applied at their exact times)
    plant = sdof_plant(2.0, 8.0e4, 8.0)
    shaper = shaper_for_mode(plant.freqs_hz[0], plant.dampings[0], kind)
    assert shaper.times_s[1] * 7000 % 1 > 0.01  # not on the sample grid
    sim = simulate_move(plant, drive="f", output="x", distance_m=1e-6, rate_hz=7000,
                        shaper=shaper, duration_s=0.5)
    out = sim.result.output("x")
    after = out.values[sim.time_s >= shaper.duration_s] - 1e-6
    assert np.max(np.abs(after)) < 1e-6 * 1e-6
    assert out.residual_rms < 1e-12
    assert out.settling_time_s <= shaper.duration_s
    unshaped = simulate_move(plant, drive="f", output="x", distance_m=1e-6, rate_hz=7000,
                             duration_s=0.5).result.output("x")
    assert unshaped.residual_rms > 1e-7


# ---------------------------------------------------------------------- the sampled loop
def _loop_plant(delay_s=None, max_force=None):
    """Two-mass chain with an actuator lag, one lagged velocity sensor and a fractional loop
    delay (1.37 samples at 4 kHz)."""
    base = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    rate = 4000.0
    return ModalPlant(
        modes=base.modes,
        sites=base.sites,
        actuators=[Actuator("f1", "force", site="m1", bandwidth_hz=1500.0, max_force_n=max_force),
                   Actuator("f2", "force", site="m2", max_force_n=max_force)],
        sensors=[Sensor("v1", "velocity", site="m1", bandwidth_hz=2500.0, noise_density=1e-6),
                 Sensor("v2", "velocity", site="m2", noise_density=2e-6)],
        pairs=[Pair("p1", "f1", "v1"), Pair("p2", "f2", "v2")],
        outputs=[Output("tip", "displacement", site="m2")],
        disturbances=[Disturbance("push", site="m1", psd=1e-3)],
        requirements=Requirements(
            sample_rate_hz=rate,
            loop_delay_s=1.37 / rate if delay_s is None else delay_s,
        ),
    )


def _dense_loop(plant, design, theta, rate):
    """The same sampled loop built densely with generic tools: the continuous system
    [actuator lags, modes, sensor lags] from plant.statespace_matrices, its ZOH pieces by
    scipy.linalg.expm, the controller from discretize(), the delay as shift registers.

    Returns matrices (A, B, C, D) with input = planned command on each piece (R × 2) and
    output = [tip, force f1, force f2], and the pieces' step functions for a clipped run.
    """
    T = 1.0 / rate
    acts, sens = list(design.actuators), list(design.sensors)
    A, B, C, D = plant.statespace_matrices(acts, [*sens, "tip"])
    n, na = A.shape[0], 2
    w1, wv1 = 2 * np.pi * 1500.0, 2 * np.pi * 2500.0
    N = 1 + n + 1  # lag of f1, modes, lag of v1
    Ac, Bc = np.zeros((N, N)), np.zeros((N, na))
    Ac[0, 0], Bc[0, 0] = -w1, w1
    Ac[1:1 + n, 1:1 + n] = A
    Ac[1:1 + n, 0] = B[:, 0]
    Bc[1:1 + n, 1] = B[:, 1]
    Ac[-1, -1] = -wv1
    Ac[-1, 1:1 + n] = wv1 * C[0]
    Ac[-1, 0] += wv1 * D[0, 0]
    Bc[-1, 1] += wv1 * D[0, 1]
    Phi = scipy.linalg.expm(Ac * T)

    def gamma(h):
        Z = np.zeros((N + na, N + na))
        Z[:N, :N], Z[:N, N:] = Ac, Bc
        return scipy.linalg.expm(Z * h)[:N, N:]

    G = [gamma(T - t) for t in theta] + [np.zeros((N, na))]
    pieces = [G[r] - G[r + 1] for r in range(len(theta))]
    # sampled signals as rows on [xd] and on the input at t_k (f2 has no lag)
    Sy = np.zeros((2, N))
    Sy[0, -1] = 1.0  # v1 through its lag
    Sy[1, 1:1 + n] = C[1]
    Sy[1, 0] = D[1, 0]
    Uy = np.array([[0.0, 0.0], [0.0, D[1, 1]]])
    Sz = np.zeros((1, N))
    Sz[0, 1:1 + n] = C[2]
    Sz[0, 0] = D[2, 0]
    Uz = np.array([[0.0, D[2, 1]]])
    Ak, Bk, Ck, Dk = discretize(design, rate).realisation_matrices()
    return Phi, pieces, Sy, Uy, Sz, Uz, (Ak, Bk, Ck, Dk)


def _dense_run(plant, design, theta, rate, planned, limit=np.inf):
    """Step the dense loop directly (Python loop; clipping at ``limit``)."""
    Phi, pieces, Sy, Uy, Sz, Uz, (Ak, Bk, Ck, Dk) = _dense_loop(plant, design, theta, rate)
    T = 1 / rate
    delay = plant.requirements.loop_delay_s
    m = math.floor(delay / T + 1e-9)
    tau = delay - m * T
    steps = planned.shape[0]
    xd = np.zeros(Phi.shape[0])
    xc = np.zeros(Ak.shape[0])
    v = np.zeros((steps, 2))
    z, forces = np.zeros(steps), np.zeros((steps, 2))
    for k in range(steps):
        u = planned[k].copy()
        for r, start in enumerate(theta):
            j = k - m - (2 if start < tau else 1)
            if j >= 0:
                u[r] += v[j]
        u = np.clip(u, -limit, limit)
        y = Sy @ xd + Uy @ u[0]
        z[k] = (Sz @ xd + Uz @ u[0])[0]
        forces[k] = [xd[0], u[0, 1]]
        v[k] = -(Ck @ xc + Dk @ y)
        xc = Ak @ xc + Bk @ y
        xd = Phi @ xd + sum(pieces[r] @ u[r] for r in range(len(theta)))
    return z, forces


def _dense_system(plant, design, theta, rate):
    """The linear loop as one discrete state space (for control.forced_response, dlsim)."""
    Phi, pieces, Sy, Uy, Sz, Uz, (Ak, Bk, Ck, Dk) = _dense_loop(plant, design, theta, rate)
    T = 1 / rate
    delay = plant.requirements.loop_delay_s
    m = math.floor(delay / T + 1e-9)
    tau = delay - m * T
    R, N, nc, L = len(theta), Phi.shape[0], Ak.shape[0], m + 2
    size = N + nc + 2 * L  # [xd, xc, h_1 .. h_L], h_j[k] = v[k − j]
    sel = []  # u_r = p_r + H_r ξ
    for start in theta:
        j = m + (2 if start < tau else 1)
        H = np.zeros((2, size))
        H[:, N + nc + 2 * (j - 1): N + nc + 2 * j] = np.eye(2)
        sel.append(H)
    P = np.zeros((R, 2, 2 * R))  # u_r = P_r p + H_r ξ with p = [p_0, …, p_{R−1}]
    for r in range(R):
        P[r][:, 2 * r: 2 * r + 2] = np.eye(2)
    X = np.zeros((N, size))
    X[:, :N] = np.eye(N)
    Xc = np.zeros((nc, size))
    Xc[:, N:N + nc] = np.eye(nc)
    y_x = Sy @ X + Uy @ sel[0]
    y_p = Uy @ P[0]
    v_x = -Ck @ Xc - Dk @ y_x
    v_p = -Dk @ y_p
    Abig = np.zeros((size, size))
    Bbig = np.zeros((size, 2 * R))
    Abig[:N] = Phi @ X + sum(pieces[r] @ sel[r] for r in range(R))
    Bbig[:N] = sum(pieces[r] @ P[r] for r in range(R))
    Abig[N:N + nc] = Ak @ Xc + Bk @ y_x
    Bbig[N:N + nc] = Bk @ y_p
    Abig[N + nc:N + nc + 2] = v_x
    Bbig[N + nc:N + nc + 2] = v_p
    for j in range(1, L):
        Abig[N + nc + 2 * j: N + nc + 2 * j + 2] = np.eye(size)[N + nc + 2 * (j - 1):
                                                               N + nc + 2 * j]
    Cbig = Sz @ X + Uz @ sel[0]
    Dbig = Uz @ P[0]
    return Abig, Bbig, Cbig, Dbig


def _planned_step(theta, rate, steps, force, shaper):
    """Step of ``force`` on f1 shaped by ``shaper``: on each piece, the impulses already
    applied at the piece's start."""
    T = 1 / rate
    planned = np.zeros((steps, len(theta), 2))
    for k in range(steps):
        for r, start in enumerate(theta):
            t = k * T + start
            planned[k, r, 0] = force * np.sum(shaper.amplitudes[shaper.times_s <= t + 1e-12 * T])
    return planned


def test_linear_closed_loop_equals_python_control_and_dlsim():
    plant = _loop_plant()
    design = dvf.design(plant, ["p1", "p2"], gain=[30.0, 20.0], roll_off_hz=900.0)
    shaper = shaper_for_mode(plant.freqs_hz[0], 0.03, "zv")
    rate, steps = 4000.0, 600
    sim = simulate_move(plant, design, drive="f1", output="tip", distance_m=1e-6,
                        shaper=shaper, duration_s=(steps - 1) / rate, saturation=False)
    T = 1 / rate
    tau_delay = plant.requirements.loop_delay_s - T
    tau_shaper = shaper.times_s[1] - T * math.floor(shaper.times_s[1] / T)
    theta = sorted([0.0, tau_delay, tau_shaper])
    force = sim.setup["static_input"]
    planned = _planned_step(theta, rate, steps, force, shaper)
    A, B, C, D = _dense_system(plant, design, theta, rate)
    u = planned.reshape(steps, -1)
    response = control.forced_response(control.ss(A, B, C, D, T), U=u.T)
    z_pc = np.asarray(response.outputs).ravel()
    _, z_sp, _ = scipy.signal.dlsim((A, B, C, D, T), u)
    ours = sim.result.output("tip").values
    scale = np.max(np.abs(z_pc))
    assert np.max(np.abs(ours - z_pc)) < 1e-9 * scale
    assert np.max(np.abs(ours - z_sp.ravel())) < 1e-9 * scale
    # and the direct dense loop gives the same forces
    _z_dense, forces = _dense_run(plant, design, theta, rate, planned)
    np.testing.assert_allclose(sim.result.actuator("f1").force, forces[:, 0], rtol=0,
                               atol=1e-9 * np.max(np.abs(forces)))


def test_saturation_off_equals_saturation_at_infinity():
    design = dvf.design(_loop_plant(), ["p1", "p2"], gain=[30.0, 20.0], roll_off_hz=900.0)
    kwargs = {"drive": "f1", "output": "tip", "distance_m": 1e-6, "duration_s": 0.05}
    off = simulate_move(_loop_plant(), design, saturation=False, **kwargs)
    infinite = _loop_plant(max_force=1e9)  # the top of its stated range: never reached here
    same = dataclasses.replace(design, plant_fingerprint=infinite.fingerprint)
    huge = simulate_move(infinite, same, saturation=True, **kwargs)
    np.testing.assert_array_equal(off.result.output("tip").values,
                                  huge.result.output("tip").values)
    assert huge.result.actuator("f1").saturated_s == 0.0


def test_saturated_loop_equals_a_dense_loop_with_clipping():
    plant = _loop_plant(max_force=0.15)
    design = dvf.design(plant, ["p1", "p2"], gain=[30.0, 20.0], roll_off_hz=900.0)
    rate, steps = 4000.0, 400
    sim = simulate_move(plant, design, drive="f1", output="tip", distance_m=1e-6,
                        duration_s=(steps - 1) / rate)
    T = 1 / rate
    theta = [0.0, plant.requirements.loop_delay_s - T]
    planned = np.zeros((steps, 2, 2))
    planned[:, :, 0] = sim.setup["static_input"]
    assert sim.setup["static_input"] > 0.15  # the command itself is clipped
    z, _forces = _dense_run(plant, design, theta, rate, planned, limit=0.15)
    ours = sim.result.output("tip").values
    np.testing.assert_allclose(ours, z, rtol=0, atol=1e-9 * np.max(np.abs(z)))
    assert sim.result.actuator("f1").saturated_s > 0.01
    assert np.max(np.abs(sim.result.actuator("f1").force)) <= 0.15 + 1e-12


# ---------------------------------------------------------------------- random disturbance
def _rms_error_bound(output, extra=0.0):
    return 3.0 * output.rms_error + extra


def test_random_disturbance_rms_matches_lyapunov_open_loop():
    # open loop: the Lyapunov RMS of the plant under the flat PSD (assess's h2 route). The
    # record's RMS scatters by 1/(2√(B_e T)) (1σ, B_e = (∫G)²/∫G², the statistical bandwidth;
    # J. S. Bendat & A. G. Piersol, Random Data, 4th ed. 2010, random error of mean-square
    # estimates; from memory); the ZOH of white noise adds a sinc² at f ≪ f_s (< 0.1 % here).
    plant = _loop_plant()
    sim = simulate_disturbance(plant, disturbance="push", duration_s=40.0, seed=11)
    out = sim.result.output("tip")
    A, B, C, D = plant.statespace_matrices(["push"], ["tip"])
    lyap = math.sqrt(h2_variances((A, B, C, D), np.array([1e-3]))[0])
    assert 0.005 < out.rms_error < 0.05
    assert abs(out.residual_rms / lyap - 1) < _rms_error_bound(out, 0.002)


def test_random_disturbance_rms_matches_assess_closed_loop():
    # closed loop with sensor noise: assess's closed-loop RMS (Lyapunov; continuous loop with
    # the ZOH and one sample as 1.5 T of delay) against the sampled loop as it runs
    plant = _loop_plant()
    design = dvf.design(plant, ["p1", "p2"], gain=[30.0, 20.0], roll_off_hz=900.0)
    result = assess(plant, design, samples=0)
    lyap = next(o for o in result.response.outputs if o.output == "tip")
    sim = simulate_disturbance(plant, design, disturbance="push", duration_s=20.0, seed=2)
    out = sim.result.output("tip")
    assert lyap.method == "lyapunov"
    assert abs(out.residual_rms / lyap.closed_rms - 1) < _rms_error_bound(out, 0.01)
    opened = sim.open_loop.output("tip")
    assert abs(opened.residual_rms / lyap.open_rms - 1) < _rms_error_bound(opened, 0.002)
    assert out.residual_rms < 0.5 * opened.residual_rms  # the loop damps
    # the disturbance-only Lyapunov variance, same closed loop (no noise), for the record
    ctrl = effective_controller(plant, design)
    system = closed_loop_statespace(plant, design, ctrl, ["push"], ["tip"])
    quiet = math.sqrt(h2_variances(system, np.array([1e-3, 0.0, 0.0]))[0])
    assert quiet <= lyap.closed_rms


# ---------------------------------------------------------------------- bad input
def test_bad_requests_are_refused():
    plant = _loop_plant()
    with pytest.raises(UsageError, match="unknown drive actuator 'f9'"):
        simulate_move(plant, drive="f9", output="tip", distance_m=1e-6)
    with pytest.raises(UsageError, match="not a displacement"):
        simulate_move(plant, drive="f1", output="v1", distance_m=1e-6)
    with pytest.raises(UsageError, match="non-zero"):
        simulate_move(plant, drive="f1", output="tip", distance_m=0.0)
    with pytest.raises(UsageError, match="unknown disturbance"):
        simulate_disturbance(plant, disturbance="wind")
    other = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    design = dvf.design(other, ["p1"], gain=10.0)
    with pytest.raises(DesignError, match="fingerprint"):
        simulate_move(plant, design, drive="f1", output="tip", distance_m=1e-6)
    with pytest.raises(UsageError, match="samples, more than"):
        simulate_move(plant, drive="f1", output="tip", distance_m=1e-6, duration_s=1e5)


def test_two_mode_shaper_on_a_chain_kills_both_modes():
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    shaper = convolve(shaper_for_mode(plant.freqs_hz[0], 0.01, "zv"),
                      shaper_for_mode(plant.freqs_hz[1], 0.01, "zv"))
    sim = simulate_move(plant, drive="f1", output="x2", distance_m=1e-6, rate_hz=5000,
                        shaper=shaper, duration_s=0.3)
    assert sim.result.output("x2").residual_rms < 1e-6 * 1e-6


def test_engines_give_the_same_numbers():
    # the numpy step loop and the compiled one (numba, in the test extra) run the same
    # arithmetic; the open loop's whole-record filter equals the step loop with zero gain
    plant = _loop_plant(max_force=0.4)
    design = dvf.design(plant, ["p1", "p2"], gain=[30.0, 20.0], roll_off_hz=900.0)
    kwargs = {"drive": "f1", "output": "tip", "distance_m": 1e-6, "duration_s": 0.1,
              "shaper": shaper_for_mode(plant.freqs_hz[0], 0.01, "zvd")}
    a = simulate_move(plant, design, engine="numpy", **kwargs)
    b = simulate_move(plant, design, engine="compiled", **kwargs)
    tip_a, tip_b = a.result.output("tip").values, b.result.output("tip").values
    np.testing.assert_allclose(tip_a, tip_b, rtol=0, atol=1e-12 * np.max(np.abs(tip_a)))
    assert a.result.actuator("f1").saturated_s == pytest.approx(
        b.result.actuator("f1").saturated_s, abs=1e-12)
    zero = dataclasses.replace(design, loops=tuple(
        dataclasses.replace(lp, branches=tuple(dataclasses.replace(br, gain=0.0)
                                               for br in lp.branches))
        for lp in design.loops))
    c = simulate_move(plant, zero, engine="numpy", **kwargs)
    opened = c.open_loop.output("tip").values
    np.testing.assert_allclose(c.result.output("tip").values, opened, rtol=0,
                               atol=1e-12 * np.max(np.abs(opened)))


def test_an_unstable_loop_is_stopped_and_said():
    plant = _loop_plant()
    design = dvf.design(plant, ["p1", "p2"], gain=[30.0, 20.0], roll_off_hz=900.0)
    wrong = dataclasses.replace(design, loops=tuple(
        dataclasses.replace(lp, branches=tuple(dataclasses.replace(br, gain=-50 * br.gain)
                                               for br in lp.branches))
        for lp in design.loops))  # positive feedback: unstable
    for engine in ("numpy", "compiled"):
        sim = simulate_move(plant, wrong, drive="f1", output="tip", distance_m=1e-6,
                            duration_s=2.0, saturation=False, engine=engine)
        assert sim.result.diverged_s is not None and sim.open_loop.diverged_s is None
        assert any("unstable" in note for note in sim.notes)
        tip = sim.result.output("tip")
        assert tip.settling_time_s is None and tip.residual_rms is None
        assert math.isfinite(tip.peak)


def test_feedthrough_of_force_sensors_and_residual_flexibility():
    # a strut's force sensor reads k_s (elongation − δ): feedthrough −k_s from δ; a pair's
    # static_gain adds a residual-flexibility constant (the plant's own D of its modal sum)
    from lawplants import strut_plant

    from dampctl.discrete import _simsetup

    base = strut_plant(damping=0.01)
    pairs = [dataclasses.replace(p, static_gain=-0.05) if p.name == "iff1" else p
             for p in base.pairs]
    plant = dataclasses.replace(base, pairs=tuple(pairs))
    channels = _simsetup.make_channels(plant, None, drive="s1", extra_outputs=["F1", "dx1"])
    _b, _C, _orders, D = _simsetup.modal_rows(plant, channels)
    _b2, _c2, _o2, ref = plant._matrices(channels.inputs, ["F1", "dx1"])
    np.testing.assert_allclose(D[:2], ref, rtol=1e-9, atol=1e-12)
    assert D[0, 0] != pytest.approx(-0.2)  # the residual term is in


def test_closed_loop_static_value_is_the_loops_dc_gain():
    # PPF on a displacement sensor changes the static stiffness: the output settles at the
    # move times the closed loop's DC gain over the plant's (python-control feedback().dcgain)
    from dampctl.laws import ppf
    from dampctl.model.plantfile import load_plant

    plant = load_plant(PLANTS / "oscillator.toml")
    design = ppf.design(plant, ["coil_gap"])
    sim = simulate_move(plant, design, drive="coil", output="mass_x", distance_m=1e-6,
                        duration_s=1.0)
    P = plant.statespace(["coil"], ["gap", "mass_x"])
    loop = control.feedback(P, design.statespace() * control.ss([], [], [], [[1.0, 0.0]]),
                            sign=-1)
    ratio = float(np.asarray(loop.dcgain())[1, 0]) / float(np.asarray(P.dcgain())[1, 0])
    out = sim.result.output("mass_x")
    assert out.target == pytest.approx(1e-6 * ratio, rel=1e-9)
    assert abs(ratio - 1) > 0.01 and any("static stiffness" in n for n in sim.notes)
    assert out.final == pytest.approx(out.target, rel=1e-3)
