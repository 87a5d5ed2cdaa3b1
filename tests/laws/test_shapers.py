"""Input shapers against their published closed forms (Singer & Seering, ASME J. Dyn. Syst.
Meas. Control 112(1), 1990; Singhose, Seering & Singer, ASME J. Mech. Des. 116(2), 1994)."""

import json
import math

import numpy as np
import pytest

from dampctl.errors import UsageError
from dampctl.laws.shapers import (
    Shaper,
    ShaperFileError,
    convolve,
    insensitivity_band,
    load_shaper,
    residual_vibration,
    shaper_for_mode,
    shaper_from_dict,
)

F, ZETA = 10.0, 0.05  # the worked case: ω_d = 62.753264 rad/s, T_d = 0.100125 s, K = 0.854468


def test_zv_and_zvd_amplitudes_and_times():
    # Singer & Seering 1990: K = exp(−ζπ/√(1−ζ²)); ZV [1, K]/(1+K) at [0, T_d/2]; ZVD
    # [1, 2K, K²]/(1+K)² at [0, T_d/2, T_d].
    k = math.exp(-ZETA * math.pi / math.sqrt(1 - ZETA**2))
    t_d = 2 * math.pi / (2 * math.pi * F * math.sqrt(1 - ZETA**2))
    assert k == pytest.approx(0.854468, abs=1e-6)
    assert t_d == pytest.approx(0.100125, abs=1e-6)
    zv = shaper_for_mode(F, ZETA, "zv")
    np.testing.assert_allclose(zv.amplitudes, np.array([1, k]) / (1 + k), rtol=1e-12)
    np.testing.assert_allclose(zv.times_s, [0, t_d / 2], rtol=1e-12)
    np.testing.assert_allclose(zv.amplitudes, [0.539238, 0.460762], atol=1e-6)
    zvd = shaper_for_mode(F, ZETA, "zvd")
    np.testing.assert_allclose(zvd.amplitudes, np.array([1, 2 * k, k * k]) / (1 + k) ** 2,
                               rtol=1e-12)
    np.testing.assert_allclose(zvd.times_s, [0, t_d / 2, t_d], rtol=1e-12)
    np.testing.assert_allclose(zvd.amplitudes, [0.290778, 0.496921, 0.212301], atol=1e-6)
    assert zvd.duration_s == pytest.approx(t_d, rel=1e-12)


def test_zvd_and_zvdd_are_repeated_zv():
    # ZVD = ZV * ZV and ZVDD = ZV * ZV * ZV (the derivative constraints of Singer & Seering 1990
    # give the binomial amplitudes of repeated ZV convolution)
    zv = shaper_for_mode(F, ZETA, "zv")
    twice = convolve(zv, zv)
    zvd = shaper_for_mode(F, ZETA, "zvd")
    np.testing.assert_allclose(twice.times_s, zvd.times_s, rtol=1e-12)
    np.testing.assert_allclose(twice.amplitudes, zvd.amplitudes, rtol=1e-12)
    thrice = convolve(twice, zv)
    zvdd = shaper_for_mode(F, ZETA, "zvdd")
    np.testing.assert_allclose(thrice.amplitudes, zvdd.amplitudes, rtol=1e-12)
    np.testing.assert_allclose(thrice.times_s, zvdd.times_s, rtol=1e-12)


def test_residual_vibration_formula():
    # V = e^{−ζω t_N} √(C² + S²) (Singer & Seering 1990): zero at the design frequency; the
    # values at ±10 % frequency error computed from the formula with numpy (10 Hz, ζ = 0.05):
    # ZV 0.1455 / 0.1432, ZVD 0.0212 / 0.0205 at 9 / 11 Hz.
    zv, zvd = shaper_for_mode(F, ZETA, "zv"), shaper_for_mode(F, ZETA, "zvd")
    assert zv.residual(F, ZETA) < 1e-12 and zvd.residual(F, ZETA) < 1e-12
    np.testing.assert_allclose(zv.residual([9.0, 11.0], ZETA), [0.1455, 0.1432], atol=1e-4)
    np.testing.assert_allclose(zvd.residual([9.0, 11.0], ZETA), [0.0212, 0.0205], atol=1e-4)
    # written out term by term, C and S as in the paper
    w = 2 * math.pi * 9.0
    wd = w * math.sqrt(1 - ZETA**2)
    t, a = zv.times_s, zv.amplitudes
    c = np.sum(a * np.exp(ZETA * w * t) * np.cos(wd * t))
    s = np.sum(a * np.exp(ZETA * w * t) * np.sin(wd * t))
    assert residual_vibration(t, a, 9.0, ZETA) == pytest.approx(
        math.exp(-ZETA * w * t[-1]) * math.hypot(c, s), rel=1e-13
    )
    assert residual_vibration([0.0], [1.0], 9.0, ZETA) == pytest.approx(1.0)


def test_residual_is_the_ratio_of_ringing_amplitudes():
    # Superposing the SDOF impulse responses h(t) = e^{−ζωt} sin(ω_d t)/ω_d of the impulses: the
    # ringing after the last impulse is V times that of one unit impulse at t_N.
    zv = shaper_for_mode(F, ZETA, "zv")
    w = 2 * math.pi * 9.3
    wd = w * math.sqrt(1 - ZETA**2)
    t = zv.duration_s + np.linspace(0, 0.3, 3001)

    def h(tau):
        return np.where(tau >= 0, np.exp(-ZETA * w * tau) * np.sin(wd * tau) / wd, 0.0)

    shaped = sum(a * h(t - ti) for ti, a in zip(zv.times_s, zv.amplitudes, strict=True))
    single = h(t - zv.duration_s)
    # envelope ratio: compare the amplitudes of the two damped sinusoids by least squares
    basis = np.column_stack([np.exp(-ZETA * w * t) * np.cos(wd * t),
                             np.exp(-ZETA * w * t) * np.sin(wd * t)])
    amp_shaped = np.linalg.norm(np.linalg.lstsq(basis, shaped, rcond=None)[0])
    amp_single = np.linalg.norm(np.linalg.lstsq(basis, single, rcond=None)[0])
    assert amp_shaped / amp_single == pytest.approx(float(zv.residual(9.3, ZETA)), rel=1e-9)


def test_undamped_insensitivity_widths():
    # Undamped, V_ZV = |cos(πω/2ω_m)| and V_ZVD = its square: the band where V ≤ 5 % is
    # 0.0637 (ZV) and 0.287 (ZVD) of ω_m wide (from those closed forms).
    lo, hi = insensitivity_band(shaper_for_mode(1.0, 0.0, "zv"), 1.0, 0.0)
    assert hi - lo == pytest.approx(4 * math.asin(0.05) / math.pi, rel=1e-8)
    assert hi - lo == pytest.approx(0.0637, abs=1e-4)
    lo, hi = insensitivity_band(shaper_for_mode(1.0, 0.0, "zvd"), 1.0, 0.0)
    assert hi - lo == pytest.approx(4 * math.asin(math.sqrt(0.05)) / math.pi, rel=1e-8)
    assert hi - lo == pytest.approx(0.287, abs=1e-3)


def test_ei_undamped_closed_form():
    # Singhose, Seering & Singer 1994: [(1+V)/4, (1−V)/2, (1+V)/4] at [0, T/2, T]
    for v in (0.02, 0.05, 0.1):
        ei = shaper_for_mode(20.0, 0.0, "ei", tolerance=v)
        np.testing.assert_allclose(ei.amplitudes, [(1 + v) / 4, (1 - v) / 2, (1 + v) / 4],
                                   rtol=1e-12)
        np.testing.assert_allclose(ei.times_s, [0, 0.025, 0.05], rtol=1e-12)
        assert ei.residual(20.0, 0.0) == pytest.approx(v, rel=1e-12)


@pytest.mark.parametrize("zeta", [0.01, 0.05, 0.1, 0.2])
def test_ei_damped_meets_its_conditions(zeta):
    # The damped EI is solved from its defining conditions: V = V_tol and a local maximum at the
    # design frequency, zero residual below and above it, amplitudes summing to 1.
    v = 0.05
    ei = shaper_for_mode(50.0, zeta, "ei", tolerance=v)
    assert float(np.sum(ei.amplitudes)) == pytest.approx(1.0, abs=1e-12)
    assert ei.residual(50.0, zeta) == pytest.approx(v, abs=1e-9)
    ratios = np.linspace(0.6, 1.4, 80001)
    curve = ei.residual(50.0 * ratios, zeta)
    centre = np.argmin(np.abs(ratios - 1.0))
    assert np.all(curve[centre - 50 : centre + 51] <= v + 1e-9)  # a maximum at the centre
    below, above = curve[ratios < 1.0], curve[ratios > 1.0]
    assert np.min(below) < 1e-4 and np.min(above) < 1e-4  # (near) zeros either side
    # the design extends the 5 % band beyond the ZVD's at the same damping
    ei_band = insensitivity_band(ei, 50.0, zeta)
    zvd_band = insensitivity_band(shaper_for_mode(50.0, zeta, "zvd"), 50.0, zeta)
    assert ei_band[1] - ei_band[0] > zvd_band[1] - zvd_band[0]


def test_ei_damped_amplitudes_match_the_published_fit():
    # Curve fit of the damped EI amplitudes (W. Singhose, "Command shaping for flexible systems:
    # a review of the first 50 years", Int. J. Precision Eng. Manuf. 10(4), 2009; from memory):
    # A1 = 0.24968 + 0.24961V + 0.80008ζ + 1.23328Vζ + 0.49599ζ² + 3.17316Vζ²,
    # A3 = 0.25149 + 0.21474V − 0.83249ζ + 1.41498Vζ + 0.85181ζ² − 4.90094Vζ².
    v = 0.05
    for zeta in (0.05, 0.1):
        ei = shaper_for_mode(1.0, zeta, "ei", tolerance=v)
        a1 = 0.24968 + 0.24961 * v + 0.80008 * zeta + 1.23328 * v * zeta + 0.49599 * zeta**2 \
            + 3.17316 * v * zeta**2
        a3 = 0.25149 + 0.21474 * v - 0.83249 * zeta + 1.41498 * v * zeta + 0.85181 * zeta**2 \
            - 4.90094 * v * zeta**2
        assert ei.amplitudes[0] == pytest.approx(a1, abs=1e-3)
        assert ei.amplitudes[2] == pytest.approx(a3, abs=1e-3)


def test_convolved_residual_is_the_product():
    a = shaper_for_mode(10.0, 0.02, "zvd")
    b = shaper_for_mode(37.0, 0.01, "zvd")
    both = convolve(a, b)
    freqs = np.linspace(5, 50, 91)
    np.testing.assert_allclose(both.residual(freqs, 0.03),
                               a.residual(freqs, 0.03) * b.residual(freqs, 0.03), rtol=1e-9,
                               atol=1e-15)
    assert both.modes_hz == (10.0, 37.0)
    assert both.residual(10.0, 0.02) < 1e-12 and both.residual(37.0, 0.01) < 1e-12
    assert both.duration_s == pytest.approx(a.duration_s + b.duration_s)


def test_shaper_file_round_trip(tmp_path):
    shaper = convolve(shaper_for_mode(10.0, 0.02, "zv", mode=2),
                      shaper_for_mode(30.0, 0.01, "zv", mode=5))
    data = shaper.to_dict()
    assert list(data)[:6] == ["format", "version", "kind", "modes_hz", "impulses", "duration_s"]
    assert data["format"] == "dampctl-shaper"
    assert set(data["impulses"][0]) == {"time_s", "amplitude"}
    path = tmp_path / "shaper.json"
    path.write_text(shaper.to_json())
    back = load_shaper(path)
    np.testing.assert_array_equal(back.times_s, shaper.times_s)
    np.testing.assert_array_equal(back.amplitudes, shaper.amplitudes)
    assert back.modes == (2, 5) and back.kind == "zv"


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"format": "dampctl-design"}, "format"),
        ({"colour": 1}, "unknown key 'colour'"),
        ({"duration_s": 1.0}, "duration_s: must equal the last impulse time"),
        ({"kind": "fancy"}, "kind: must be one of"),
        ({"impulses": [{"time_s": 0.0, "amplitude": 0.5}], "duration_s": 0.0}, "sum to 1"),
        ({"impulses": [{"time_s": 0.0}]}, r"impulses\[1\]"),
        ({"modes_hz": ["ten"]}, r"modes_hz\[1\]"),
    ],
)
def test_bad_shaper_files_name_the_field(tmp_path, change, message):
    data = shaper_for_mode(10.0, 0.02, "zv").to_dict()
    data.update(change)
    path = tmp_path / "bad.json"
    path.write_text(json.dumps(data))
    with pytest.raises(ShaperFileError, match=message):
        load_shaper(path)


def test_bad_values_are_refused():
    with pytest.raises(UsageError, match="kind"):
        shaper_for_mode(10.0, 0.01, "zz")
    with pytest.raises(UsageError, match="damping"):
        shaper_for_mode(10.0, 1.0, "zv")
    with pytest.raises(UsageError, match="> 0 Hz"):
        shaper_for_mode(0.0, 0.01, "zv")
    with pytest.raises(UsageError, match="start at 0"):
        Shaper("zv", [0.1, 0.2], [0.5, 0.5], (10.0,), (0.0,))
    with pytest.raises(ShaperFileError, match="not a dampctl shaper"):
        shaper_from_dict([1, 2])
