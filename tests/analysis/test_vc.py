"""VC curves and one-third-octave bands against the published criterion table (Gordon, Proc. SPIE
1619, 1991; IEST-RP-CC012)."""

import numpy as np
import pytest

from dampctl.analysis.vc import (
    NOMINAL_CENTRES_HZ,
    VC_CURVES,
    band_edges_hz,
    band_rms,
    third_octave_centres_hz,
    vc_rating,
)

# Generic vibration criteria, rms velocity in one-third-octave bands, 1–80 Hz (C. G. Gordon,
# "Generic criteria for vibration-sensitive equipment", Proc. SPIE 1619, 1991; E. E. Ungar,
# D. H. Sturz, C. H. Amick, Sound and Vibration 24(7), 1990; ASHRAE TC 2.6 table), in µm/s.
TABLE_UM_S = {
    "Workshop": 800,
    "Office": 400,
    "Residential day": 200,
    "Operating theatre": 100,
    "VC-A": 50,
    "VC-B": 25,
    "VC-C": 12.5,
    "VC-D": 6.25,
    "VC-E": 3.12,
    "VC-F": 1.56,
    "VC-G": 0.78,
}
# the same levels in dB re 1e-8 m/s and in µin/s (Ungar's factor-of-two progression)
TABLE_DB = {
    "VC-A": 74.0,
    "VC-B": 68.0,
    "VC-C": 61.9,
    "VC-D": 55.9,
    "VC-E": 49.9,
    "VC-F": 43.9,
    "VC-G": 37.9,
}
TABLE_UIN_S = {"VC-A": 2000, "VC-B": 1000, "VC-C": 500, "VC-D": 250, "VC-E": 125}


def test_curves_reproduce_the_criterion_table():
    # printed values are rounded to three figures (VC-E 3.12 for 3.125)
    assert {name: level * 1e6 for name, level in VC_CURVES} == pytest.approx(TABLE_UM_S, rel=2e-3)
    levels = dict(VC_CURVES)
    for name, db in TABLE_DB.items():
        assert 20 * np.log10(levels[name] / 1e-8) == pytest.approx(db, abs=0.05)
    for name, uin in TABLE_UIN_S.items():
        # 1 µin/s = 0.0254 µm/s; metric values are rounded nominal values (within 2 %)
        assert levels[name] == pytest.approx(uin * 0.0254e-6, rel=0.02)
    # each letter halves the level (6 dB)
    values = [v for _, v in VC_CURVES]
    assert np.allclose(np.array(values[:-1]) / np.array(values[1:]), 2.0, rtol=0.01)


def test_band_centres_and_edges_iec_61260_base_10():
    # IEC 61260 / ANSI S1.11 (from memory): exact centres 10^(n/10), edges f_c·10^(∓1/20);
    # the 10 Hz band runs from 8.913 to 11.220 Hz.
    centres = third_octave_centres_hz()
    assert centres.size == 20
    assert np.allclose(centres, NOMINAL_CENTRES_HZ, rtol=0.03)
    edges = band_edges_hz(centres)
    k = int(np.argmin(np.abs(centres - 10.0)))
    assert edges[k] == pytest.approx([8.913, 11.220], abs=1e-3)
    np.testing.assert_allclose(edges[1:, 0], edges[:-1, 1], rtol=1e-12)  # contiguous


def test_band_rms_of_flat_psd():
    f = np.geomspace(0.5, 100, 20001)
    edges = band_edges_hz(third_octave_centres_hz())
    f = np.unique(np.concatenate([f, edges.ravel()]))
    rms = band_rms(f, np.full(f.size, 4e-12), edges)
    np.testing.assert_allclose(rms, np.sqrt(4e-12 * (edges[:, 1] - edges[:, 0])), rtol=1e-9)


@pytest.mark.parametrize("index", range(len(VC_CURVES)))
def test_classification_at_and_just_above_each_level(index):
    centres = third_octave_centres_hz()
    name, level = VC_CURVES[index]
    spectrum = np.full(20, level * 0.5)
    spectrum[7] = level  # the worst band sits exactly on the curve: it is met
    rating = vc_rating(spectrum, centres)
    assert rating.curve == name
    assert rating.worst_band_hz == 5.0
    spectrum[7] = level * 1.001  # just above: the next less stringent curve
    above = vc_rating(spectrum, centres)
    assert above.curve == (VC_CURVES[index - 1][0] if index else None)
