"""Smoke test of the plant core; the full suite against outside references is in test_plant.py."""

import numpy as np

from dampctl.testing import chain_plant


def test_two_mass_chain_frequencies():
    # Chain m1 = 1, m2 = 0.5 kg, k1 = 5e5, k2 = 2e5 N/m: poles 479.420 and 932.822 rad/s,
    # computed as the eigenvalues of (K, M) with scipy (independent of the modal code).
    from scipy.linalg import eigh

    plant = chain_plant([1.0, 0.5], [5e5, 2e5])
    K = np.array([[7e5, -2e5], [-2e5, 2e5]])
    M = np.diag([1.0, 0.5])
    np.testing.assert_allclose(plant.omegas, np.sqrt(eigh(K, M, eigvals_only=True)), rtol=1e-12)
    np.testing.assert_allclose(plant.omegas, [479.420, 932.822], rtol=1e-6)
