"""Figures of an assessment: each plot returns its artists; PNGs are valid and written whole."""

from dataclasses import replace

import matplotlib.image
import numpy as np
import pytest

from dampctl.analysis.assessment import assess
from dampctl.design import Branch, Design, Loop
from dampctl.errors import OutputError
from dampctl.model.components import Disturbance, Output
from dampctl.report.figures import (
    Drawn,
    _names,
    plot_cumulative_rms,
    plot_damping,
    plot_frf,
    plot_nyquist,
    plot_root_locus,
    write_assessment_pngs,
)
from dampctl.testing import sdof_plant

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def assessment():
    plant = sdof_plant(2.0, 8e4, 8.0)
    plant = replace(
        plant,
        disturbances=(Disturbance("w", "x", 1e-2),),
        outputs=(Output("xo", "displacement", "x"),),
    )
    design = Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f",),
        sensors=("v",),
        target_modes=(1,),
        loops=(Loop("fv", "f", "v", 72.0, (Branch(gain=72.0),)),),
        pairs=("fv",),
    )
    return assess(plant, design, samples=4)


@pytest.mark.parametrize("plot", [plot_frf, plot_damping, plot_cumulative_rms])
def test_plots_draw_on_given_axes_and_return_artists(assessment, plot):
    from matplotlib.figure import Figure

    ax = Figure().add_subplot()
    drawn = plot(assessment, ax=ax)
    assert isinstance(drawn, Drawn) and drawn.ax is ax and drawn.artists


@pytest.mark.parametrize("plot", [plot_frf, plot_root_locus, plot_nyquist])
def test_two_panel_plots_draw_on_a_given_pair(assessment, plot):
    from matplotlib.figure import Figure

    figure = Figure()
    pair = tuple(figure.subplots(1, 2))
    drawn = plot(assessment, ax=pair)
    assert drawn.ax == pair and drawn.figure is figure and drawn.artists


def test_frf_phase_is_the_phase_of_the_kept_frf(assessment):
    drawn = plot_frf(assessment)
    mag, ph = drawn.ax
    c = assessment.curves
    closed_phase = drawn.artists[3]
    f = closed_phase.get_xdata()
    h = c.frf_closed_h[0, 0, np.isin(c.freq_hz, f)]
    # same angle modulo 360 degrees: the figure only unwraps it
    diff = np.angle(np.exp(1j * (np.radians(closed_phase.get_ydata()) - np.angle(h))))
    np.testing.assert_allclose(diff, 0.0, atol=1e-9)
    assert "disturbance w" in mag.get_title() and "output xo" in mag.get_title()
    assert ph.get_ylabel() == "phase (deg)" and "(m/N)" in mag.get_ylabel()


def test_nyquist_curve_is_the_loop(assessment):
    drawn = plot_nyquist(assessment)
    line = drawn.artists[0]
    np.testing.assert_allclose(line.get_xdata(), assessment.curves.loops[0].real)
    zoom = drawn.ax[1]
    left, right = zoom.get_xlim()
    assert left < -1.0 < right and right - left < 3.0  # the second panel is zoomed on -1


def test_pngs_written_atomically_and_valid(tmp_path, assessment):
    paths = write_assessment_pngs(assessment, tmp_path / "figs")
    names = sorted(p.name for p in paths)
    assert names == sorted(_names(assessment))  # the names checked before rendering
    assert names == sorted(
        ["frf_xo.png", "root_locus.png", "damping.png", "nyquist_fv.png", "cumulative_rms_xo.png",
         "loop_gain_fv.png", "sensitivity_fv.png"]
    )
    for path in paths:
        data = path.read_bytes()
        assert data.startswith(PNG_SIGNATURE)
        image = matplotlib.image.imread(path)
        assert image.shape[0] > 100 and image.shape[1] > 100
    with pytest.raises(OutputError, match="already exists"):
        write_assessment_pngs(assessment, tmp_path / "figs")


def test_cumulative_rms_reads_in_prefixed_units(assessment):
    drawn = plot_cumulative_rms(assessment)
    o = assessment.response.outputs[0]
    label = drawn.ax.get_ylabel()
    scale = {"cumulative RMS (nm)": 1e-9, "cumulative RMS (µm)": 1e-6,
             "cumulative RMS (mm)": 1e-3, "cumulative RMS (m)": 1.0}[label]  # fmt: skip
    np.testing.assert_allclose(drawn.artists[0].get_ydata(), o.cumulative_open / scale)
    assert 1.0 <= o.open_rms / scale < 1000.0 or scale in (1e-9, 1.0)


def test_damping_ticks_have_no_exponents(assessment):
    drawn = plot_damping(assessment)
    labels = [t.get_text() for t in drawn.ax.get_xticklabels()]
    assert labels and all("e+" not in t and "Hz" in t for t in labels)


def test_svg_and_pdf_figures(tmp_path, assessment):
    paths = write_assessment_pngs(assessment, tmp_path / "svg", figure_format="svg")
    assert paths and all(p.suffix == ".svg" for p in paths)
    assert all(b"<svg" in p.read_bytes()[:400] for p in paths)
    paths = write_assessment_pngs(assessment, tmp_path / "pdf", figure_format="pdf")
    assert all(p.read_bytes().startswith(b"%PDF") for p in paths)


def test_root_locus_view_holds_the_mode_branches_not_far_poles(assessment):
    drawn = plot_root_locus(assessment)
    left, right = drawn.ax[0].get_xlim()
    poles = assessment.curves.locus.poles.ravel()
    w_top = 2 * np.pi * assessment.modes[0].open_freq_hz
    branch = poles[(poles.imag > 0.02 * w_top) & (-poles.real < poles.imag)]
    assert left <= branch.real.min() and right > 0
    assert left > -0.6 * w_top or branch.real.min() < -0.5 * w_top
