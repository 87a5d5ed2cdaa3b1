"""fit_modes against the outside: a lumped model solved directly, synthetic noisy FRFs of a
known modal plant, and the plant it writes read back."""

import numpy as np
import pytest
from measuredplants import FREQS, MASSES, SHAPES, SITES, ZETAS, noisy_four_mode_frf
from scipy.linalg import eigh

from dampctl.errors import MeasurementError, UsageError
from dampctl.model.components import Actuator, Mode, Sensor
from dampctl.model.modalfit import fit_modes, frf_error
from dampctl.model.plant import ModalPlant
from dampctl.model.plantfile import dump_plant, parse_plant
from dampctl.model.stability import mac

# ---------------------------------------------------------------- a lumped chain, solved directly
# ground–k1–m1–k2–m2–k3–m3 with Rayleigh damping C = a M + b K (proportional, so real modes);
# its receptance is (K − ω²M + jωC)⁻¹ at every frequency, computed without any modal model.
M = np.diag([2.0, 1.0, 1.5])
K = np.array([[6e5, -2e5, 0.0], [-2e5, 5e5, -3e5], [0.0, -3e5, 3e5]])
A_RAYLEIGH, B_RAYLEIGH = 2.0, 2e-6
C = A_RAYLEIGH * M + B_RAYLEIGH * K


def _chain_frf(freq_hz):
    w = 2 * np.pi * freq_hz
    h = np.array([np.linalg.inv(K - wk**2 * M + 1j * wk * C) for wk in w])  # (n_f, 3, 3)
    return np.moveaxis(h, 0, 2)  # (out, in, n_f)


def test_noise_free_lumped_model_recovered_to_1e_6():
    # Eigenvalues of (K, M) and mass-normalized shapes from scipy.linalg.eigh; Rayleigh damping
    # ζ_i = (a/ω_i + b ω_i)/2 (e.g. R. W. Clough & J. Penzien, Dynamics of Structures, 1975,
    # chapter on damping, from memory). Force at dof 1 (the driving point), displacement at all.
    eigenvalues, shapes = eigh(K, M)
    omegas = np.sqrt(eigenvalues)
    freq = np.linspace(20.0, 220.0, 801)
    h = _chain_frf(freq)[:, :1, :]
    fit = fit_modes(freq, h, outputs=["x1", "x2", "x3"], inputs=["f1"],
                    driving_points=["x1/f1"], order=8)
    np.testing.assert_allclose(fit.freqs_hz, omegas / (2 * np.pi), rtol=1e-6)
    np.testing.assert_allclose(fit.dampings, (A_RAYLEIGH / omegas + B_RAYLEIGH * omegas) / 2,
                               rtol=1e-6)
    signs = np.sign(shapes[0])  # the fit makes the driving point positive
    np.testing.assert_allclose(fit.shapes.shapes, (shapes * signs).T, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(fit.modal_masses, 1.0 / shapes[0] ** 2, rtol=1e-6)
    assert fit.shapes.sites == ("x1", "x2", "x3")
    assert max(fit.fit_error.values()) < 1e-6
    np.testing.assert_allclose(fit.upper_residual, 0.0, atol=1e-9 * np.max(np.abs(h)))


# ---------------------------------------------------------------- four modes, two 2 % apart
@pytest.mark.parametrize("seed", [0, 1])
def test_four_modes_two_close_with_one_percent_noise(seed):
    # Truth: the plant's own modes; mass-normalized shape φ/√m, so the driving-point modal
    # mass (shape 1 at p0) is m/φ(p0)².
    freq, h = noisy_four_mode_frf(seed)
    fit = fit_modes(freq, h, output_kinds="acceleration", outputs=SITES, inputs=["hammer"],
                    driving_points=["p0/hammer"])
    assert fit.n_modes == 4
    np.testing.assert_allclose(fit.freqs_hz, FREQS, rtol=0.002)
    np.testing.assert_allclose(fit.dampings, ZETAS, rtol=0.10)
    for i in range(4):
        assert mac(fit.shapes.shapes[i, :5], SHAPES[i]) >= 0.99
    np.testing.assert_allclose(fit.modal_masses, MASSES / SHAPES[:, 0] ** 2, rtol=0.03)
    # the error of a good fit is the noise: 1 % RMS
    assert all(0.007 < e < 0.013 for e in fit.fit_error.values())


def test_written_plant_reproduces_the_measurement_within_the_reported_error():
    freq, h = noisy_four_mode_frf(2)
    fit = fit_modes(freq, h, output_kinds="acceleration", outputs=SITES, inputs=["hammer"],
                    driving_points=["p0/hammer"])
    plant = parse_plant(dump_plant(fit.to_plant()))
    assert [m.modal_mass_kg for m in plant.modes] == [1.0] * 4
    model = plant.frf(freq, ["hammer"], SITES)
    for o, site in enumerate(SITES):
        name = f"{site}/hammer"
        # independent recomputation of the normalized RMS error
        error = np.linalg.norm(model[o, 0] - h[o, 0]) / np.linalg.norm(h[o, 0])
        assert error == pytest.approx(fit.plant_error[name], rel=1e-9)
        assert error <= fit.fit_error[name] + 0.001  # real modes cost at most 0.1 %
    # the fit's own model reproduces the measurement within its reported error
    np.testing.assert_allclose(frf_error(fit.model_frf(), h)[:, 0],
                               [fit.fit_error[f"{s}/hammer"] for s in SITES], rtol=1e-12)


def test_residuals_stand_for_modes_outside_the_band():
    # A mode far below the band adds −φ²/ω² ≈ φ²/(jω)² to the receptance (a mass line, L = φ²)
    # and one far above adds φ²/ω_i² (a flexibility line, U = φ²/ω_i²) (D. J. Ewins, Modal
    # Testing, 2nd ed. 2000, residual terms; from memory). Receptance at one driving point. The
    # terms left out are φ²ω_b²/ω⁴ and φ²ω²/ω_h⁴: with the low mode at 0.5 Hz and the high one
    # at 3 kHz over a 100-400 Hz band they are a few % of U (and far less of L).
    modes = [Mode(0.5, 0.02), Mode(150.0, 0.01), Mode(300.0, 0.01), Mode(3000.0, 0.02)]
    plant = ModalPlant(modes=modes, sites={"p": [1.0, 0.8, 0.6, 1.0]},
                       actuators=[Actuator("f", "force", site="p")],
                       sensors=[Sensor("p", "displacement", site="p")])
    freq = np.linspace(100.0, 400.0, 601)
    h = plant.frf(freq, ["f"], ["p"])
    fit = fit_modes(freq, h, outputs=["p"], inputs=["f"], driving_points=["p/f"])
    np.testing.assert_allclose(fit.freqs_hz, [150.0, 300.0], rtol=1e-3)
    assert fit.lower_residual[0, 0] == pytest.approx(1.0, rel=0.01)
    assert fit.upper_residual[0, 0] == pytest.approx(1.0 / (2 * np.pi * 3000.0) ** 2, rel=0.05)


def test_without_a_driving_point_shapes_are_unscaled_and_the_plant_says_so():
    freq, h = noisy_four_mode_frf(3)
    fit = fit_modes(freq, h[1:], output_kinds="acceleration", outputs=SITES[1:],
                    inputs=["hammer"])
    assert not np.any(fit.shapes.scaled) and np.all(np.isnan(fit.modal_masses))
    assert any("no driving point" in w for w in fit.warnings)
    plant = fit.to_plant()
    assert "UNSCALED" in plant.title
    # the cross channels that were measured are still reproduced
    model = plant.frf(freq, ["hammer"], SITES[1:])
    assert np.max(frf_error(model, h[1:])) < 0.02


def test_coherence_weights_the_fit():
    # Where the coherence says the data are bad (here: 50 % noise between 400 and 500 Hz), a
    # coherence-weighted fit keeps its accuracy; the error is weighted the same way.
    freq, h = noisy_four_mode_frf(4)
    bad = (freq > 400) & (freq < 500)
    rng = np.random.default_rng(5)
    h = h.copy()
    h[:, :, bad] *= 1 + 0.5 * (rng.normal(size=h[:, :, bad].shape)
                               + 1j * rng.normal(size=h[:, :, bad].shape))
    gamma = np.where(bad, 0.0, 1.0) * np.ones(h.shape)
    fit = fit_modes(freq, h, output_kinds="acceleration", outputs=SITES, inputs=["hammer"],
                    driving_points=["p0/hammer"], coherence=gamma)
    np.testing.assert_allclose(fit.freqs_hz, FREQS, rtol=0.002)
    np.testing.assert_allclose(fit.dampings, ZETAS, rtol=0.10)
    keep = ~bad
    direct = np.linalg.norm((fit.model_frf() - h)[0, 0, keep]) / np.linalg.norm(h[0, 0, keep])
    assert fit.fit_error["p0/hammer"] == pytest.approx(direct, rel=1e-12)


def test_named_modes_and_band():
    freq, h = noisy_four_mode_frf(6)
    fit = fit_modes(freq, h, output_kinds="acceleration", outputs=SITES, inputs=["hammer"],
                    driving_points=["p0/hammer"], modes_hz=[121.0, 609.0])
    assert fit.named
    np.testing.assert_allclose(fit.freqs_hz, [120.0, 610.0], rtol=0.002)
    band = fit_modes(freq, h, output_kinds="acceleration", outputs=SITES, inputs=["hammer"],
                     driving_points=["p0/hammer"], band_hz=(200.0, 400.0))
    assert band.band_hz[0] >= 200.0 and band.band_hz[1] <= 400.0
    np.testing.assert_allclose(band.freqs_hz, [250.0, 255.0], rtol=0.002)


def test_bad_options_are_refused():
    freq, h = noisy_four_mode_frf(0, np.linspace(60.0, 800.0, 201))
    kw = {"output_kinds": "acceleration", "outputs": SITES, "inputs": ["hammer"]}
    with pytest.raises(UsageError, match="unknown channel 'p9/hammer'"):
        fit_modes(freq, h, driving_points=["p9/hammer"], **kw)
    with pytest.raises(UsageError, match="already in driving point"):
        fit_modes(freq, h, driving_points=["p0/hammer", "p1/hammer"], **kw)
    with pytest.raises(UsageError, match="is a force"):
        fit_modes(freq, h, driving_points=["p0/hammer"], **dict(
            kw, output_kinds=["force"] + ["acceleration"] * 4))
    with pytest.raises(MeasurementError, match="input 'p0' has the name of an output"):
        fit_modes(freq, h, **dict(kw, inputs=["p0"]))
    with pytest.raises(UsageError, match="band: expected 0 <= low < high"):
        fit_modes(freq, h, band_hz=(500.0, 100.0), **kw)
    with pytest.raises(UsageError, match="order: expected 'auto' or an integer"):
        fit_modes(freq, h, order=0, **kw)
    with pytest.raises(UsageError, match="hold at most order"):
        fit_modes(freq, h, order=500, **kw)
    with pytest.raises(MeasurementError, match="frf: expected shape"):
        fit_modes(freq, h[0], **kw)
    zero = h.copy()
    zero[2] = 0
    with pytest.raises(MeasurementError, match="channel p2/hammer is zero"):
        fit_modes(freq, zero, **kw)


def test_plant_hardware_from_the_measured_points():
    freq, h = noisy_four_mode_frf(7)
    freq_d = freq
    h_d = h / (2j * np.pi * freq_d) ** 2  # displacement at every site
    fit = fit_modes(freq_d, h_d, outputs=SITES, inputs=["hammer"], driving_points=["p0/hammer"])
    plant = fit.to_plant(actuators={"coil": "hammer"}, sensors={"gap": "p0", "far": "p4"})
    assert [a.site for a in plant.actuators] == ["p0"]
    assert [(p.name, p.actuator, p.sensor) for p in plant.pairs] == [("coil_gap", "coil", "gap")]
    # a displacement pair's static gain: the modal sum at DC plus the upper residual
    phi = fit.shapes.shapes[:, 0]
    expected = np.sum(phi**2 / np.abs(fit.poles) ** 2) + fit.upper_residual[0, 0]
    assert plant.pairs[0].static_gain == pytest.approx(expected, rel=1e-12)
    with pytest.raises(UsageError, match="'x' is not a measured input"):
        fit.to_plant(actuators={"coil": "x"})
    with pytest.raises(UsageError, match="'x' is not a measured output"):
        fit.to_plant(sensors={"s": "x"})
