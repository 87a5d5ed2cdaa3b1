"""Signal scaling of fixed-point cascades (Jackson, Bell Syst. Tech. J. 49(2), 1970).

Outside truths: closed-form norms of a first-order section and of an all-pole biquad (the
variance of a second-order autoregression, G. E. P. Box, G. M. Jenkins & G. C. Reinsel, *Time
Series Analysis*, 4th ed. 2008, the AR(2) process, from memory; the peak of 1/|A(e^{jω})| found
by setting the derivative of |A|² to zero, derived here by hand), scipy ``freqz_sos`` and
``sosfilt`` on the same sections, and the rounding-noise formula of A. V. Oppenheim & R. W.
Schafer, *Discrete-Time Signal Processing*, 3rd ed. 2010 (q²/12 per rounding, through the rest
of the cascade; from memory) against the bit-exact integer routine.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from dampctl.discrete.fixedpoint import quantize_section, run_fixed
from dampctl.discrete.scaling import (
    cascade_norms,
    order_sections,
    rounding_noise_gains,
    scale_form,
)
from dampctl.discrete.sections import Cascade, ParallelForm
from dampctl.errors import UsageError

RATE = 10e3


def _denominator(freq_hz, damping):
    w = 2 * np.pi * freq_hz
    p = np.exp((-damping * w + 1j * w * np.sqrt(1 - damping**2)) / RATE)
    return -2 * p.real, abs(p) ** 2


def test_first_order_section_norms_by_hand():
    # H = b0 / (1 + a1 z⁻¹), a1 = −0.9: h[n] = b0 (0.9)^n, so L1 = L∞ = b0/(1 − 0.9) and
    # L2 = b0/√(1 − 0.81)
    sos = np.array([[0.5, 0.0, 0.0, 1.0, -0.9, 0.0]])
    assert cascade_norms(sos, "linf")[0] == pytest.approx(5.0, rel=1e-12)
    assert cascade_norms(sos, "l1")[0] == pytest.approx(5.0, rel=1e-9)
    assert cascade_norms(sos, "l2")[0] == pytest.approx(0.5 / math.sqrt(0.19), rel=1e-12)


def test_all_pole_biquad_norms_by_hand():
    a1, a2 = _denominator(300.0, 0.02)
    sos = np.array([[1.0, 0.0, 0.0, 1.0, a1, a2]])
    # AR(2) variance (Box, Jenkins & Reinsel): ‖1/A‖₂² = (1 + a2) / ((1 − a2)((1 + a2)² − a1²))
    l2 = math.sqrt((1 + a2) / ((1 - a2) * ((1 + a2) ** 2 - a1**2)))
    assert cascade_norms(sos, "l2")[0] == pytest.approx(l2, rel=1e-10)
    # |A|² = 1 + a1² + a2² + 2 a1 (1 + a2) cos ω + 2 a2 cos 2ω is smallest where
    # cos ω = −a1 (1 + a2) / (4 a2)
    c = -a1 * (1 + a2) / (4 * a2)
    a_min = 1 + a1**2 + a2**2 + 2 * a1 * (1 + a2) * c + 2 * a2 * (2 * c * c - 1)
    assert cascade_norms(sos, "linf")[0] == pytest.approx(1 / math.sqrt(a_min), rel=1e-8)
    _, h = scipy.signal.freqz_sos(sos, worN=2**20)
    assert cascade_norms(sos, "linf")[0] == pytest.approx(np.max(np.abs(h)), rel=1e-6)


def test_sections_run_with_the_poles_nearest_the_unit_circle_last():
    near = [1.0, 0.0, 0.0, 1.0, *_denominator(100.0, 0.005)]
    far = [1.0, 0.0, 0.0, 1.0, -0.5, 0.1]
    mid = [1.0, 0.0, 0.0, 1.0, *_denominator(900.0, 0.2)]
    ordered = order_sections([near, far, mid])
    np.testing.assert_array_equal(ordered, [far, mid, near])


def _two_section_loop(gain=2.0e3):
    a1, a2 = _denominator(250.0, 0.02)
    resonant = [1.0, 0.0, -1.0, 1.0, a1, a2]
    lowpass = [0.2, 0.4, 0.2, 1.0, -0.6, 0.2]
    return ParallelForm(0.0, (Cascade(np.array([resonant, lowpass]), gain, "b"),))


def test_scaled_nodes_have_norm_one_and_the_loop_is_unchanged():
    form = _two_section_loop()
    for norm in ("linf", "l2"):
        scaling = scale_form(form, input_full_scale=1e-3, norm=norm)
        (branch,) = scaling.branches
        np.testing.assert_allclose(branch.node_norms, 1.0, rtol=1e-9)
        # the resonant section runs last (Jackson's ordering)
        assert branch.sos[-1, 2] != 0.0 and branch.sos[0, 4] == -0.6
        freq = np.linspace(1.0, 4999.0, 777)
        want = form.response(freq, RATE)
        got = scaling.form().response(freq, RATE)
        np.testing.assert_allclose(got, want, rtol=1e-11, atol=1e-12 * np.max(np.abs(want)))


def test_default_range_drives_the_actuator_to_its_limit_at_the_worst_frequency():
    form = _two_section_loop()
    scaling = scale_form(form, output_limit=40.0)
    _, h = scipy.signal.freqz_sos(form.branches[0].sos, worN=2**18)
    peak = 2.0e3 * np.max(np.abs(h))
    assert scaling.input_full_scale == pytest.approx(40.0 / peak, rel=1e-4)
    assert scaling.peak_command == pytest.approx(40.0, rel=1e-12)
    # any signal: the L1 bound is below the sinusoid range
    assert 0 < scaling.input_range_any_signal <= scaling.input_full_scale


def test_rounding_noise_prediction_against_the_integer_routine():
    # the scaled sections, rounded to Q15, run bit-exactly on a full-scale uniform random
    # input; the error against the same (rounded) coefficients in floating point is the
    # rounding noise, predicted as Σ_k (q²/12) ‖(1/A_k) Π_{j>k} H_j‖₂² (Oppenheim & Schafer
    # 2010: in direct form I each rounding passes through its own section's recursion)
    form = _two_section_loop()
    scaling = scale_form(form, input_full_scale=1.0)
    (branch,) = scaling.branches
    sections = [quantize_section(row, RATE, fmt="q15") for row in branch.sos]
    rounded = np.array([s.sos for s in sections])
    rng = np.random.default_rng(7)
    n = 120_000
    x = rng.integers(-(2**15), 2**15, size=n)
    y = run_fixed(sections, x)
    ref = scipy.signal.sosfilt(rounded, x.astype(float))
    assert np.max(np.abs(y)) < 2**15 - 1  # scaled: no saturation on full-scale random input
    measured = np.std((y - ref)[1000:]) / 2**15
    gains = rounding_noise_gains(rounded)
    predicted = math.sqrt(np.sum(gains**2) * (2.0**-15) ** 2 / 12)
    # 120 000 samples: the variance estimate of coloured noise is good to a few %; 20 % margin
    assert measured == pytest.approx(predicted, rel=0.2)
    assert branch.noise_rms(16) == pytest.approx(
        abs(branch.output_scale) * math.sqrt(np.sum(branch.noise_gains**2) * 2.0**-30 / 12)
    )


def test_scaling_refuses_what_has_no_finite_scale():
    integrator = ParallelForm(0.0, (Cascade(np.array([[1.0, 0, 0, 1.0, -1.0, 0.0]]), 1.0),))
    with pytest.raises(UsageError, match="integrator"):
        scale_form(integrator, input_full_scale=1.0)
    with pytest.raises(UsageError, match="--input-range"):
        scale_form(_two_section_loop())
    with pytest.raises(UsageError, match="scaling must be one of"):
        scale_form(_two_section_loop(), input_full_scale=1.0, norm="l7")
    with pytest.raises(UsageError, match="positive finite"):
        scale_form(_two_section_loop(), input_full_scale=-1.0)
