"""Fixed-point rounding of second-order sections.

References: A. V. Oppenheim & R. W. Schafer, *Discrete-Time Signal Processing* (3rd ed. 2010),
coefficient quantization and pole sensitivity of direct vs cascade forms [from memory]; the
worked numbers (f₀ = 100 Hz, ζ = 0.01, f_s = 10 kHz; the 4th-order counter-example) are
computed from their pole-sensitivity formulas; scipy ``sosfilt`` is the independent reference
for the integer routine.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from dampctl.discrete.fixedpoint import quantize_section, run_fixed, section_poles
from dampctl.errors import UsageError

RATE = 10e3
T = 1 / RATE


def _denominator(freq_hz, damping):
    w = 2 * np.pi * freq_hz
    p = np.exp((-damping * w + 1j * w * np.sqrt(1 - damping**2)) * T)
    return -2 * p.real, abs(p) ** 2


def test_q15_rounding_of_a_lightly_damped_low_frequency_pair():
    a1, a2 = _denominator(100.0, 0.01)
    assert a1 == pytest.approx(-1.99480009, abs=1e-8)
    assert a2 == pytest.approx(0.99874415, abs=1e-8)
    # both in Q1.14 (one format for the denominator): the pole moves to 99.5199 Hz, ζ 0.010256
    common = section_poles(-1.9948120117, 0.9987182617, RATE)
    assert common.freq_hz == pytest.approx(99.5199, abs=1e-4)
    assert common.damping == pytest.approx(0.010256, abs=1e-6)
    # dampctl stores a1 in Q1.14 (|a1| close to 2) and a2 = r² < 1 in Q15, which halves the
    # radius error (∂r/∂a2 = 1/(2r), Oppenheim & Schafer 2010): 99.9073 Hz, ζ 0.009972
    q = quantize_section([1.0, 0.0, 0.0, 1.0, a1, a2], RATE, fmt="q15")
    assert (q.word_bits, q.a1_frac_bits, q.a2_frac_bits) == (16, 14, 15)
    assert q.sos[4] == pytest.approx(-1.9948120117, abs=1e-10)
    assert q.sos[5] == pytest.approx(0.9987487793, abs=1e-10)
    assert q.after.freq_hz == pytest.approx(99.9073, abs=1e-4)
    assert q.after.damping == pytest.approx(0.009972, abs=1e-6)
    assert q.frequency_change == pytest.approx(-0.000927, abs=2e-6)
    assert q.accepted  # −0.09 % in frequency, −0.3 % in damping: inside 0.2 % and 5 %


def test_q31_rounding_example_of_references_11():
    a1, a2 = _denominator(100.0, 0.01)
    q = quantize_section([1.0, 0.0, 0.0, 1.0, a1, a2], RATE, fmt="q31")
    assert (q.word_bits, q.num_frac_bits, q.a1_frac_bits, q.a2_frac_bits) == (32, 30, 30, 30)
    assert q.sos[4] == pytest.approx(-1.9948000880, abs=1e-10)
    assert q.sos[5] == pytest.approx(0.9987441525, abs=1e-10)
    assert q.after.radius - q.before.radius == pytest.approx(1.6e-10, abs=0.1e-10)
    assert q.after.freq_hz == pytest.approx(100.0, abs=1e-6)
    assert q.after.damping == pytest.approx(0.010000, abs=1e-6)


def test_fourth_order_direct_form_goes_unstable_while_biquads_stay_stable():
    # direct form vs sections (Oppenheim & Schafer 2010), computed: poles at 100 and 110 Hz, ζ =
    # 0.01, f_s = 10 kHz
    d1, d2 = _denominator(100.0, 0.01), _denominator(110.0, 0.01)
    den = np.polymul([1.0, *d1], [1.0, *d2])
    np.testing.assert_allclose(
        den, [1, -3.98864705, 5.97468891, -3.98338758, 0.99736454], atol=1e-8
    )
    direct = np.round(den * 2**12) / 2**12  # Q3.12 to hold |a| < 8
    radii = np.sort(np.abs(np.roots(direct)))[::-1]
    np.testing.assert_allclose(radii, [1.0119, 1.0119, 1.0000, 0.9741], atol=1e-4)
    # the same poles as two biquads with a1, a2 both in Q1.14 keep |z| = 0.999359, 0.999298
    common = [np.round(np.array(d) * 2**14) / 2**14 for d in (d1, d2)]
    radii_common = [np.max(np.abs(np.roots([1.0, *d]))) for d in common]
    assert radii_common == pytest.approx([0.999359, 0.999298], abs=1e-6)
    # dampctl's biquads (a2 in Q15) are stable too, and closer to the exact radii
    biquads = [quantize_section([1, 0, 0, 1, *d], RATE, fmt="q15") for d in (d1, d2)]
    assert [q.stable for q in biquads] == [True, True]
    exact = [np.sqrt(d[1]) for d in (d1, d2)]
    for q, r, rc in zip(biquads, exact, radii_common, strict=True):
        assert abs(q.after.radius - r) < abs(rc - r)


def test_oversensitive_low_frequency_section_is_refused_with_its_name():
    a1, a2 = _denominator(10.0, 0.01)  # θ = ωT tiny: ∂θ/∂a1 = 1/(2 r sin θ) ≈ 80
    q = quantize_section([1, 0, 0, 1, a1, a2], RATE, fmt="q15", label="loop p1, section 2")
    assert not q.accepted
    assert q.reason.startswith("loop p1, section 2: pole frequency moves by")
    assert quantize_section([1, 0, 0, 1, a1, a2], RATE, fmt="q31").accepted


def test_each_coefficient_gets_the_most_fraction_bits_that_fit():
    q = quantize_section([0.25, 0.5, 0.25, 1.0, -0.4, 0.2], RATE, fmt="q15")
    assert (q.num_frac_bits, q.a1_frac_bits, q.a2_frac_bits, q.frac_bits) == (15, 15, 15, 15)
    q = quantize_section([0.25, 0.5, 0.25, 1.0, -1.2, 0.5], RATE, fmt="q15")
    assert q.a1_frac_bits == 14 and q.integers[3] == round(-1.2 * 2**14)
    # a small (scaled) numerator keeps its precision: 2.5e-4 gets 25 fraction bits, not 2
    # counts of Q1.14
    q = quantize_section([2.5e-4, 5e-4, 2.5e-4, 1.0, -1.2, 0.5], RATE, fmt="q15")
    assert q.num_frac_bits == 25 and q.integers[1] == round(5e-4 * 2**25)
    assert q.frac_bits == 25  # the accumulator works at the finest of the three
    with pytest.raises(UsageError, match="one of q15, q31"):
        quantize_section([1, 0, 0, 1, 0, 0], RATE, fmt="q7")


def test_integer_routine_matches_sosfilt_within_rounding_bound():
    # a resonant section (200 Hz, ζ = 0.05) and a low-pass, with headroom for the impulse
    a1, a2 = _denominator(200.0, 0.05)
    sos = np.array([[0.01, 0.0, -0.01, 1.0, a1, a2], [0.25, 0.5, 0.25, 1.0, -0.6, 0.3]])
    sections = [quantize_section(row, RATE, fmt="q15") for row in sos]
    x = np.zeros(600, dtype=np.int64)
    x[0] = 30000
    y = run_fixed(sections, x)
    ref = scipy.signal.sosfilt(np.array([s.sos for s in sections]), x.astype(float))
    # each section rounds its output once (error ≤ 1/2 LSB), seen through its own recursion and
    # the following sections: bound = ½ Σ_k ‖h_k‖₁ with h_k = (1/A_k) Π_{j>k} H_j
    bound = 0.0
    imp = np.zeros(4000)
    imp[0] = 1.0
    for k in range(len(sections)):
        tail = [[1.0, 0, 0, *sections[k].sos[3:]]] + [list(s.sos) for s in sections[k + 1 :]]
        bound += 0.5 * np.sum(np.abs(scipy.signal.sosfilt(np.array(tail), imp)))
    assert np.max(np.abs(ref)) < 2**15 - 1  # no saturation in this test
    err = np.max(np.abs(y - ref))
    assert err <= bound
    assert err > 0  # rounding is really happening


def test_peak_gains_agree_with_scipy_freqz_sos():
    from dampctl.discrete.fixedpoint import cascade_peak_gains

    a1, a2 = _denominator(300.0, 0.02)
    sos = np.array([[0.02, 0.0, -0.02, 1.0, a1, a2], [0.25, 0.5, 0.25, 1.0, -0.6, 0.3]])
    peaks = cascade_peak_gains(sos, RATE)
    # scipy evaluates the same products on its own dense grid
    _, h1 = scipy.signal.freqz_sos(sos[:1], worN=2**18)
    _, h2 = scipy.signal.freqz_sos(sos, worN=2**18)
    np.testing.assert_allclose(peaks, [np.max(np.abs(h1)), np.max(np.abs(h2))], rtol=1e-4)
