"""Loop figures draw the loop shape's numbers: crossovers and margins where the margins are."""

import numpy as np
import pytest
from loopplants import loop_assessment

from dampctl.analysis.loopshape import loop_shape
from dampctl.report.figures_loop import plot_loop_gain, plot_loop_sensitivity, plot_root_locus
from dampctl.report.style import AMBER, SERIES


@pytest.fixture(scope="module")
def assessment():
    return loop_assessment()


def test_bode_marks_the_margins_module_crossovers(assessment):
    drawn = plot_loop_gain(assessment)
    mag, ph = drawn.ax
    margins = assessment.loops[0]
    marks = [line for line in mag.get_lines() if line.get_color() == AMBER]
    assert sorted(float(m.get_xdata()[0]) for m in marks) == sorted(margins.crossovers_hz)
    assert all(float(m.get_ydata()[0]) == 0.0 for m in marks)
    text = "\n".join(t.get_text() for t in mag.texts)
    assert f"phase margin {margins.phase_margin_deg:.0f}°" in text
    assert f"gain margin {margins.gain_margin_db:.1f} dB" in text
    assert ph.get_ylabel() == "arg L (deg)" and mag.get_ylabel() == "|L| (dB)"


def test_sensitivity_figure_draws_s_and_t(assessment):
    drawn = plot_loop_sensitivity(assessment)
    shape = loop_shape(assessment, 0)
    s_line = drawn.artists[0]
    f = s_line.get_xdata()
    np.testing.assert_allclose(s_line.get_ydata(),
                               shape.sensitivity_db[np.isin(shape.freq_hz, f)])


def test_root_locus_imaginary_axis_in_hz(assessment):
    drawn = plot_root_locus(assessment)
    plane, spread = drawn.ax
    assert "Hz" in plane.get_ylabel() and spread.get_xscale() == "log"
    poles = assessment.curves.locus.poles
    design = poles[int(np.argmin(np.abs(assessment.curves.locus.gains - 1.0)))]
    cross = drawn.artists[2]  # the design poles on the s-plane
    np.testing.assert_allclose(np.sort(cross.get_offsets()[:, 1]),
                               np.sort(design[design.imag >= 0].imag / (2 * np.pi))[
                                   : len(cross.get_offsets())], rtol=1e-12)


def test_one_palette():
    assert len(set(SERIES)) == 6
