"""FE mass and stiffness matrices: read, checked, and the tables that go with them.

An FE program exports its assembled (constrained) mass matrix M (kg, kg·m² ...) and stiffness
matrix K (N/m, N·m/rad ...), one row per degree of freedom (DOF). They are read from Matrix
Market (``.mtx``, :func:`scipy.io.mmread`; a ``symmetric`` file stores one triangle) or from a
scipy sparse ``.npz`` (:func:`scipy.sparse.save_npz`), and checked:

* square, both of one size, every entry finite;
* symmetric: ``|A_ij − A_ji| <= SYMMETRY_TOL · max(|A_ij|, |A_ji|, sqrt(|A_ii A_jj|))`` for
  every pair (a relative test that does not change when DOFs are scaled, e.g. rotations in
  radians next to translations in metres; exports written with about nine significant digits
  pass). The matrix kept is the mean of A and Aᵀ;
* no negative diagonal entry (a mass or stiffness matrix is positive semi-definite), and at
  least one positive mass.

DOFs are numbered from 1, as rows are in a Matrix Market file. Sites are named DOFs
(``--site NAME=DOF`` or a CSV ``name,dof``); a DOF map (CSV ``node,direction``, one row per
matrix row) says which DOFs move along x, y, z or turn about them (rx, ry, rz), which gives the
rigid-body translation used for base motion and effective modal masses.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy.sparse as sp

from dampctl.errors import PlantError, PlantFileError, UsageError
from dampctl.model.csvtables import read_csv_table

__all__ = [
    "DIRECTIONS",
    "SYMMETRY_TOL",
    "FEModel",
    "fe_model",
    "load_fe_model",
    "read_dof_map",
    "read_matrix",
    "read_sites",
    "site_dofs",
]

#: relative tolerance of the symmetry check (see the module docstring)
SYMMETRY_TOL = 1e-8

#: the directions a DOF map may name: translations along and rotations about x, y, z
DIRECTIONS: tuple[str, ...] = ("x", "y", "z", "rx", "ry", "rz")


@dataclass(frozen=True)
class FEModel:
    """Checked FE matrices (sparse CSR, symmetric).

    Build one with :func:`fe_model` (arrays) or :func:`load_fe_model` (files), which check
    them; the constructor takes them as they are.

    Parameters
    ----------
    mass : scipy.sparse.csr_matrix
        Mass matrix M (SI: kg for translations, kg·m² for rotations).
    stiffness : scipy.sparse.csr_matrix
        Stiffness matrix K (N/m, N·m/rad).
    sources : tuple of str, optional
        Where M and K came from, for messages.
    """

    mass: sp.csr_matrix
    stiffness: sp.csr_matrix
    sources: tuple[str, str] = ("mass", "stiffness")

    @property
    def n_dofs(self) -> int:
        """Number of degrees of freedom (rows)."""
        return int(self.mass.shape[0])


def read_matrix(path: str | Path) -> sp.csr_matrix:
    """Read one sparse matrix from ``.mtx`` (Matrix Market) or ``.npz`` (scipy sparse).

    Parameters
    ----------
    path : str or path-like
        The file.

    Returns
    -------
    scipy.sparse.csr_matrix
        The matrix, as float (not yet checked).

    Raises
    ------
    PlantFileError
        Unknown suffix, unreadable file, or not a matrix of real numbers.
    """
    source = str(path)
    suffix = Path(path).suffix.lower()
    if suffix not in (".mtx", ".npz"):
        raise PlantFileError(
            f"expected a Matrix Market .mtx or a scipy sparse .npz file, got {suffix or 'none'!r}"
            " as suffix", source=source)
    if not Path(path).is_file():
        raise PlantFileError("cannot read the matrix file (no such file)", source=source)
    try:
        if suffix == ".mtx":
            from scipy.io import mmread

            matrix = mmread(source)
        else:
            matrix = sp.load_npz(source)
    except (OSError, ValueError, KeyError, TypeError, EOFError, IndexError) as exc:
        kind = "Matrix Market" if suffix == ".mtx" else "scipy sparse (save_npz)"
        raise PlantFileError(f"not a {kind} matrix ({exc})", source=source) from None
    matrix = sp.csr_matrix(matrix)
    if matrix.dtype.kind == "c":
        raise PlantFileError("expected real entries, got complex", source=source)
    if matrix.dtype.kind not in "fiub":
        raise PlantFileError(f"expected real numbers, got entries of type {matrix.dtype}",
                             source=source)
    return matrix.astype(float)


def load_fe_model(mass: str | Path, stiffness: str | Path) -> FEModel:
    """Read and check the mass and stiffness matrices of an FE model.

    Parameters
    ----------
    mass, stiffness : str or path-like
        ``.mtx`` or ``.npz`` files (one may be of each kind).

    Returns
    -------
    FEModel

    Raises
    ------
    PlantFileError, PlantError
        The message names the file and what is wrong (size, symmetry, a non-finite entry).
    """
    return fe_model(read_matrix(mass), read_matrix(stiffness),
                    sources=(str(mass), str(stiffness)))


def fe_model(mass, stiffness, *, sources: tuple[str, str] = ("mass", "stiffness")) -> FEModel:
    """Check FE matrices built in code or read from files.

    Parameters
    ----------
    mass, stiffness : array_like or scipy sparse matrix, shape (n, n)
        Mass and stiffness matrices (SI).
    sources : tuple of str, optional
        Names of the two for messages (file paths).

    Returns
    -------
    FEModel
        CSR matrices, symmetrized.

    Raises
    ------
    PlantError
        Not square, sizes differ, non-finite entries, not symmetric, a negative diagonal
        entry, or no mass.
    """
    checked = []
    for matrix, source, what in zip((mass, stiffness), sources, ("mass", "stiffness"),
                                    strict=True):
        matrix = sp.csr_matrix(matrix, dtype=float)
        rows, cols = matrix.shape
        if rows != cols:
            raise PlantError(f"the {what} matrix must be square, got {rows} x {cols}",
                             source=source)
        if rows == 0:
            raise PlantError(f"the {what} matrix is empty", source=source)
        matrix.sum_duplicates()
        bad = ~np.isfinite(matrix.data)
        if np.any(bad):
            coo = matrix.tocoo()
            k = int(np.flatnonzero(~np.isfinite(coo.data))[0])
            raise PlantError(f"entry ({coo.row[k] + 1}, {coo.col[k] + 1}) is {coo.data[k]!r}: "
                             "every entry must be finite", source=source)
        checked.append(_symmetric(matrix, source, what))
    M, K = checked
    if M.shape != K.shape:
        raise PlantError(f"the stiffness matrix is {K.shape[0]} x {K.shape[0]} but the mass "
                         f"matrix is {M.shape[0]} x {M.shape[0]}: one row per DOF in both",
                         source=sources[1])
    for matrix, source, what in ((M, sources[0], "mass"), (K, sources[1], "stiffness")):
        diagonal = matrix.diagonal()
        if np.any(diagonal < 0):
            k = int(np.flatnonzero(diagonal < 0)[0])
            raise PlantError(f"diagonal entry {k + 1} is {diagonal[k]:.6g}: a {what} matrix "
                             "has no negative diagonal entry", source=source)
    if not np.any(M.diagonal() > 0):
        raise PlantError("the mass matrix has no positive diagonal entry", source=sources[0])
    return FEModel(M, K, tuple(sources))


def _symmetric(matrix: sp.csr_matrix, source: str, what: str) -> sp.csr_matrix:
    """The mean of A and Aᵀ, after checking that they agree to SYMMETRY_TOL."""
    transpose = matrix.T.tocsr()
    difference = (matrix - transpose).tocoo()
    if difference.nnz:
        diagonal = np.abs(matrix.diagonal())
        a = np.abs(np.asarray(matrix[difference.row, difference.col]).ravel())
        b = np.abs(np.asarray(transpose[difference.row, difference.col]).ravel())
        scale = np.maximum(np.maximum(a, b),
                           np.sqrt(diagonal[difference.row] * diagonal[difference.col]))
        bad = np.abs(difference.data) > SYMMETRY_TOL * scale
        if np.any(bad):
            k = int(np.flatnonzero(bad)[0])
            i, j = difference.row[k], difference.col[k]
            raise PlantError(
                f"the {what} matrix is not symmetric: entry ({i + 1}, {j + 1}) is "
                f"{matrix[i, j]:.9g} but ({j + 1}, {i + 1}) is {matrix[j, i]:.9g} (relative "
                f"tolerance {SYMMETRY_TOL:g}; {int(np.count_nonzero(bad)) // 2 or 1} such pairs)",
                source=source)
    return ((matrix + transpose) * 0.5).tocsr()


# ---------------------------------------------------------------------- sites and DOF maps
def site_dofs(items: Sequence[str], n_dofs: int, *, option: str = "--site") -> dict[str, int]:
    """Parse ``NAME=DOF`` items (DOF 1-based) into site name -> 0-based row.

    Parameters
    ----------
    items : sequence of str
        The option's values.
    n_dofs : int
        Number of DOFs of the model.
    option : str, optional
        The option's name, for messages.

    Returns
    -------
    dict of str to int
        0-based row of each site.
    """
    found: dict[str, int] = {}
    for item in items:
        name, eq, dof = (part.strip() for part in item.partition("="))
        if not eq or not name or not dof:
            raise UsageError(f"{option}: expected NAME=DOF (DOF a row number from 1), got "
                             f"{item!r}")
        try:
            number = int(dof)
        except ValueError:
            raise UsageError(f"{option}: {name}: DOF must be a whole number from 1 to {n_dofs}, "
                             f"got {dof!r}") from None
        if not 1 <= number <= n_dofs:
            raise UsageError(f"{option}: {name}: DOF {number} is out of range (the matrices "
                             f"have {n_dofs} rows, numbered from 1)")
        if name in found:
            raise UsageError(f"{option}: site {name!r} is given twice")
        found[name] = number - 1
    return found


def read_sites(path: str | Path, n_dofs: int) -> dict[str, int]:
    """Read a sites CSV (header ``name,dof``; DOF 1-based) into name -> 0-based row.

    Parameters
    ----------
    path : str or path-like
        The CSV file.
    n_dofs : int
        Number of DOFs of the model.

    Returns
    -------
    dict of str to int
    """
    table = read_csv_table(path, ("name", "dof"), what="site")
    found: dict[str, int] = {}
    for k in range(len(table.rows)):
        name = table.text(k, "name")
        if name in found:
            raise table.error(k, "name", f"site {name!r} is given twice")
        found[name] = table.whole(k, "dof", 1, n_dofs) - 1
    return found


def read_dof_map(path: str | Path, n_dofs: int) -> tuple[np.ndarray, np.ndarray]:
    """Read a DOF map (CSV ``node,direction``, one row per matrix row, in row order).

    Parameters
    ----------
    path : str or path-like
        The CSV file.
    n_dofs : int
        Number of DOFs of the model (the map must have exactly as many rows).

    Returns
    -------
    nodes : ndarray of str
        Node label of each DOF.
    directions : ndarray of str
        Direction of each DOF, one of :data:`DIRECTIONS`.
    """
    table = read_csv_table(path, ("node", "direction"), what="DOF")
    if len(table.rows) != n_dofs:
        raise PlantFileError(f"has {len(table.rows)} rows but the matrices have {n_dofs}: one "
                             "row per matrix row, in order", source=table.source)
    nodes, directions, seen = [], [], {}
    for k in range(n_dofs):
        node = table.text(k, "node")
        direction = table.text(k, "direction").lower()
        if direction not in DIRECTIONS:
            raise table.error(k, "direction",
                              f"expected one of {', '.join(DIRECTIONS)}, got {direction!r}")
        if (node, direction) in seen:
            raise table.error(k, "direction", f"node {node} direction {direction} is also row "
                              f"{seen[(node, direction)] + 1}")
        seen[(node, direction)] = k
        nodes.append(node)
        directions.append(direction)
    return np.array(nodes, dtype=object), np.array(directions, dtype=object)
