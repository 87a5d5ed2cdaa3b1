"""Notebook tables: _repr_html_ and to_frame() show the values' own numbers; pandas optional."""

import sys

import numpy as np
import pytest
from sizingplants import stage_plant

from dampctl.analysis.assessment import assess
from dampctl.errors import MissingFeatureError
from dampctl.laws import dvf
from dampctl.sizing.size import size_pairs
from dampctl.testing import sdof_plant

pandas = pytest.importorskip("pandas")


@pytest.fixture(scope="module")
def plant():
    return stage_plant()


def test_plant_frame_and_html(plant):
    table = plant.to_frame()
    np.testing.assert_array_equal(table["freq_hz"].to_numpy(), plant.freqs_hz)
    np.testing.assert_array_equal(table["mode"].to_numpy(), np.arange(1, plant.n_modes + 1))
    text = plant._repr_html_()
    assert "<table>" in text and plant.fingerprint in text
    assert f"{plant.freqs_hz[0]:.4g}" in text
    assert plant.to_dict()["modes"][0]["freq_hz"] == plant.modes[0].freq_hz


def test_design_assessment_and_sizing_show_themselves(plant):
    design = dvf.design(plant, [plant.pairs[0].name])
    assert list(design.to_frame()["pair"]) == [plant.pairs[0].name]
    assert "DVF" in design._repr_html_() and "<table>" in design._repr_html_()
    result = assess(plant, design, samples=2)
    frame = result.to_frame()
    np.testing.assert_array_equal(frame["closed_damping"].to_numpy(),
                                  [m.closed_damping for m in result.modes])
    text = result._repr_html_()
    assert "margins" in text and "requirements" in text
    assert "phase_margin_deg" in text and f"{result.modes[0].closed_damping:.4g}" in text
    sizing = size_pairs(plant, law="dvf", max_pairs=1)
    assert list(sizing.to_frame()["pairs_used"]) == [r.pairs_used for r in sizing.rows]
    assert "SizingResult" in sizing._repr_html_()
    assert sizing.to_dict()["rows"][0]["pairs_used"] == 1


def test_to_frame_without_pandas_says_how_to_install_it(monkeypatch):
    monkeypatch.setitem(sys.modules, "pandas", None)  # import pandas now fails
    with pytest.raises(MissingFeatureError, match="pip install pandas"):
        sdof_plant(1.0, 1e4, 1.0).to_frame()
