"""Modes of an FE model: only those asked for, mass-normalized, and the plant they make.

The generalized eigenproblem K φ = ω² M φ is solved

* by shift-invert Lanczos (:func:`scipy.sparse.linalg.eigsh`, ``mode="normal"``) for the
  lowest modes of a large model: K − σM is factorized once (SuperLU, COLAMD ordering) with
  a small negative shift σ = −:data:`SHIFT_FRACTION` · λ_scale, where λ_scale is the largest
  K_ii / M_ii over the DOFs with mass (about the highest eigenvalue of the mesh). Every
  eigenvalue is >= 0 > σ, so the eigenvalues nearest σ are the lowest ones, rigid-body modes
  (λ = 0) included, and K − σM is non-singular even for a free body;
* by the dense solver (:func:`scipy.linalg.eigh`) for models of at most :data:`DENSE_LIMIT`
  DOFs, or when every mode is asked for (up to :data:`DENSE_MAX` DOFs).

With a frequency limit instead of a count, the Lanczos request is doubled (from 20 modes,
the factorization kept) until the highest mode found lies above the limit.

Shapes are mass-normalized (φᵀ M φ = 1, so each mode's modal mass is 1 kg) and signed so that
their largest entry is positive. A mode with |λ| below :data:`RIGID_TOL` · λ_scale is a
rigid-body mode: at that level an eigenvalue cannot be told from zero in double precision
(rounding puts about 1e-16 · λ_max · (a few hundred) on a zero eigenvalue), and it gets
freq_hz = 0 exactly. A clearly negative eigenvalue means K is not positive semi-definite and
is refused.

Effective modal masses (A. K. Chopra, *Dynamics of Structures*, chapter on earthquake analysis
of multi-DOF systems): for a rigid-body displacement r of unit amplitude in one direction,
Γ_i = φ_iᵀ M r (kg, with φ_iᵀ M φ_i = 1), m_eff,i = Γ_i² and Σ_i m_eff,i = rᵀ M r, the total
mass moving in that direction, when every mode is kept.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.errors import PlantError, UsageError
from dampctl.model.components import Disturbance, Mode
from dampctl.model.fe_matrices import FEModel
from dampctl.model.plant import ModalPlant

__all__ = [
    "DENSE_LIMIT",
    "DENSE_MAX",
    "RIGID_TOL",
    "SHIFT_FRACTION",
    "FEModes",
    "fe_plant",
    "modal_dampings",
    "participation",
    "plant_of_modes",
    "solve_modes",
]

#: models with at most this many DOFs are solved densely (every mode; it is cheaper)
DENSE_LIMIT = 2000
#: the largest model the dense solver is used for (all modes asked: n² doubles, several times)
DENSE_MAX = 20_000
#: |λ| / λ_scale below which a mode is rigid-body (0 Hz)
RIGID_TOL = 1e-13
#: the Lanczos shift as a fraction of λ_scale (negative, below every eigenvalue)
SHIFT_FRACTION = 1e-10
#: first Lanczos request when only a frequency limit is given
FIRST_REQUEST = 20


@dataclass(frozen=True)
class FEModes:
    """The lowest modes of an FE model.

    Parameters
    ----------
    eigenvalues : ndarray, shape (n_modes,)
        ω_i² (rad²/s²), ascending; exactly 0 for rigid-body modes.
    shapes : ndarray, shape (n_dofs, n_modes)
        Mass-normalized mode shapes (φᵀ M φ = 1), largest entry positive.
    solver : {"lanczos", "dense"}
        Which solver found them.
    shift : float
        The Lanczos shift σ (rad²/s²; 0 for the dense solver).
    scale : float
        λ_scale = max K_ii / M_ii (rad²/s²), the reference of :data:`RIGID_TOL`.
    """

    eigenvalues: np.ndarray
    shapes: np.ndarray
    solver: str
    shift: float
    scale: float

    @property
    def n_modes(self) -> int:
        """Number of modes."""
        return int(self.eigenvalues.size)

    @property
    def omegas(self) -> np.ndarray:
        """Natural frequencies (rad/s)."""
        return np.sqrt(self.eigenvalues)

    @property
    def freqs_hz(self) -> np.ndarray:
        """Natural frequencies (Hz)."""
        return self.omegas / (2.0 * math.pi)

    @property
    def rigid(self) -> np.ndarray:
        """True for rigid-body modes (0 Hz)."""
        return self.eigenvalues == 0.0


def solve_modes(
    model: FEModel,
    *,
    n_modes: int | None = None,
    max_freq_hz: float | None = None,
    solver: str = "auto",
) -> FEModes:
    """The lowest modes of an FE model: a number of them, or all up to a frequency.

    Parameters
    ----------
    model : FEModel
        Checked mass and stiffness matrices.
    n_modes : int, optional
        How many of the lowest modes (all of them: the dense solver).
    max_freq_hz : float, optional
        Every mode at or below this frequency (Hz) instead.
    solver : {"auto", "lanczos", "dense"}, optional
        ``auto``: dense for at most :data:`DENSE_LIMIT` DOFs or when every mode is asked for,
        Lanczos otherwise.

    Returns
    -------
    FEModes

    Raises
    ------
    UsageError
        Neither or both of ``n_modes`` and ``max_freq_hz``; more modes than DOFs; every mode
        of a model larger than :data:`DENSE_MAX`.
    PlantError
        K not positive semi-definite, M singular where the dense solver needs it, no mode
        below ``max_freq_hz``.
    """
    n = model.n_dofs
    if (n_modes is None) == (max_freq_hz is None):
        raise UsageError("give the number of modes or a frequency limit (one of them)")
    if n_modes is not None and not 1 <= n_modes <= n:
        raise UsageError(f"the number of modes must be from 1 to {n} (the model's DOFs), "
                         f"got {n_modes}")
    if max_freq_hz is not None and not (math.isfinite(max_freq_hz) and max_freq_hz > 0):
        raise UsageError(f"the frequency limit must be a positive number of Hz, got "
                         f"{max_freq_hz}")
    if solver not in ("auto", "lanczos", "dense"):
        raise UsageError(f"solver must be auto, lanczos or dense, got {solver!r}")
    scale = _scale(model)
    limit = None if max_freq_hz is None else (2.0 * math.pi * max_freq_hz) ** 2
    everything = n_modes is not None and n_modes >= n - 1
    if solver == "auto":
        solver = "dense" if n <= DENSE_LIMIT or everything else "lanczos"
    if solver == "lanczos" and everything:
        solver = "dense"  # ARPACK finds at most n - 1 eigenvalues
    if solver == "dense":
        if n > DENSE_MAX:
            raise UsageError(f"every mode of a {n}-DOF model needs the dense solver, which is "
                             f"kept to {DENSE_MAX} DOFs (memory): ask for fewer modes")
        (values, vectors), shift = _dense(model), 0.0
    else:
        values, vectors, shift = _lanczos(model, scale, n_modes, limit)
    values, vectors = _tidy(model, values, vectors, scale)
    if limit is not None:
        keep = values <= limit
        if not np.any(keep):
            raise PlantError(f"no mode at or below {max_freq_hz:g} Hz (the lowest is at "
                             f"{math.sqrt(values[0]) / (2 * math.pi):.6g} Hz)",
                             source=model.sources[1])
        values, vectors = values[keep], vectors[:, keep]
    elif n_modes is not None:
        values, vectors = values[:n_modes], vectors[:, :n_modes]
    for array in (values, vectors):
        array.setflags(write=False)
    return FEModes(values, vectors, solver, float(shift), float(scale))


def _scale(model: FEModel) -> float:
    """λ_scale = max K_ii / M_ii over the DOFs with mass (rad²/s²)."""
    m, k = model.mass.diagonal(), model.stiffness.diagonal()
    ratios = k[m > 0] / m[m > 0]
    top = float(np.max(ratios)) if ratios.size else 0.0
    if top <= 0.0:
        raise PlantError("the stiffness matrix has no positive diagonal entry where there is "
                         "mass: no mode would have a frequency", source=model.sources[1])
    return top


def _dense(model: FEModel) -> tuple[np.ndarray, np.ndarray]:
    from scipy.linalg import LinAlgError, eigh

    try:
        return eigh(model.stiffness.toarray(), model.mass.toarray())
    except LinAlgError:
        raise PlantError("the mass matrix is not positive definite (a DOF without mass?): "
                         "the dense solver needs it; ask for fewer modes than DOFs so that "
                         "the Lanczos solver is used", source=model.sources[0]) from None


def _lanczos(model: FEModel, scale: float, n_modes: int | None,
             limit: float | None) -> tuple[np.ndarray, np.ndarray, float]:
    from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigsh, splu

    n = model.n_dofs
    shift = -SHIFT_FRACTION * scale
    shifted = (model.stiffness - shift * model.mass).tocsc()
    try:
        factor = splu(shifted, permc_spec="COLAMD")
    except RuntimeError as exc:
        raise PlantError(f"K - σM cannot be factorized ({exc}): a DOF with neither mass nor "
                         "stiffness?", source=model.sources[1]) from None
    inverse = LinearOperator((n, n), matvec=factor.solve, dtype=float)
    count = n_modes if n_modes is not None else min(FIRST_REQUEST, n - 2)
    while True:
        count = min(count, n - 2) if n > 2 else 1
        try:
            values, vectors = eigsh(model.stiffness, k=count, M=model.mass, sigma=shift,
                                    which="LM", mode="normal", OPinv=inverse)
        except ArpackNoConvergence as exc:
            raise PlantError(f"the Lanczos solver did not converge on {count} modes ({exc})",
                             source=model.sources[1]) from None
        if limit is None or np.max(values) > limit or count >= n - 2:
            return values, vectors, shift
        count *= 2


def _tidy(model: FEModel, values: np.ndarray, vectors: np.ndarray,
          scale: float) -> tuple[np.ndarray, np.ndarray]:
    """Sorted, rigid modes set to 0, mass-normalized, largest entry positive."""
    order = np.argsort(values)
    values, vectors = np.array(values[order], dtype=float), np.array(vectors[:, order])
    negative = values < -RIGID_TOL * scale
    if np.any(negative):
        k = int(np.flatnonzero(negative)[0])
        raise PlantError(f"the stiffness matrix is not positive semi-definite: eigenvalue "
                         f"{values[k]:.6g} rad²/s² (ω² of mode {k + 1}) is negative",
                         source=model.sources[1])
    values[np.abs(values) < RIGID_TOL * scale] = 0.0
    masses = np.einsum("ij,ij->j", vectors, model.mass @ vectors)
    vectors = vectors / np.sqrt(masses)
    peak = vectors[np.argmax(np.abs(vectors), axis=0), np.arange(vectors.shape[1])]
    vectors = vectors * np.where(peak < 0, -1.0, 1.0)
    return values, vectors


def participation(model: FEModel, modes: FEModes, r: np.ndarray) -> np.ndarray:
    """Modal participation factors Γ_i = φ_iᵀ M r (kg) for a rigid-body displacement r.

    With mass-normalized shapes the effective modal mass of mode i is Γ_i² and, summed over
    every mode, they give rᵀ M r (Chopra, *Dynamics of Structures*).

    Parameters
    ----------
    model : FEModel
        The matrices.
    modes : FEModes
        Its modes.
    r : ndarray, shape (n_dofs,)
        Displacement of every DOF for a unit rigid-body motion (1 on the DOFs along the
        direction, 0 elsewhere).

    Returns
    -------
    ndarray, shape (n_modes,)
    """
    r = np.asarray(r, dtype=float)
    return modes.shapes.T @ (model.mass @ r)


def modal_dampings(
    modes: FEModes,
    *,
    ratio: float | None = None,
    per_mode: Mapping[int, float] | None = None,
    rayleigh: tuple[float, float] | None = None,
    source: str = "damping",
) -> np.ndarray:
    """Damping ratio of each mode: one for all, one per mode, or Rayleigh.

    Rigid-body modes get 0 (a free body has no damping ratio).

    Parameters
    ----------
    modes : FEModes
        The modes.
    ratio : float, optional
        One ratio for every mode.
    per_mode : mapping of int to float, optional
        Ratio by mode number (1-based); every flexible mode needs one.
    rayleigh : tuple of float, optional
        (α, β) of C = α M + β K: ζ_i = α / (2 ω_i) + β ω_i / 2.
    source : str, optional
        Where ``per_mode`` came from, for messages.

    Returns
    -------
    ndarray, shape (n_modes,)
    """
    if sum(x is not None for x in (ratio, per_mode, rayleigh)) != 1:
        raise UsageError("give one damping: a ratio, a ratio per mode, or Rayleigh (α, β)")
    w = modes.omegas
    flexible = ~modes.rigid
    out = np.zeros(modes.n_modes)
    if ratio is not None:
        out[flexible] = ratio
    elif rayleigh is not None:
        alpha, beta = rayleigh
        out[flexible] = alpha / (2.0 * w[flexible]) + beta * w[flexible] / 2.0
        bad = flexible & ~((out >= 0.0) & (out < 1.0))
        if np.any(bad):
            k = int(np.flatnonzero(bad)[0])
            raise UsageError(f"Rayleigh damping α = {alpha:g}, β = {beta:g} gives mode {k + 1} "
                             f"({modes.freqs_hz[k]:.6g} Hz) a damping ratio of {out[k]:.6g}; "
                             "it must be in [0, 1)")
    else:
        for k in np.flatnonzero(flexible):
            if k + 1 not in per_mode:
                raise PlantError(f"no damping ratio for mode {k + 1} "
                                 f"({modes.freqs_hz[k]:.6g} Hz)", source=source)
            out[k] = per_mode[k + 1]
    return out


def fe_plant(
    model: FEModel,
    sites: Mapping[str, int],
    *,
    n_modes: int | None = None,
    max_freq_hz: float | None = None,
    damping: float = 0.01,
    title: str = "",
    disturbances: Sequence[Disturbance] = (),
) -> ModalPlant:
    """The modal plant of an FE model at named DOFs.

    Parameters
    ----------
    model : FEModel
        Checked matrices (:func:`~dampctl.model.fe_matrices.fe_model`).
    sites : mapping of str to int
        Site name to DOF row (0-based).
    n_modes : int, optional
        How many of the lowest modes.
    max_freq_hz : float, optional
        Every mode up to this frequency (Hz) instead.
    damping : float, optional
        Damping ratio of every flexible mode (default 0.01).
    title : str, optional
        Plant title.
    disturbances : sequence of Disturbance, optional
        Disturbances to put in the plant.

    Returns
    -------
    ModalPlant
        Mass-normalized modes (modal mass 1 kg), only the sites' shape values.
    """
    modes = solve_modes(model, n_modes=n_modes, max_freq_hz=max_freq_hz)
    return plant_of_modes(modes, sites, modal_dampings(modes, ratio=damping), title=title,
                          disturbances=disturbances)


def plant_of_modes(modes: FEModes, sites: Mapping[str, int], dampings: np.ndarray, *,
                   title: str = "", disturbances: Sequence[Disturbance] = ()) -> ModalPlant:
    """The plant of solved modes: their frequencies and dampings, the sites' shape rows.

    Parameters
    ----------
    modes : FEModes
        The modes.
    sites : mapping of str to int
        Site name to DOF row (0-based).
    dampings : ndarray
        Damping ratio per mode.
    title : str, optional
        Plant title.
    disturbances : sequence of Disturbance, optional
        Disturbances to put in the plant.

    Returns
    -------
    ModalPlant
    """
    if not sites:
        raise UsageError("name at least one site (a DOF whose motion the plant keeps)")
    n = modes.shapes.shape[0]
    for name, row in sites.items():
        if not 0 <= int(row) < n:
            raise UsageError(f"site {name!r}: DOF {int(row) + 1} is out of range (1 to {n})")
    rigid = int(np.count_nonzero(modes.rigid))
    if rigid:
        raise UsageError(f"the model has {rigid} rigid-body mode(s) (0 Hz): a dampctl plant "
                         "holds flexible modes only; constrain the model where it is mounted "
                         "(e.g. ground the base DOFs, or add the mounts' stiffness)")
    freqs = modes.freqs_hz
    built = [Mode(freq_hz=float(f), damping=float(z), modal_mass_kg=1.0)
             for f, z in zip(freqs, dampings, strict=True)]
    shape_rows = {name: np.array(modes.shapes[int(row)]) for name, row in sites.items()}
    return ModalPlant(modes=built, sites=shape_rows, title=title,
                      disturbances=tuple(disturbances))

