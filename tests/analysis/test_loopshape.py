"""Loop shapes: |S| and |T| against python-control's feedback of the same frequency data;
margins placed on the curves are the margins module's numbers."""

import control
import numpy as np
import pytest
from loopplants import loop_assessment

from dampctl.analysis.loopshape import damping_rays, locus_hz, loop_shape, pole_damping


@pytest.fixture(scope="module")
def assessment():
    return loop_assessment()


def test_sensitivities_match_python_control_feedback_of_the_frd(assessment):
    shape = loop_shape(assessment, 0)
    omega = 2 * np.pi * assessment.curves.freq_hz
    L = control.frd(assessment.curves.loops[0], omega)
    # python-control: feedback(G1, G2) = G1 / (1 + G1 G2)
    S = control.feedback(control.frd(np.ones(omega.size), omega), L)
    T = control.feedback(L, control.frd(np.ones(omega.size), omega))
    np.testing.assert_allclose(shape.sensitivity_db, 20 * np.log10(np.abs(S.frdata[0, 0])),
                               atol=1e-9)
    np.testing.assert_allclose(shape.complementary_db, 20 * np.log10(np.abs(T.frdata[0, 0])),
                               atol=1e-9)


def test_marks_are_the_margins_of_the_margins_module(assessment):
    shape = loop_shape(assessment, 0)
    margins = assessment.loops[0]
    assert np.isfinite(margins.gain_margin_db) and np.isfinite(margins.phase_margin_deg)
    assert [f for f, _ in shape.gain_crossovers] == list(margins.crossovers_hz)
    f_c, phase, base = shape.margin_crossover
    assert f_c == margins.crossover_hz
    assert phase - base == pytest.approx(margins.phase_margin_deg)
    assert (base + 180.0) % 360.0 == pytest.approx(0.0, abs=1.0)  # measured from a -180 line
    # the phase crossover that sets the gain margin, read off the drawn |L| curve
    levels = [-level for _, level in shape.phase_crossovers]
    assert min(abs(g - margins.gain_margin_db) for g in levels) < 0.05


def test_locus_in_hz_and_damping_rays():
    zeta, wn = 0.05, 2 * np.pi * 100.0
    pole = complex(-zeta * wn, wn * np.sqrt(1 - zeta**2))
    real, imag_hz = locus_hz(np.array([pole]))
    assert imag_hz[0] == pytest.approx(100.0 * np.sqrt(1 - zeta**2))
    z, fn = pole_damping(np.array([pole]))
    assert z[0] == pytest.approx(zeta) and fn[0] == pytest.approx(100.0)
    x, y = damping_rays((zeta,), 200.0)[zeta]
    # the pole lies on its damping ratio's ray
    assert np.interp(imag_hz[0], y, x) == pytest.approx(real[0])
    with pytest.raises(ValueError, match="damping ratio"):
        damping_rays((1.0,), 100.0)
