"""Vector fitting against the outside: exact rational data, and scikit-rf's implementation."""

import warnings

import numpy as np
import pytest

from dampctl.errors import MeasurementError
from dampctl.model.vectorfit import (
    RationalFit,
    evaluate_rational,
    fit_residues,
    start_poles,
    vector_fit,
)

# Poles and residues of a known rational function (s in units of the band top): three lightly
# damped pairs, two of them 2 % apart, and one real pole.
POLES = np.array([-0.002 + 0.3j, -0.004 + 0.5j, -0.005 + 0.51j, -0.4 + 0.0j])
RESIDUES = np.array([[0.01 + 0.002j, -0.02 + 0.001j, 0.015 - 0.003j, 0.3 + 0.0j],
                     [0.004 - 0.001j, 0.03 + 0.002j, -0.01 + 0.0j, -0.1 + 0.0j]])


def _data(n=801):
    s = 1j * np.linspace(0.1, 1.0, n)
    truth = RationalFit(POLES, RESIDUES, [1e-3, -2e-3], [1e-4, 0.0])
    return s, evaluate_rational(truth, s)


def test_exact_rational_data_recovered():
    # A rational function of the model's own form and order is reproduced exactly by vector
    # fitting (Gustavsen & Semlyen, IEEE Trans. Power Delivery 14(3), 1999): poles, residues
    # and the extra terms to rounding.
    s, data = _data()
    start = np.concatenate([start_poles(0.1, 1.0, 3), [-0.5 + 0.0j]])
    fit = vector_fit(s, data, np.ones(data.shape), start)
    assert fit.converged
    order = np.argsort(np.abs(fit.poles))
    truth = np.argsort(np.abs(POLES))
    np.testing.assert_allclose(fit.poles[order], POLES[truth], rtol=1e-9)
    np.testing.assert_allclose(fit.residues[:, order], RESIDUES[:, truth], rtol=1e-7,
                               atol=1e-12)
    np.testing.assert_allclose(fit.constant, [1e-3, -2e-3], atol=1e-10)
    np.testing.assert_allclose(fit.inverse_square, [1e-4, 0.0], atol=1e-10)


def test_fit_residues_is_the_weighted_least_squares_solution():
    # For fixed poles the residues solve a linear least-squares problem: compare with
    # numpy.linalg.lstsq on the complex basis written out by hand.
    rng = np.random.default_rng(2)
    s, data = _data(301)
    noisy = data + 1e-3 * (rng.normal(size=data.shape) + 1j * rng.normal(size=data.shape))
    weights = rng.uniform(0.5, 2.0, size=data.shape)
    poles = POLES[:3]
    fit = fit_residues(s, noisy, weights, poles, constant=True, inverse_square=False)
    c = 0
    basis = np.column_stack([1 / (s - a) + 1 / (s - np.conj(a)) for a in poles]
                            + [1j / (s - a) - 1j / (s - np.conj(a)) for a in poles]
                            + [np.ones_like(s)])
    a = weights[c][:, None] * basis
    b = weights[c] * noisy[c]
    x = np.linalg.lstsq(np.vstack([a.real, a.imag]), np.concatenate([b.real, b.imag]),
                        rcond=None)[0]
    np.testing.assert_allclose(fit.residues[c], x[:3] + 1j * x[3:6], rtol=1e-8)
    assert fit.constant[c] == pytest.approx(x[6], rel=1e-8)


def test_agrees_with_scikit_rf_vector_fitting_on_noisy_data():
    # scikit-rf (a general-purpose RF library) implements the same method: relaxed, fast
    # vector fitting (Gustavsen 2006; Deschrijver et al. 2008). With its weighting (each
    # response by the square root of its norm), its terms (a constant) and its starting poles,
    # ours converges to the same poles and residues on data with 1 % noise.
    skrf = pytest.importorskip("skrf")
    rng = np.random.default_rng(7)
    f_hz = np.linspace(100.0, 1000.0, 601)
    s_true = 1j * f_hz / 1000.0  # the poles of POLES at 300, 500 and 510 Hz
    clean = evaluate_rational(RationalFit(POLES[:3], RESIDUES[:, :3], [0.05, 0.02], [0, 0]),
                              s_true)
    noisy = clean * (1 + 0.01 * (rng.normal(size=clean.shape)
                                 + 1j * rng.normal(size=clean.shape)) / np.sqrt(2))
    s_params = np.zeros((f_hz.size, 2, 2), dtype=complex)
    s_params[:, 0, 0], s_params[:, 1, 1] = noisy[0], noisy[1]
    s_params[:, 0, 1] = s_params[:, 1, 0] = 0.5 * (noisy[0] + noisy[1])
    network = skrf.Network(frequency=skrf.Frequency.from_f(f_hz, unit="hz"), s=s_params)
    reference = skrf.vectorFitting.VectorFitting(network)
    reference.max_iterations, reference.max_tol = 100, 1e-12
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        reference.vector_fit(n_poles_real=0, n_poles_cmplx=3, init_pole_spacing="lin",
                             parameter_type="s", fit_constant=True, fit_proportional=False)
    norm = np.mean(f_hz)  # scikit-rf fits in frequencies divided by their mean
    s = 2j * np.pi * f_hz / norm
    data = s_params.transpose(1, 2, 0).reshape(4, -1)
    weights = np.sqrt(np.linalg.norm(data, axis=1))[:, None] * np.ones(data.shape)
    start = (-0.01 + 1j) * 2 * np.pi * np.linspace(f_hz[0], f_hz[-1], 3) / norm
    fit = vector_fit(s, data, weights, start, inverse_square=False, max_iterations=100,
                     tolerance=1e-13)
    ours = fit.poles * norm
    theirs = np.asarray(reference.poles)
    a, b = np.argsort(np.abs(ours)), np.argsort(np.abs(theirs))
    np.testing.assert_allclose(ours[a], theirs[b], rtol=1e-9)
    np.testing.assert_allclose(fit.residues[:, a] * norm, np.asarray(reference.residues)[:, b],
                               rtol=1e-7)
    np.testing.assert_allclose(fit.constant, reference.constant_coeff, rtol=1e-7)


def test_start_poles_spread_over_the_band():
    poles = start_poles(1.0, 3.0, 4)
    np.testing.assert_allclose(poles.imag, [1.25, 1.75, 2.25, 2.75])
    np.testing.assert_allclose(poles.real, -0.01 * poles.imag)
    with pytest.raises(ValueError, match="n_pairs"):
        start_poles(1.0, 2.0, 0)


def test_bad_shapes_and_too_little_data_are_refused():
    s, data = _data(21)
    with pytest.raises(MeasurementError, match="shape"):
        vector_fit(s, data[:, :-1], np.ones(data.shape), start_poles(0.1, 1.0, 2))
    with pytest.raises(MeasurementError, match="cannot hold"):
        vector_fit(s[:5], data[:, :5], np.ones((2, 5)), start_poles(0.1, 1.0, 6))
    with pytest.raises(MeasurementError, match="frequency 0"):
        vector_fit(np.r_[0j, s[1:]], data, np.ones(data.shape), start_poles(0.1, 1.0, 2))
