"""Random response: Lyapunov (H2) against closed forms and against the frequency integral."""

from dataclasses import replace

import numpy as np
import pytest

from dampctl.analysis.closedloop import closed_loop_matrix
from dampctl.analysis.loopmodel import loop_controller
from dampctl.analysis.response import (
    closed_loop_frf,
    closed_loop_statespace,
    h2_variances,
    integration_grid,
    random_response,
)
from dampctl.design import Branch, Design, Loop, Section
from dampctl.model.components import Disturbance, Output
from dampctl.testing import chain_plant, sdof_plant

M, K, C = 2.0, 8e4, 8.0
W0 = 1e-2  # one-sided force PSD, N²/Hz


def _sdof(noise=0.0, psd=W0):
    plant = sdof_plant(M, K, C)
    sensors = tuple(s if s.name != "v" else replace(s, noise_density=noise) for s in plant.sensors)
    return replace(
        plant,
        sensors=sensors,
        disturbances=(Disturbance(name="w", site="x", psd=psd),),
        outputs=(
            Output(name="xo", kind="displacement", site="x"),
            Output(name="vo", kind="velocity", site="x"),
        ),
    )


def _dvf(plant, gain, pair="fv", actuator="f", sensor="v"):
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=(actuator,),
        sensors=(sensor,),
        target_modes=(1,),
        loops=(Loop(pair, actuator, sensor, gain, (Branch(gain=gain),)),),
        pairs=(pair,),
    )


def _response(plant, design):
    ctrl = loop_controller(plant, design, delay_s=0.0, omega_ref=1.0)
    return random_response(plant, design, ctrl, delay_s=0.0)


def test_sdof_white_force_closed_form_open_and_closed_loop():
    # σ_x² = W₀/(4kc) and σ_v² = W₀/(4mc) for m x'' + c x' + k x = f under a one-sided white
    # force PSD W₀ (Crandall & Mark, Random Vibration in Mechanical Systems, 1963; from
    # memory, verified here numerically). Velocity feedback u = −g v only adds damping: c → c + g.
    plant = _sdof()
    g = 72.0
    r = _response(plant, _dvf(plant, g))
    x, v = r.outputs
    assert x.open_rms**2 == pytest.approx(W0 / (4 * K * C), rel=1e-9)
    assert v.open_rms**2 == pytest.approx(W0 / (4 * M * C), rel=1e-9)
    assert x.closed_rms**2 == pytest.approx(W0 / (4 * K * (C + g)), rel=1e-9)
    assert v.closed_rms**2 == pytest.approx(W0 / (4 * M * (C + g)), rel=1e-9)
    # the frequency integral on the grid agrees (grid and tail error)
    assert x.open_rms_integral == pytest.approx(x.open_rms, rel=2e-3)
    assert x.closed_rms_integral == pytest.approx(x.closed_rms, rel=2e-3)
    assert v.closed_rms_integral == pytest.approx(v.closed_rms, rel=2e-3)
    # effort: u = −g v, so σ_u = g σ_v
    assert r.effort[0].rms == pytest.approx(g * v.closed_rms, rel=1e-9)
    assert x.method == "lyapunov"
    assert x.cumulative_closed[-1] == pytest.approx(x.closed_rms_integral, rel=1e-12)


def test_sensor_noise_part_closed_form():
    # Noise n on the velocity sensor gives a force −g n: σ_x² = g² n² / (4 k (c + g)) from the
    # same closed form (Crandall & Mark 1963), with W₀ = g² n².
    n, g = 1e-6, 72.0
    plant = _sdof(noise=n, psd=0.0)
    x, _v = _response(plant, _dvf(plant, g)).outputs
    assert x.noise_rms**2 == pytest.approx(g**2 * n**2 / (4 * K * (C + g)), rel=1e-9)
    assert x.closed_rms == pytest.approx(x.noise_rms, rel=1e-12)
    assert x.open_rms == 0.0


def test_tabulated_psd_matches_flat_psd():
    # A table that is flat over the whole grid integrates to the Lyapunov value of the flat PSD.
    plant = _sdof()
    design = _dvf(plant, 72.0)
    flat = _response(plant, design)
    table = replace(plant, disturbances=(Disturbance("w", "x", [[1e-3, W0], [1e7, W0]]),))
    tab = _response(table, design)
    assert tab.outputs[0].method == "integral"
    assert tab.outputs[0].closed_rms == pytest.approx(flat.outputs[0].closed_rms, rel=2e-3)
    assert tab.outputs[0].open_rms == pytest.approx(flat.outputs[0].open_rms, rel=2e-3)


def _ppf_chain():
    plant = chain_plant([1.0, 0.5, 0.8], [5e5, 2e5, 3e5], damping=0.01)
    sensors = tuple(replace(s, noise_density=1e-8) if s.name == "x1" else s for s in plant.sensors)
    plant = replace(
        plant,
        sensors=sensors,
        disturbances=(Disturbance("w2", "m2", 1e-2), Disturbance("w3", "m3", 4e-3)),
        outputs=(Output("d3", "displacement", "m3"), Output("v2", "velocity", "m2")),
    )
    w = plant.omegas[0] * 1.02
    section = Section((w**2,), (1.0, 2 * 0.2 * w, w**2))
    design = Design(
        law="ppf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f1",),
        sensors=("x1",),
        target_modes=(1,),
        loops=(Loop("q1", "f1", "x1", 0.3, (Branch(gain=-1e5, sections=(section,)),)),),
        pairs=("q1",),
    )
    return plant, design


def test_lyapunov_equals_frequency_integral_on_mimo_disturbances():
    # Two independent routes to the same variance: H2 by Lyapunov (scipy) and the
    # frequency-domain integral of Σ|H|²W on the grid (modal-sum FRF, exact controller).
    plant, design = _ppf_chain()
    r = _response(plant, design)
    for o in r.outputs:
        assert np.isfinite(o.closed_rms) and o.closed_rms > 0
        assert o.closed_rms_integral == pytest.approx(o.closed_rms, rel=3e-3)
        assert o.open_rms_integral == pytest.approx(o.open_rms, rel=3e-3)
        assert 0 < o.noise_rms < o.closed_rms


def test_closed_loop_statespace_matches_shared_loop_and_frf():
    # The generalized closed loop has the shared closed-loop state matrix, and its transfer
    # function C(sI − A)⁻¹B + D equals the FRF assembled from the modal sum.
    plant, design = _ppf_chain()
    ctrl = loop_controller(plant, design, delay_s=0.0, omega_ref=1.0)
    A, B, Cm, D = closed_loop_statespace(plant, design, ctrl, ["w2", "w3"], ["d3", "v2"])
    mats = plant.statespace_matrices(design.actuators, design.sensors)
    np.testing.assert_allclose(A, closed_loop_matrix(mats, ctrl), atol=1e-9)
    freq = np.array([30.0, plant.freqs_hz[0], 150.0])
    frf = closed_loop_frf(plant, design, freq, ["w2", "w3"], ["d3", "v2"], delay_s=0.0)
    for k, f in enumerate(freq):
        H = Cm @ np.linalg.solve(2j * np.pi * f * np.eye(A.shape[0]) - A, B) + D
        np.testing.assert_allclose(H[:2, :2], frf.closed[:, :, k], rtol=1e-8)
        np.testing.assert_allclose(H[:2, 2:], frf.noise[:, :, k], rtol=1e-8, atol=1e-30)
        np.testing.assert_allclose(H[2:, :2], frf.effort[:, :, k], rtol=1e-8)


def test_white_input_through_feedthrough_is_infinite_and_unstable_is_infinite():
    A = np.array([[-1.0]])
    B = np.array([[1.0]])
    Cm = np.array([[1.0]])
    assert h2_variances((A, B, Cm, np.array([[1.0]])), [1.0])[0] == np.inf
    assert h2_variances((-A, B, Cm, np.array([[0.0]])), [1.0])[0] == np.inf
    # ẋ = −x + w, Q = W₀/2: σ² = Q/2 = W₀/4 (scalar Lyapunov equation)
    assert h2_variances((A, B, Cm, np.array([[0.0]])), [2.0])[0] == pytest.approx(0.5)


def test_velocity_outputs_get_third_octave_spectrum_and_vc_class():
    plant = _sdof(psd=1e-9)
    r = _response(plant, _dvf(plant, 72.0))
    v = r.outputs[1]
    assert v.band_rms_closed.shape == (20,)
    # bands partition 0.891–89.1 Hz: their energy equals the cumulative RMS over that range
    grid = r.freq_hz
    lo, hi = 10 ** (-1 / 20), 10 ** (19 / 10 + 1 / 20)
    cum = np.interp([lo, hi], grid, v.cumulative_closed**2)
    assert np.sum(v.band_rms_closed**2) == pytest.approx(cum[1] - cum[0], rel=1e-9)
    assert v.vc_closed.worst_band_hz == 31.5
    assert r.outputs[0].vc_closed is None  # displacement output: no VC rating


def test_integration_grid_contains_band_edges_and_modes():
    plant, design = _ppf_chain()
    grid = integration_grid(plant, design)
    assert np.all(np.diff(grid) > 0)
    for f in plant.freqs_hz:
        assert np.min(np.abs(grid / f - 1)) < 1e-12
    assert np.min(np.abs(grid - 10 ** (1 / 20))) < 1e-12


@pytest.mark.parametrize("k", [1.0, 1e5, 1e9])
def test_h2_variance_survives_bad_state_scaling(k):
    # σ_x² = W₀ / (8 ζ ω³ m²) for m x'' + 2 m ζ ω x' + m ω² x = f, f white with one-sided
    # PSD W₀ (Crandall & Mark, Random Vibration in Mechanical Systems, 1963; from memory).
    # The same system under the similarity T = diag(1/k, k) has entries up to k²ω²: the
    # unbalanced Lyapunov solve returned a negative variance for k >= 1e5.
    m, w, z, w0 = 2.0, 2 * np.pi * 50.0, 0.01, 1e-2
    A = np.array([[0.0, 1.0], [-w * w, -2 * z * w]])
    B = np.array([[0.0], [1.0 / m]])
    C = np.array([[1.0, 0.0]])
    T = np.diag([1.0 / k, k])
    Ti = np.linalg.inv(T)
    system = (Ti @ A @ T, Ti @ B, C @ T, np.zeros((1, 1)))
    exact = w0 / (8 * z * w**3 * m * m)
    assert h2_variances(system, np.array([w0]))[0] == pytest.approx(exact, rel=1e-9)
