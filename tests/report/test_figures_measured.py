"""Figures of a modal fit and of a plant against measurement: what is drawn, and the PNGs."""

import numpy as np
import pytest
from measuredplants import SITES, four_mode_plant, noisy_four_mode_frf

from dampctl.model.comparison import compare_plant
from dampctl.model.measured import MeasuredFRF
from dampctl.model.modalfit import fit_modes
from dampctl.report.figures_measured import (
    comparison_pngs,
    fit_pngs,
    plot_frf_match,
    plot_stability_chart,
)

PNG = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def fit():
    freq, h = noisy_four_mode_frf(41, np.linspace(60.0, 800.0, 741))
    return fit_modes(freq, h, output_kinds="acceleration", outputs=SITES, inputs=["hammer"],
                     driving_points=["p0/hammer"], order=9)


def test_stability_chart_draws_every_pole_once(fit):
    drawn = plot_stability_chart(fit)
    groups = drawn.artists[:4]
    total = sum(len(line.get_xdata()) for line in groups)
    assert total == sum(e.poles.size for e in fit.chart.orders)
    full = groups[3]
    assert len(full.get_xdata()) == sum(
        int(np.sum(e.freq_stable & e.damping_stable & e.shape_stable)) for e in fit.chart.orders)
    lines = drawn.artists[4:4 + fit.n_modes]  # one vertical line per chosen mode
    np.testing.assert_allclose([line.get_xdata()[0] for line in lines], fit.freqs_hz)
    assert len(drawn.artists) == 4 + fit.n_modes + 1  # and the summed magnitude
    assert drawn.ax.get_ylabel() == "model order (pole pairs)"


def test_frf_match_draws_magnitude_and_phase():
    f = np.linspace(1.0, 10.0, 20)
    h = 1 / (1j * f + 1)
    drawn = plot_frf_match(f, h, 1.01 * h, unit="m/N", title="a/b")
    mag, phase = drawn.ax
    np.testing.assert_allclose(drawn.artists[0].get_ydata(), np.abs(h))
    np.testing.assert_allclose(drawn.artists[3].get_ydata(), np.degrees(np.angle(1.01 * h)))
    assert mag.get_title() == "a/b" and phase.get_ylabel() == "phase (deg)"


def test_pngs_of_a_fit_and_a_comparison(fit):
    files = fit_pngs(fit)
    assert sorted(files) == sorted(["stability_chart.png"]
                                   + [f"fit_{s}_hammer.png" for s in SITES])
    assert all(png.startswith(PNG) for png in files.values())
    m = fit.measured
    comparison = compare_plant(four_mode_plant(), MeasuredFRF(
        m.freq_hz, m.frf, m.outputs, m.inputs, m.output_kinds))
    files = comparison_pngs(comparison)
    assert sorted(files) == sorted(f"measured_{s}_hammer.png" for s in SITES)
    assert all(png.startswith(PNG) for png in files.values())
