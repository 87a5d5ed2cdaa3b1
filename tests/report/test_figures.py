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


@pytest.mark.parametrize(
    "plot", [plot_frf, plot_root_locus, plot_damping, plot_nyquist, plot_cumulative_rms]
)
def test_plots_draw_on_given_axes_and_return_artists(assessment, plot):
    from matplotlib.figure import Figure

    ax = Figure().add_subplot()
    drawn = plot(assessment, ax=ax)
    assert isinstance(drawn, Drawn) and drawn.ax is ax and drawn.artists


def test_nyquist_curve_is_the_loop(assessment):
    drawn = plot_nyquist(assessment)
    line = drawn.artists[0]
    np.testing.assert_allclose(line.get_xdata(), assessment.curves.loops[0].real)


def test_pngs_written_atomically_and_valid(tmp_path, assessment):
    paths = write_assessment_pngs(assessment, tmp_path / "figs")
    names = sorted(p.name for p in paths)
    assert names == sorted(_names(assessment))  # the names checked before rendering
    assert names == sorted(
        ["frf_xo.png", "root_locus.png", "damping.png", "nyquist_fv.png", "cumulative_rms_xo.png"]
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


def test_root_locus_view_holds_the_mode_branches_not_far_poles(assessment):
    drawn = plot_root_locus(assessment)
    left, right = drawn.ax.get_xlim()
    poles = assessment.curves.locus.poles.ravel()
    w_top = 2 * np.pi * assessment.modes[0].open_freq_hz
    branch = poles[(poles.imag > 0.02 * w_top) & (-poles.real < poles.imag)]
    assert left <= branch.real.min() and right > 0
    assert left > -0.6 * w_top or branch.real.min() < -0.5 * w_top
