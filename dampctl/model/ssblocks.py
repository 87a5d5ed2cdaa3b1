"""State-space building blocks for controllers made of polynomial sections.

Pure linear algebra on (A, B, C, D) tuples: one section num(s)/den(s) of degree <= 2 in
controllable canonical form, series and parallel connections, block-diagonal stacking, and the
inverse bilinear (Tustin) map of a discrete controller (G. F. Franklin, J. D. Powell &
M. L. Workman, *Digital Control of Dynamic Systems*, 3rd ed. 1998). Used by
:mod:`dampctl.design`; kept in the model stage because it depends on nothing above it.
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import block_diag

__all__ = ["block_diagonal", "branch_matrices", "inverse_bilinear", "parallel"]


def inverse_bilinear(mats, sample_time_s: float):
    """Continuous (A, B, C, D) whose bilinear discretization at T is the given one.

    Parameters
    ----------
    mats : tuple of ndarray
        Discrete (A, B, C, D).
    sample_time_s : float
        Sample time T (s).

    Returns
    -------
    tuple of ndarray
        Continuous (A, B, C, D).
    """
    Ad, Bd, Cd, Dd = (np.asarray(m, dtype=float) for m in mats)
    n = Ad.shape[0]
    if n == 0:
        return Ad.copy(), Bd.copy(), Cd.copy(), Dd.copy()
    inv = np.linalg.inv(Ad + np.eye(n))
    A = (2.0 / sample_time_s) * (np.eye(n) - 2.0 * inv)
    B = (2.0 / sample_time_s) * inv @ Bd
    C = 2.0 * Cd @ inv
    D = Dd - Cd @ inv @ Bd
    return A, B, C, D


def _section_matrices(section):
    """Controllable canonical form of one section (0, 1 or 2 states)."""
    den = np.array(section.den) / section.den[0]
    num = np.zeros(len(den))
    num[len(den) - len(section.num) :] = np.array(section.num) / section.den[0]
    order = len(den) - 1
    d = num[0]
    if order == 0:
        return np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.array([[d]])
    rest = num[1:] - d * den[1:]  # strictly proper part, highest power first
    A = np.zeros((order, order))
    A[0, :] = -den[1:]
    if order == 2:
        A[1, 0] = 1.0
    B = np.zeros((order, 1))
    B[0, 0] = 1.0
    C = rest.reshape(1, order)
    return A, B, C, np.array([[d]])


def _series(first, second):
    """second ∘ first (first's output drives second's input)."""
    A1, B1, C1, D1 = first
    A2, B2, C2, D2 = second
    n1, n2 = A1.shape[0], A2.shape[0]
    A = np.zeros((n1 + n2, n1 + n2))
    A[:n1, :n1] = A1
    A[n1:, :n1] = B2 @ C1
    A[n1:, n1:] = A2
    B = np.vstack([B1, B2 @ D1])
    C = np.hstack([D2 @ C1, C2])
    return A, B, C, D2 @ D1


def branch_matrices(branch):
    """(A, B, C, D) of a branch: its gain times the cascade of its sections.

    Parameters
    ----------
    branch : Branch
        Gain and sections (num, den in s, degree <= 2).

    Returns
    -------
    tuple of ndarray
    """
    system = (np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.array([[branch.gain]]))
    for section in branch.sections:
        system = _series(system, _section_matrices(section))
    return system


def parallel(blocks):
    """(A, B, C, D) of SISO blocks in parallel (their outputs summed).

    Parameters
    ----------
    blocks : sequence of tuple of ndarray
        SISO state spaces.

    Returns
    -------
    tuple of ndarray
    """
    A = _blkdiag([b[0] for b in blocks])
    B = np.vstack([b[1] for b in blocks])
    C = np.hstack([b[2] for b in blocks])
    D = sum(b[3] for b in blocks)
    return A, B, C, D


def block_diagonal(systems):
    """(A, B, C, D) of systems side by side (inputs and outputs stacked).

    Parameters
    ----------
    systems : sequence of tuple of ndarray
        State spaces.

    Returns
    -------
    tuple of ndarray
    """
    return tuple(block_diag(*[np.atleast_2d(s[k]) for s in systems]) for k in range(4))


def _blkdiag(mats):
    return block_diag(*mats)
