"""The modal basis engines against numpy's own complex division, and against each other."""

import numpy as np
import pytest

import dampctl.model.modalbasis as modalbasis
from dampctl.errors import MissingFeatureError, UsageError
from dampctl.model.modalbasis import (
    COMPILED_MIN_VALUES,
    BasisFiller,
    block_frequencies,
    compiled_available,
    modal_basis,
    resolve_engine,
)

needs_numba = pytest.mark.skipif(not compiled_available(), reason="numba is not installed")


def lightly_damped(seed: int, n_modes: int = 40, n_freq: int = 1500):
    """Seeded modes (1 Hz–10 kHz, damping 0 to 5 %) and a grid that holds every ω_i ± 1 ppm."""
    rng = np.random.default_rng(seed)
    omegas = 2 * np.pi * np.sort(np.exp(rng.uniform(np.log(1.0), np.log(1e4), n_modes)))
    dampings = rng.uniform(0.0, 0.05, n_modes)
    dampings[::7] = 1e-6  # nearly undamped: the basis peaks at 1/(2ζω_i²)
    grid = 2 * np.pi * np.geomspace(0.1, 2e4, n_freq - 2 * n_modes)
    omega = np.sort(np.concatenate([grid, omegas * (1 - 1e-6), omegas * (1 + 1e-6)]))
    return omega, omegas, dampings


def direct(omega, omegas, dampings):
    """1/(ω_i² − ω² + 2jζ_iω_iω) by numpy's complex division: the definition, computed plainly."""
    w, wi, zi = omega[None, :], omegas[:, None], dampings[:, None]
    return 1.0 / (wi**2 - w**2 + 2j * zi * wi * w)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_numpy_engine_is_the_definition(seed):
    omega, omegas, dampings = lightly_damped(seed)
    ours = modal_basis(omega, omegas, dampings, engine="numpy")
    ref = direct(omega, omegas, dampings)
    np.testing.assert_allclose(ours, ref, rtol=1e-14, atol=0)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_loop_is_the_definition_uncompiled(seed):
    # the compiled engine's loop, run as plain Python (so checked without numba too)
    omega, omegas, dampings = lightly_damped(seed, n_modes=6, n_freq=60)
    out = np.empty((omegas.size, 2 * omega.size))
    modalbasis._basis_loop(omegas**2, -2 * dampings * omegas, omega, out)
    np.testing.assert_allclose(out.view(complex), direct(omega, omegas, dampings), rtol=1e-14)


@needs_numba
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_compiled_engine_agrees_with_numpy(seed):
    omega, omegas, dampings = lightly_damped(seed)
    compiled = modal_basis(omega, omegas, dampings, engine="compiled")
    plain = modal_basis(omega, omegas, dampings, engine="numpy")
    # one reciprocal then a product against two divisions: a few units in the last place
    np.testing.assert_allclose(compiled, plain, rtol=1e-15, atol=0)


def test_blocks_cover_the_grid_whatever_their_size():
    # more frequencies than one numpy block, not a multiple of it
    omega, omegas, dampings = lightly_damped(4, n_modes=5, n_freq=1337)
    ref = direct(omega, omegas, dampings)
    np.testing.assert_allclose(modal_basis(omega, omegas, dampings, engine="numpy"), ref, 1e-14)
    filler = BasisFiller(omegas, dampings, "numpy", block=100)
    out = np.empty((omegas.size, 2 * 37))
    filler.fill(omega[:37], out)
    np.testing.assert_allclose(out.view(complex), ref[:, :37], rtol=1e-14)


def test_resolve_engine_choices(monkeypatch):
    assert resolve_engine("numpy", 1000, 10**6) == "numpy"
    small = resolve_engine("auto", 10, COMPILED_MIN_VALUES // 10 - 1)
    assert small == "numpy"
    big = resolve_engine("auto", 10, COMPILED_MIN_VALUES // 10)
    assert big == ("compiled" if compiled_available() else "numpy")
    monkeypatch.setattr(modalbasis, "_compiled_loop", lambda: None)
    assert resolve_engine("auto", 100, 10**5) == "numpy"
    with pytest.raises(MissingFeatureError, match=r"engine: the compiled engine needs numba"):
        resolve_engine("compiled", 10, 10)
    with pytest.raises(MissingFeatureError, match="needs numba"):
        BasisFiller(np.ones(2), np.zeros(2), "compiled", 4)


def test_unknown_engine_names_the_choices():
    expected = r"engine: unknown engine 'fast' \(expected one of: auto, numpy, compiled\)"
    with pytest.raises(UsageError, match=expected):
        resolve_engine("fast", 1, 1)


def test_block_frequencies_bounds():
    assert block_frequencies("numpy", 100, 5000) == 512
    assert block_frequencies("numpy", 100, 7) == 7
    assert block_frequencies("numpy", 100, 0) == 1
    assert block_frequencies("compiled", 100, 5000) == 5000
    assert block_frequencies("compiled", 10**5, 10**6) == 512  # scratch bounded, not below 512
    assert block_frequencies("compiled", 2000, 10**6) == 1000  # 2e6 values of scratch
