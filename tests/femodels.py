"""FE models for the tests: uniform Euler–Bernoulli beams of two-node Hermite (cubic) elements.

Element matrices for DOFs [w_1, θ_1, w_2, θ_2] of an element of length h (any FE text, e.g.
R. D. Cook, D. S. Malkus, M. E. Plesha & R. J. Witt, *Concepts and Applications of Finite
Element Analysis*, 4th ed., 2002, the beam element and its consistent mass matrix):

    K_e = EI/h³ [[12, 6h, −12, 6h], [6h, 4h², −6h, 2h²], [−12, −6h, 12, −6h],
                 [6h, 2h², −6h, 4h²]]
    M_e = ρA h/420 [[156, 22h, 54, −13h], [22h, 4h², 13h, −3h²], [54, 13h, 156, −22h],
                    [−13h, −3h², −22h, 4h²]]
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

#: the cantilever's first five roots β_n L of cos βL cosh βL = −1 (R. D. Blevins, Formulas
#: for Natural Frequency and Mode Shape, 1979, clamped-free beam)
CANTILEVER_BETA_L = (1.875104, 4.694091, 7.854757, 10.995541, 14.137168)


def beam(n_elements: int, *, length=1.0, ei=100.0, rho_a=2.0, clamped=True):
    """Sparse M, K of a uniform beam; clamped at x = 0 (node 0's DOFs removed) or free-free.

    Returns (M, K, x) with x the node positions of the kept nodes; DOF 2k is the deflection
    and 2k + 1 the slope of kept node k.
    """
    h = length / n_elements
    ke = ei / h**3 * np.array([[12, 6 * h, -12, 6 * h], [6 * h, 4 * h * h, -6 * h, 2 * h * h],
                               [-12, -6 * h, 12, -6 * h], [6 * h, 2 * h * h, -6 * h, 4 * h * h]])
    me = rho_a * h / 420 * np.array(
        [[156, 22 * h, 54, -13 * h], [22 * h, 4 * h * h, 13 * h, -3 * h * h],
         [54, 13 * h, 156, -22 * h], [-13 * h, -3 * h * h, -22 * h, 4 * h * h]])
    n = 2 * (n_elements + 1)
    rows, cols, kv, mv = [], [], [], []
    for e in range(n_elements):
        dofs = np.arange(2 * e, 2 * e + 4)
        rows.append(np.repeat(dofs, 4))
        cols.append(np.tile(dofs, 4))
        kv.append(ke.ravel())
        mv.append(me.ravel())
    rows, cols = np.concatenate(rows), np.concatenate(cols)
    K = sp.coo_matrix((np.concatenate(kv), (rows, cols)), shape=(n, n)).tocsr()
    M = sp.coo_matrix((np.concatenate(mv), (rows, cols)), shape=(n, n)).tocsr()
    x = np.linspace(0.0, length, n_elements + 1)
    if clamped:
        K, M, x = K[2:, 2:], M[2:, 2:], x[1:]
    return M.tocsr(), K.tocsr(), x


def cantilever_shape(beta_l: float, x: np.ndarray, length=1.0) -> np.ndarray:
    """Analytic cantilever mode shape cosh βx − cos βx − σ (sinh βx − sin βx), σ from βL
    (Blevins 1979, clamped-free beam), at x; not normalized."""
    b = beta_l / length
    sigma = (np.cosh(beta_l) + np.cos(beta_l)) / (np.sinh(beta_l) + np.sin(beta_l))
    return np.cosh(b * x) - np.cos(b * x) - sigma * (np.sinh(b * x) - np.sin(b * x))
