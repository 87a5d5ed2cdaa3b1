"""Discretization into second-order sections, checked against closed forms and libraries.

References: G. F. Franklin, J. D. Powell, M. L. Workman, *Digital Control of Dynamic Systems* (3rd
ed. 1998), discrete equivalents (ZOH maps poles z = e^{pT}; Tustin warps frequency as ω_d = (2/T)
atan(ω_a T/2); prewarping makes the responses equal at ω₀) [from memory]; the worked numbers are
computed from those formulas; python-control ``sample_system`` and scipy ``cont2discrete`` /
``sosfilt`` / ``dlsim`` compute the same things another way.
"""

from __future__ import annotations

import warnings

import control
import numpy as np
import pytest
import scipy.signal
from export_helpers import ppf_bank, resonance_design
from hypothesis import given
from hypothesis import strategies as st

from dampctl.design import Branch, Design, Loop, Section
from dampctl.discrete.equivalents import discretize, transmission_zeros
from dampctl.errors import UsageError

RATE = 10e3
T = 1 / RATE
W0 = 2 * np.pi * 1000.0


def _pole(loop):
    roots = np.roots(loop.sos[0, 3:])
    return roots[np.argmax(roots.imag)]


def _freqs_damping(z):
    s = np.log(z) / T
    return abs(s) / (2 * np.pi), -s.real / abs(s)


def test_plain_tustin_warps_1khz_resonance_to_968_922_hz():
    # Franklin, Powell & Workman (1998), Tustin warping ω_d = (2/T) atan(ω_a T/2); Tustin warping
    # (Franklin, Powell & Workman 1998): 1 kHz at 10 kHz -> 968.922 Hz, |z| = 0.99429749
    warped = 2 / T * np.arctan(W0 * T / 2) / (2 * np.pi)
    assert warped == pytest.approx(968.922, abs=1e-3)
    loop = discretize(resonance_design(), RATE, prewarp="none").loops[0]
    z = _pole(loop)
    assert abs(z) == pytest.approx(0.99429749, abs=1e-8)
    # undamped pole angle maps exactly through the warping relation
    undamped = discretize(resonance_design(damping=0.0), RATE, prewarp="none").loops[0]
    assert np.angle(_pole(undamped)) * RATE / (2 * np.pi) == pytest.approx(warped, rel=1e-9)
    # FRF peak at 968.83 Hz (computed from the warping formula, 1e-3 Hz grid)
    f = np.arange(968.0, 970.0, 1e-3)
    peak = f[np.argmax(np.abs(loop.cascade.response(f, RATE)))]
    assert peak == pytest.approx(968.83, abs=2e-3)


def test_prewarped_tustin_equals_continuous_at_the_prewarp_frequency():
    design = resonance_design()
    for prewarp in ("auto", 1000.0):
        dc = discretize(design, RATE, prewarp=prewarp)
        loop = dc.loops[0]
        assert loop.prewarp_hz == (pytest.approx(1000.0, rel=1e-12),)
        k_d = loop.cascade.response(np.array([1000.0]), RATE)[0]
        k_c = design.loops[0].response(np.array([1000.0]))[0]
        assert k_d == pytest.approx(k_c, rel=1e-10)
    # prewarped Tustin (Franklin, Powell & Workman 1998), computed: equivalent pole 1000.006 Hz,
    # damping 0.009355, peak 50.003 at 999.906 Hz
    f_eq, zeta_eq = _freqs_damping(_pole(loop))
    assert f_eq == pytest.approx(1000.006, abs=1e-3)
    assert zeta_eq == pytest.approx(0.009355, abs=1e-6)
    f = np.arange(999.0, 1001.0, 1e-3)
    h = np.abs(loop.cascade.response(f, RATE))
    assert f[np.argmax(h)] == pytest.approx(999.906, abs=2e-3)
    assert np.max(h) == pytest.approx(50.003, abs=1e-3)


def test_auto_prewarp_is_exact_at_each_branch_centre_frequency():
    freqs = [120.0, 700.0, 2300.0]
    design = ppf_bank(freqs)
    loop = discretize(design, RATE).loops[0]
    assert loop.prewarp_hz == pytest.approx(freqs, rel=1e-12)
    for f, branch_d, branch_c in zip(
        freqs, loop.parallel.branches, design.loops[0].branches, strict=True
    ):
        h_d = branch_d.response(np.array([f]), RATE)[0]
        h_c = branch_c.response(np.array([2j * np.pi * f]))[0]
        assert h_d == pytest.approx(h_c, rel=1e-9)


def test_zoh_poles_are_exp_of_pole_times_t():
    # ZOH maps poles as z = e^{pT} (Franklin, Powell & Workman 1998): z = 0.80396808 ± 0.58407841j,
    # |z| = 0.99373651, same as exp(pT) to 1e-12
    loop = discretize(resonance_design(), RATE, method="zoh").loops[0]
    p = -0.01 * W0 + 1j * W0 * np.sqrt(1 - 0.01**2)
    z = _pole(loop)
    assert abs(z - np.exp(p * T)) < 1e-12
    assert z == pytest.approx(0.80396808 + 0.58407841j, abs=1e-8)
    assert np.sort(np.abs(np.linalg.eigvals(loop.state_space[0]))) == pytest.approx(
        [0.99373651] * 2, abs=1e-8
    )


@pytest.mark.parametrize(
    ("method", "prewarp", "kwargs"),
    [
        ("zoh", "auto", {"method": "zoh"}),
        ("tustin", "none", {"method": "tustin"}),
        ("tustin", 450.0, {"method": "tustin", "prewarp_frequency": 2 * np.pi * 450.0}),
    ],
)
def test_sections_agree_with_python_control_and_scipy(method, prewarp, kwargs):
    design = ppf_bank([90.0, 450.0, 1300.0])
    dc = discretize(design, RATE, method=method, prewarp=prewarp)
    loop = dc.loops[0]
    ref = control.sample_system(design.statespace(), T, **kwargs)
    f = np.geomspace(5.0, 4900.0, 300)
    h_ref = np.array([ref(np.exp(2j * np.pi * fk * T)) for fk in f]).ravel()
    for form in (loop.cascade, loop.parallel):
        got = form.response(f, RATE)
        assert np.max(np.abs(got - h_ref) / np.abs(h_ref)) < 1e-8
    # scipy computes the same discrete state space (up to a change of state basis)
    A, B, C, D = design.statespace_matrices()
    if method == "zoh":
        Ad, *_ = scipy.signal.cont2discrete((A, B, C, D), T, method="zoh")
        np.testing.assert_allclose(
            np.sort_complex(np.linalg.eigvals(loop.state_space[0])),
            np.sort_complex(np.linalg.eigvals(Ad)),
            atol=1e-12,
        )


def test_impulse_response_of_sections_matches_state_space():
    # scipy sosfilt (cascade, DF-II-T) against scipy dlsim of the discrete state space
    design = ppf_bank([60.0, 65.0, 400.0, 410.0, 2000.0], damping=0.02)
    loop = discretize(design, RATE).loops[0]
    n = 4000
    impulse = np.zeros(n)
    impulse[0] = 1.0
    A, B, C, D = loop.state_space
    _, y_ss, _ = scipy.signal.dlsim((A, B, C, D, T), impulse)
    y_cascade = loop.cascade_gain * scipy.signal.sosfilt(np.array(loop.sos), impulse)
    y_parallel = sum(
        b.gain * scipy.signal.sosfilt(np.array(b.sos), impulse) for b in loop.parallel.branches
    )
    scale = np.max(np.abs(y_ss))
    assert np.max(np.abs(y_cascade - y_ss[:, 0])) < 1e-8 * scale
    assert np.max(np.abs(y_parallel - y_ss[:, 0])) < 1e-10 * scale


def test_transmission_zeros_match_python_control():
    design = ppf_bank([100.0, 300.0, 800.0])
    loop = discretize(design, RATE).loops[0]
    ours = np.sort_complex(transmission_zeros(loop.state_space))
    theirs = np.sort_complex(control.ss(*loop.state_space, T).zeros())
    # the Tustin bank has a double zero at z = -1, computable only to ~sqrt(eps) by either
    np.testing.assert_allclose(ours, theirs, rtol=0, atol=1e-5)
    simple = np.abs(ours + 1) > 1e-3
    np.testing.assert_allclose(ours[simple], theirs[simple], rtol=1e-9)


def test_mimo_state_space_and_modal_sections_agree_with_sample_system():
    rng = np.random.default_rng(7)
    # a stable 6-state, 2x2 controller with lightly damped modes (LQG-like, invented)
    blocks = [(-20.0, 2 * np.pi * 80), (-60.0, 2 * np.pi * 300), (-30.0, 2 * np.pi * 900)]
    A = np.zeros((6, 6))
    for k, (sigma, w) in enumerate(blocks):
        A[2 * k : 2 * k + 2, 2 * k : 2 * k + 2] = [[sigma, w], [-w, sigma]]
    Tm = rng.normal(size=(6, 6)) + 3 * np.eye(6)
    A = Tm @ A @ np.linalg.inv(Tm)
    B, C, D = rng.normal(size=(6, 2)), rng.normal(size=(2, 6)), 0.1 * rng.normal(size=(2, 2))
    design = Design(
        law="lqg",
        plant_fingerprint="none",
        actuators=("f1", "f2"),
        sensors=("x1", "x2"),
        target_modes=(1,),
        controller=(A, B, C, D),
    )
    f = np.array([10.0, 80.0, 250.0, 900.0, 3000.0])
    zs = np.exp(2j * np.pi * f * T)
    for method in ("zoh", "tustin"):
        dc = discretize(design, RATE, method=method, prewarp="none")
        assert len(dc.paths) == 4
        ref = control.sample_system(design.statespace(), T, method=method)
        for mats in (dc.state_space, dc.realisation_matrices()):
            sys_d = control.ss(*mats, T)
            for z in zs:
                np.testing.assert_allclose(sys_d(z), ref(z), rtol=1e-9, atol=1e-12)


def test_bad_options_are_refused():
    design = resonance_design()
    with pytest.raises(UsageError, match="method must be one of tustin, zoh"):
        discretize(design, RATE, method="matched")
    with pytest.raises(UsageError, match="Tustin only"):
        discretize(design, RATE, method="zoh", prewarp=100.0)
    with pytest.raises(UsageError, match="prewarp frequency must be in"):
        discretize(design, RATE, prewarp=6000.0)
    with pytest.raises(UsageError, match="positive number of Hz"):
        discretize(design, 0.0)


def test_section_near_nyquist_is_not_prewarped_and_noted():
    design = ppf_bank([4800.0])
    dc = discretize(design, RATE)
    assert dc.loops[0].prewarp_hz == (None,)
    assert any("near Nyquist): not prewarped" in note for note in dc.notes)
    # a section above the Nyquist frequency is called that
    dc = discretize(ppf_bank([7000.0]), RATE)
    assert any("above the Nyquist frequency (5000 Hz)" in note for note in dc.notes)


def test_auto_prewarp_records_every_modal_block_of_a_mimo_controller():
    # one block at 80 Hz (prewarped there: its |eigenvalue| = √(σ² + ω²)) and one at 7 kHz,
    # above the 5 kHz Nyquist frequency (not prewarped, and said so)
    A = np.zeros((4, 4))
    for k, (sigma, w) in enumerate([(-20.0, 2 * np.pi * 80), (-500.0, 2 * np.pi * 7000)]):
        A[2 * k : 2 * k + 2, 2 * k : 2 * k + 2] = [[sigma, w], [-w, sigma]]
    design = Design(
        law="lqg",
        plant_fingerprint="none",
        actuators=("f1",),
        sensors=("x1",),
        target_modes=(1,),
        controller=(A, np.ones((4, 1)), np.ones((1, 4)), np.zeros((1, 1))),
    )
    dc = discretize(design, RATE)
    first, second = dc.block_prewarp_hz
    assert first == pytest.approx(np.hypot(20.0, 2 * np.pi * 80) / (2 * np.pi), rel=1e-12)
    assert second is None
    assert any("above the Nyquist frequency" in note for note in dc.notes)


def test_pure_gain_and_leaky_integrator():
    wc = 2 * np.pi * 2.0
    loop = Loop(
        "fx",
        "f",
        "x",
        3.0,
        branches=(Branch(gain=3.0), Branch(gain=5.0, sections=(Section((1.0,), (1.0, wc)),))),
    )
    design = Design(
        law="iff",
        plant_fingerprint="none",
        actuators=("f",),
        sensors=("x",),
        target_modes=(1,),
        loops=(loop,),
    )
    dc = discretize(design, RATE)
    assert dc.loops[0].prewarp_hz == (pytest.approx(2.0),)
    f = np.array([0.5, 2.0, 50.0])
    h = dc.loops[0].cascade.response(f, RATE)
    # exact at the corner (prewarp), and the DC gain 3 + 5/wc is kept by Tustin (z = 1 ↔ s = 0)
    assert h[1] == pytest.approx(loop.response(f[1:2])[0], rel=1e-10)
    assert dc.loops[0].cascade.response(np.array([0.0]), RATE)[0] == pytest.approx(3 + 5 / wc)


def test_32nd_order_ppf_bank_keeps_its_response():
    # LIBRARY-NOTES: the transfer-function route (ss2tf -> tf2sos) loses the response of a
    # 32nd-order discrete PPF bank; poles + transmission zeros + zpk2sos, and the parallel form,
    # keep it. Reference: the bank's discrete state space evaluated directly.
    design = ppf_bank(np.geomspace(40.0, 3000.0, 16), damping=0.02)
    for method in ("tustin", "zoh"):
        loop = discretize(design, RATE, method=method).loops[0]
        assert loop.sos.shape == (16, 6)
        assert loop.cascade_error < 1e-5
        assert loop.parallel_error < 1e-9
        assert loop.form == "parallel"
    A, B, C, D = loop.state_space
    with np.errstate(all="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        b, a = scipy.signal.ss2tf(A, B, C, D)
        tf_sos = scipy.signal.tf2sos(b[0], a)
    f = np.linspace(10.0, 4900.0, 400)
    ref = loop.parallel.response(f, RATE)
    tf_route = scipy.signal.sosfreqz(tf_sos, worN=2 * np.pi * f / RATE)[1]
    assert np.max(np.abs(tf_route - ref) / np.abs(ref)) > 0.1  # the route we do not take


def test_mimo_without_modal_form_falls_back_to_path_cascades():
    # a defective (Jordan) state matrix has no eigenvector basis
    A = np.array([[-100.0, 1.0, 0.0], [0.0, -100.0, 0.0], [0.0, 0.0, -20.0]])
    B = np.array([[0.0, 1.0], [1.0, 0.0], [1.0, 1.0]])
    C = np.array([[1e4, 0.0, 3.0], [0.0, 50.0, -2.0]])
    design = Design(
        law="lqg",
        plant_fingerprint="none",
        actuators=("f1", "f2"),
        sensors=("x1", "x2"),
        target_modes=(1,),
        controller=(A, B, C, np.zeros((2, 2))),
    )
    dc = discretize(design, RATE)
    assert any("no modal realisation" in note for note in dc.notes)
    assert len(dc.paths) == 4
    ref = control.sample_system(design.statespace(), T, method="tustin")
    sys_d = control.ss(*dc.realisation_matrices(), T)
    for f in (5.0, 60.0, 700.0):
        z = np.exp(2j * np.pi * f * T)
        np.testing.assert_allclose(sys_d(z), ref(z), rtol=1e-9, atol=1e-12)


@given(
    freq_hz=st.floats(1.0, 4000.0),
    damping=st.floats(0.001, 0.9),
    rate_hz=st.floats(2000.0, 100000.0),
    method=st.sampled_from(["tustin", "zoh"]),
)
def test_stable_sections_stay_stable_and_sections_reproduce_the_state_space(
    freq_hz, damping, rate_hz, method
):
    # Tustin maps the open left half plane into the unit disc and ZOH maps p to e^{pT}, so a
    # stable continuous section must give poles with |z| < 1 (Franklin, Powell & Workman 1998)
    design = ppf_bank([freq_hz], damping=damping)
    loop = discretize(design, rate_hz, method=method).loops[0]
    assert np.all(np.abs(np.linalg.eigvals(loop.state_space[0])) < 1.0)
    assert np.all(np.abs(np.roots(loop.sos[0, 3:])) < 1.0)
    assert loop.cascade_error < 1e-7
