"""A generated shell-like FE model for the benchmark: a flat cantilever plate of Q4 elements.

Each node has 5 DOFs [u, v, w, β_x, β_y]: in-plane (membrane, plane stress) motion u, v and
Reissner–Mindlin bending (deflection w, rotations β of the normal, u = z β_x, v = z β_y); a
flat-shell element in the usual sense. Bilinear shape functions; membrane and bending
stiffness with 2×2 Gauss points, transverse shear with one point (selective reduced
integration, shear factor 5/6) so that the thin plate does not lock; consistent mass
(ρt for u, v, w and ρt³/12 for the rotations) with 2×2 points. Any FE text describes the
element (e.g. R. D. Cook, D. S. Malkus, M. E. Plesha & R. J. Witt, *Concepts and Applications
of Finite Element Analysis*, 4th ed., 2002, chapters on plates and shells).

The plate is aluminium (E = 70 GPa, ν = 0.33, ρ = 2700 kg/m³), 1 m × 0.8 m × 4 mm, clamped
along x = 0. ``shell_plate(nx, ny)`` has 5 nx (ny + 1) DOFs.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

E, NU, RHO = 70e9, 0.33, 2700.0
LX, LY, THICK = 1.0, 0.8, 0.004


def _element(a: float, b: float) -> tuple[np.ndarray, np.ndarray]:
    """Stiffness and mass (20 × 20) of one a × b element, DOFs node by node [u, v, w, βx, βy]."""
    corners = np.array([[-1, -1], [1, -1], [1, 1], [-1, 1]], dtype=float)
    g = 1.0 / np.sqrt(3.0)
    gauss2 = [(x * g, y * g) for x in (-1, 1) for y in (-1, 1)]
    t = THICK
    plane = np.array([[1, NU, 0], [NU, 1, 0], [0, 0, (1 - NU) / 2]])
    d_membrane = E * t / (1 - NU**2) * plane
    d_bending = E * t**3 / (12 * (1 - NU**2)) * plane
    d_shear = 5.0 / 6.0 * E / (2 * (1 + NU)) * t * np.eye(2)
    jac = a * b / 4.0
    K = np.zeros((20, 20))
    M = np.zeros((20, 20))

    def shapes(xi, eta):
        n = 0.25 * (1 + corners[:, 0] * xi) * (1 + corners[:, 1] * eta)
        dx = 0.25 * corners[:, 0] * (1 + corners[:, 1] * eta) * 2.0 / a
        dy = 0.25 * corners[:, 1] * (1 + corners[:, 0] * xi) * 2.0 / b
        return n, dx, dy

    for xi, eta in gauss2:
        n, dx, dy = shapes(xi, eta)
        bm = np.zeros((3, 20))
        bb = np.zeros((3, 20))
        for k in range(4):
            u, v, bx, by = 5 * k, 5 * k + 1, 5 * k + 3, 5 * k + 4
            bm[0, u], bm[1, v], bm[2, u], bm[2, v] = dx[k], dy[k], dy[k], dx[k]
            bb[0, bx], bb[1, by], bb[2, bx], bb[2, by] = dx[k], dy[k], dy[k], dx[k]
        K += jac * (bm.T @ d_membrane @ bm + bb.T @ d_bending @ bb)
        nn = np.zeros((5, 20))
        for k in range(4):
            nn[:, 5 * k:5 * k + 5] = n[k] * np.eye(5)
        density = RHO * np.diag([t, t, t, t**3 / 12, t**3 / 12])
        M += jac * nn.T @ density @ nn
    n, dx, dy = shapes(0.0, 0.0)
    bs = np.zeros((2, 20))
    for k in range(4):
        w, bx, by = 5 * k + 2, 5 * k + 3, 5 * k + 4
        bs[0, w], bs[0, bx] = dx[k], n[k]
        bs[1, w], bs[1, by] = dy[k], n[k]
    K += 4.0 * jac * bs.T @ d_shear @ bs
    return K, M


def shell_plate(nx: int, ny: int) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """Sparse M and K of the clamped plate with nx × ny elements (5 nx (ny + 1) DOFs).

    Nodes are numbered along y first (node = i (ny + 1) + j for column i), so the matrices
    are banded; the clamped column i = 0 is removed.
    """
    ke, me = _element(LX / nx, LY / ny)
    i, j = np.meshgrid(np.arange(nx), np.arange(ny), indexing="ij")
    base = (i * (ny + 1) + j).ravel()
    nodes = np.stack([base, base + ny + 1, base + ny + 2, base + 1], axis=1)
    dofs = (5 * nodes[:, :, None] + np.arange(5)).reshape(-1, 20)
    rows = np.repeat(dofs, 20, axis=1).ravel()
    cols = np.tile(dofs, (1, 20)).ravel()
    n = 5 * (nx + 1) * (ny + 1)
    K = sp.coo_matrix((np.tile(ke.ravel(), len(dofs)), (rows, cols)), shape=(n, n)).tocsr()
    M = sp.coo_matrix((np.tile(me.ravel(), len(dofs)), (rows, cols)), shape=(n, n)).tocsr()
    free = np.arange(5 * (ny + 1), n)
    return M[free][:, free].tocsr(), K[free][:, free].tocsr()
