"""Modes of FE matrices (dampctl.model.fe_modes) against closed forms and scipy's dense solver."""

import math

import numpy as np
import pytest
import scipy.sparse as sp
from femodels import CANTILEVER_BETA_L, beam, cantilever_shape

from dampctl.errors import PlantError, UsageError
from dampctl.model.fe_matrices import fe_model
from dampctl.model.fe_modes import modal_dampings, participation, plant_of_modes, solve_modes

EI, RHO_A, LENGTH = 100.0, 2.0, 1.0


def _closed_form_hz(beta_l: float) -> float:
    # f_n = (β_n L)² / (2π L²) √(EI / ρA) (R. D. Blevins, Formulas for Natural Frequency and
    # Mode Shape, 1979, uniform clamped-free beam)
    return beta_l**2 / (2 * math.pi * LENGTH**2) * math.sqrt(EI / RHO_A)


def test_cantilever_frequencies_and_shapes_converge_to_the_closed_form():
    # cubic Hermite elements with consistent mass: the frequency error falls as h⁴ (measured
    # with 40 elements: 1.1e-5 relative on the fifth mode, less below)
    M, K, x = beam(40, length=LENGTH, ei=EI, rho_a=RHO_A)
    modes = solve_modes(fe_model(M, K), n_modes=5)
    expected = np.array([_closed_form_hz(b) for b in CANTILEVER_BETA_L])
    np.testing.assert_allclose(modes.freqs_hz, expected, rtol=2e-5)
    coarse = solve_modes(fe_model(*beam(20, length=LENGTH, ei=EI, rho_a=RHO_A)[:2]), n_modes=5)
    ratio = (coarse.freqs_hz - expected)[2:] / (modes.freqs_hz - expected)[2:]
    assert np.all((ratio > 12) & (ratio < 20))  # halving h divides the error by about 2⁴
    deflection = modes.shapes[0::2]  # DOF 2k is node k's deflection
    for k, beta_l in enumerate(CANTILEVER_BETA_L):
        exact = cantilever_shape(beta_l, x, LENGTH)
        ours = deflection[:, k] * exact[-1] / deflection[-1, k]  # both scaled to the tip
        assert np.max(np.abs(ours - exact)) < 1e-4 * np.max(np.abs(exact))


def test_coarse_mesh_is_stiffer_as_the_element_theory_says():
    # a conforming displacement element bounds every frequency from above (Rayleigh–Ritz)
    M, K, _ = beam(4, length=LENGTH, ei=EI, rho_a=RHO_A)
    coarse = solve_modes(fe_model(M, K), n_modes=3).freqs_hz
    assert np.all(coarse > [_closed_form_hz(b) for b in CANTILEVER_BETA_L[:3]])


def _chain(n: int):
    """A grounded chain of n masses (1 to 2 kg) and springs (1e6 to 2e6 N/m)."""
    rng = np.random.default_rng(3)
    m, k = rng.uniform(1.0, 2.0, n), rng.uniform(1e6, 2e6, n)
    upper = np.append(k[1:], 0.0)
    K = sp.diags([k + upper, -k[1:], -k[1:]], [0, 1, -1], format="csr")
    return sp.diags(m, format="csr"), K


def test_lanczos_equals_the_dense_solver():
    # scipy.linalg.eigh on the dense copy as the reference (a well-conditioned model: on a
    # fine beam mesh the dense solver itself loses the lowest eigenvalues' digits, as its error
    # is relative to the largest)
    model = fe_model(*_chain(400))
    sparse = solve_modes(model, n_modes=12, solver="lanczos")
    dense = solve_modes(model, n_modes=12, solver="dense")
    assert sparse.solver == "lanczos" and dense.solver == "dense"
    np.testing.assert_allclose(sparse.freqs_hz, dense.freqs_hz, rtol=1e-9)
    np.testing.assert_allclose(sparse.shapes, dense.shapes, atol=1e-9 * np.abs(dense.shapes).max())


def test_frequency_limit_grows_the_request_until_it_is_passed():
    model = fe_model(*_chain(2400))  # 2400 DOFs: Lanczos
    top = 60.0
    found = solve_modes(model, max_freq_hz=top)
    everything = solve_modes(model, n_modes=found.n_modes + 1, solver="dense")
    assert found.freqs_hz[-1] <= top < everything.freqs_hz[-1]
    np.testing.assert_allclose(found.freqs_hz, everything.freqs_hz[:-1], rtol=1e-9)


def test_effective_masses_sum_to_the_total_mass_with_every_mode():
    # Σ Γ_i² = rᵀ M r when every mode is kept (A. K. Chopra, Dynamics of Structures,
    # modal expansion of the influence vector)
    M, K, _ = beam(30, clamped=False)
    model = fe_model(M, K)
    modes = solve_modes(model, n_modes=model.n_dofs)
    r = np.zeros(model.n_dofs)
    r[0::2] = 1.0  # translation of every node
    gamma = participation(model, modes, r)
    total = r @ (M @ r)
    assert total == pytest.approx(RHO_A * LENGTH, rel=1e-12)  # the beam's mass
    assert np.sum(gamma**2) == pytest.approx(total, rel=1e-9)
    # the free beam's translation is one of its rigid-body modes: all the mass is there
    assert np.sum(gamma[modes.rigid] ** 2) == pytest.approx(total, rel=1e-9)


def test_free_body_has_rigid_modes_at_exactly_zero():
    M, K, _ = beam(1100, clamped=False)  # 2204 DOFs, Lanczos with its negative shift
    modes = solve_modes(fe_model(M, K), n_modes=4, solver="lanczos")
    assert modes.solver == "lanczos"
    assert list(modes.freqs_hz[:2]) == [0.0, 0.0] and np.all(modes.rigid[:2])
    # first free-free bending mode: β L = 4.73004 (Blevins 1979, free-free beam)
    assert modes.freqs_hz[2] == pytest.approx(_closed_form_hz(4.730041), rel=1e-5)


def test_damping_choices():
    M, K, _ = beam(10)
    modes = solve_modes(fe_model(M, K), n_modes=3)
    w = modes.omegas
    np.testing.assert_allclose(modal_dampings(modes, rayleigh=(2.0, 1e-5)),
                               2.0 / (2 * w) + 1e-5 * w / 2)
    assert list(modal_dampings(modes, per_mode={1: 0.01, 2: 0.02, 3: 0.03})) == [0.01, 0.02, 0.03]
    with pytest.raises(PlantError, match="mode 3"):
        modal_dampings(modes, per_mode={1: 0.01, 2: 0.02})
    with pytest.raises(UsageError):
        modal_dampings(modes, ratio=0.01, rayleigh=(1.0, 0.0))


def test_plant_keeps_only_the_named_sites():
    M, K, _ = beam(20)
    modes = solve_modes(fe_model(M, K), n_modes=4)
    plant = plant_of_modes(modes, {"tip": 38}, modal_dampings(modes, ratio=0.02))
    assert list(plant.sites) == ["tip"]
    np.testing.assert_array_equal(plant.sites["tip"], modes.shapes[38])
    assert all(m.modal_mass_kg == 1.0 for m in plant.modes)


def test_bad_matrices_are_refused():
    M, K, _ = beam(5)
    with pytest.raises(PlantError, match="symmetric"):
        fe_model(M, K + np.triu(np.ones(K.shape), 1) * 1e3)
    with pytest.raises(PlantError):
        fe_model(M[:-1, :-1], K)
