"""Sampled closed loop: ZOH plant, one sample of computation delay, discrete controller.

References: G. F. Franklin, J. D. Powell, M. L. Workman, *Digital Control of Dynamic Systems*
(3rd ed. 1998), sampled-data loops and the ZOH + one-sample lag 1.5 ωT [from memory], worked
numbers computed from them; python-control ``sample_system`` + ``feedback`` compute the sampled
loop another way; the continuous limit is the closed-form damping of velocity feedback
on a single-degree-of-freedom oscillator, ζ_cl = ζ + g/(2 m ω_n) (Balas 1979).
"""

from __future__ import annotations

import control
import numpy as np
import pytest
from export_helpers import dvf_design

from dampctl.design import Branch, Design, Loop
from dampctl.discrete.equivalents import discretize
from dampctl.discrete.sampledloop import (
    phase_lost_deg,
    sampled_closed_loop,
    sampled_plant,
    verify_discrete,
)
from dampctl.testing import chain_plant, sdof_plant


def test_phase_lost_is_one_and_a_half_samples():
    # ZOH + one sample lag 1.5 ωT (Franklin, Powell & Workman 1998): 500 Hz at 10 kHz -> 27.0°;
    # 540°/N for N samples per crossover period
    assert phase_lost_deg(500.0, 10e3) == pytest.approx(27.0, abs=1e-9)
    for n, deg in ((10, 54.0), (20, 27.0), (40, 13.5)):
        assert phase_lost_deg(1.0, float(n)) == pytest.approx(deg, abs=1e-9)


def test_sampled_loop_poles_match_python_control():
    plant = chain_plant([1.0, 1.0, 1.0], [4e5, 4e5, 4e5], damping=0.005)
    design = dvf_design(plant, 200.0)
    rate = 4e3
    T = 1 / rate
    dc = discretize(design, rate)
    z = np.linalg.eigvals(
        sampled_closed_loop(sampled_plant(plant, design, rate), dc.realisation_matrices())
    )
    P = control.sample_system(plant.statespace(["f3"], ["v3"]), T, method="zoh")
    K = control.ss(*dc.realisation_matrices(), T)
    delay = control.ss([[0.0]], [[1.0]], [[1.0]], [[0.0]], T)
    ref = control.feedback(P, delay * K, sign=-1).poles()
    assert z.size == ref.size
    for pole in ref:
        assert np.min(np.abs(z - pole)) < 1e-8


def test_fast_sampling_tends_to_the_closed_form_continuous_damping():
    m, k, zeta = 2.0, 2.0 * (2 * np.pi * 50.0) ** 2, 0.01
    plant = sdof_plant(m, k, 2 * zeta * np.sqrt(k * m))
    g = 30.0
    design = Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f",),
        sensors=("v",),
        target_modes=(1,),
        loops=(Loop("fv", "f", "v", g, branches=(Branch(gain=g),)),),
    )
    expected = zeta + g / (2 * m * 2 * np.pi * 50.0)
    v = verify_discrete(plant, design, 2e6, discretize(design, 2e6).realisation_matrices())
    assert v.continuous_damping[0] == pytest.approx(expected, rel=1e-9)
    assert v.discrete_damping[0] == pytest.approx(expected, rel=1e-3)
    assert v.stable and not v.warnings
    # at 1 kHz the hold and the sample of delay cost damping (the lag eats into the
    # velocity-feedback phase lead), and the rate is 20x the mode: no warning yet
    slow = verify_discrete(plant, design, 1e3, discretize(design, 1e3).realisation_matrices())
    assert slow.discrete_damping[0] < expected
    assert slow.rate_ratio == pytest.approx(20.0)


def test_low_rate_and_aliasing_are_warned():
    plant = chain_plant([1.0, 1.0, 1.0], [4e5, 4e5, 4e5], damping=0.005)
    design = dvf_design(plant, 50.0, rolloff_hz=100.0)
    rate = 300.0  # mode 3 (181 Hz) above Nyquist
    v = verify_discrete(plant, design, rate, discretize(design, rate).realisation_matrices())
    assert any("common practice" in w for w in v.warnings)
    assert any("modes 3 lie above the Nyquist" in w for w in v.warnings)
    # the aliased mode is still reported near its own frequency, not at its alias
    assert v.discrete_freq_hz[2] > rate / 2


def test_modal_zoh_equals_scipy_cont2discrete():
    # block-by-block exponential against scipy's exponential of the whole augmented matrix
    import scipy.signal

    from dampctl.discrete.sampledloop import _modal_zoh

    plant = chain_plant([1.0, 2.0, 0.5, 1.5], [4e5, 3e5, 2e5, 5e5], damping=0.01)
    mats = plant.statespace_matrices(["f1", "f4"], ["v1", "x4", "a2"])
    ours = _modal_zoh(mats, 1 / 3e3)
    ref = scipy.signal.cont2discrete(mats, 1 / 3e3, method="zoh")[:4]
    for a, b in zip(ours, ref, strict=True):
        np.testing.assert_allclose(a, b, rtol=1e-12, atol=1e-14)
