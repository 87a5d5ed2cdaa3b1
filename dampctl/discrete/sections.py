"""Second-order sections: the cascade and parallel forms a discrete controller is exported in.

A section is the row (b0, b1, b2, a0 = 1, a1, a2) of
``(b0 + b1 z⁻¹ + b2 z⁻²)/(1 + a1 z⁻¹ + a2 z⁻²)``. A :class:`Cascade` is a gain times a product
of sections; a :class:`ParallelForm` a constant plus a sum of cascades. Also the two
continuous-to-discrete maps on state spaces used by :mod:`dampctl.discrete.equivalents` (Tustin
with an optional prewarp frequency, and ZOH), both through :func:`scipy.signal.cont2discrete`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from dampctl.analysis.closedloop import block_diagonal, series_matrices
from dampctl.errors import UsageError

__all__ = [
    "Cascade",
    "ParallelForm",
    "cascade_from_state_space",
    "sos_response",
    "transmission_zeros",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def _readonly(array) -> np.ndarray:
    out = np.array(array, dtype=float, copy=True)
    out.setflags(write=False)
    return out


def _empty(d) -> Matrices:
    d = np.atleast_2d(np.asarray(d, dtype=float))
    return np.zeros((0, 0)), np.zeros((0, d.shape[1])), np.zeros((d.shape[0], 0)), d


def sos_response(sos: np.ndarray, freq_hz: np.ndarray, rate_hz: float) -> np.ndarray:
    """Frequency response of a cascade of second-order sections.

    Parameters
    ----------
    sos : ndarray, shape (n_sections, 6)
        Rows (b0, b1, b2, 1, a1, a2).
    freq_hz : array_like
        Frequencies (Hz).
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    ndarray of complex
        H(e^{j 2π f / f_s}) at each frequency.
    """
    z1 = np.exp(-2j * np.pi * np.asarray(freq_hz, dtype=float) / rate_hz)
    out = np.ones(z1.shape, dtype=complex)
    for b0, b1, b2, _a0, a1, a2 in np.asarray(sos, dtype=float):
        out *= (b0 + b1 * z1 + b2 * z1**2) / (1.0 + a1 * z1 + a2 * z1**2)
    return out


def _sos_matrices(sos: np.ndarray, gain: float) -> Matrices:
    """Discrete state space of ``gain · Π sections``, each in direct form II transposed."""
    system = _empty([[gain]])
    for b0, b1, b2, _a0, a1, a2 in np.asarray(sos, dtype=float):
        A = np.array([[-a1, 1.0], [-a2, 0.0]])
        B = np.array([[b1 - a1 * b0], [b2 - a2 * b0]])
        C = np.array([[1.0, 0.0]])
        system = series_matrices(system, (A, B, C, np.array([[b0]])))
    return system


def _parallel_matrices(parts: list[Matrices], feedthrough: float) -> Matrices:
    A = _blkdiag([p[0] for p in parts])
    B = np.vstack([p[1] for p in parts]) if parts else np.zeros((0, 1))
    C = np.hstack([p[2] for p in parts]) if parts else np.zeros((1, 0))
    D = np.array([[feedthrough]]) + sum((p[3] for p in parts), np.zeros((1, 1)))
    return A, B, C, D


@dataclass(frozen=True)
class Cascade:
    """``gain · Π_k (b0 + b1 z⁻¹ + b2 z⁻²)/(1 + a1 z⁻¹ + a2 z⁻²)``.

    Parameters
    ----------
    sos : array_like, shape (n_sections, 6)
        Rows (b0, b1, b2, a0 = 1, a1, a2); each numerator scaled so its largest |b| is 1
        (the scale is in ``gain``).
    gain : float
        Overall gain (controller units: actuator unit per sensor unit).
    label : str, optional
        What the cascade is (a branch label, a path).
    """

    sos: np.ndarray
    gain: float
    label: str = ""

    def __post_init__(self) -> None:
        sos = np.array(self.sos, dtype=float).reshape(-1, 6)
        if not np.all(np.isfinite(sos)) or not math.isfinite(float(self.gain)):
            raise UsageError("second-order sections must be finite")
        if sos.size and not np.allclose(sos[:, 3], 1.0):
            raise UsageError("second-order sections must have a0 = 1")
        object.__setattr__(self, "sos", _readonly(sos))
        object.__setattr__(self, "gain", float(self.gain))

    def response(self, freq_hz: np.ndarray, rate_hz: float) -> np.ndarray:
        """Frequency response H(e^{jωT}).

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz).
        rate_hz : float
            Sample rate (Hz).

        Returns
        -------
        ndarray of complex
        """
        return self.gain * sos_response(self.sos, freq_hz, rate_hz)

    def matrices(self) -> Matrices:
        """Discrete state space (A, B, C, D), sections in direct form II transposed."""
        return _sos_matrices(self.sos, self.gain)


@dataclass(frozen=True)
class ParallelForm:
    """``feedthrough + Σ_b cascade_b``: one cascade per branch (or per modal block).

    Parameters
    ----------
    feedthrough : float
        Constant term.
    branches : sequence of Cascade
        The parallel terms.
    """

    feedthrough: float
    branches: tuple[Cascade, ...]

    def __post_init__(self) -> None:
        object.__setattr__(self, "feedthrough", float(self.feedthrough))
        object.__setattr__(self, "branches", tuple(self.branches))

    def response(self, freq_hz: np.ndarray, rate_hz: float) -> np.ndarray:
        """Frequency response H(e^{jωT}).

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz).
        rate_hz : float
            Sample rate (Hz).

        Returns
        -------
        ndarray of complex
        """
        freq_hz = np.asarray(freq_hz, dtype=float)
        out = np.full(freq_hz.shape, self.feedthrough, dtype=complex)
        for branch in self.branches:
            out += branch.response(freq_hz, rate_hz)
        return out

    def matrices(self) -> Matrices:
        """Discrete state space (A, B, C, D) of the sum."""
        return _parallel_matrices([b.matrices() for b in self.branches], self.feedthrough)


def _blkdiag(mats) -> np.ndarray:
    """Block-diagonal matrix of 2-D blocks (empty blocks allowed)."""
    return scipy.linalg.block_diag(*[np.atleast_2d(np.asarray(m, dtype=float)) for m in mats])


_block_diagonal = block_diagonal


def _bilinear(mats: Matrices, sample_time_s: float, prewarp_rad_s: float | None) -> Matrices:
    """Tustin equivalent, s ← c (z−1)/(z+1), c = ω_p / tan(ω_p T/2) (2/T without prewarp)."""
    A, B, C, D = (np.asarray(m, dtype=float) for m in mats)
    if A.shape[0] == 0:
        return A, B, C, D
    dt = sample_time_s
    if prewarp_rad_s:
        dt = 2.0 * math.tan(prewarp_rad_s * sample_time_s / 2.0) / prewarp_rad_s
    import scipy.signal  # here, not at import: it costs 0.3 s to load

    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete((A, B, C, D), dt, method="bilinear")
    return Ad, Bd, Cd, Dd


def _zoh(mats: Matrices, sample_time_s: float) -> Matrices:
    A, B, C, D = (np.asarray(m, dtype=float) for m in mats)
    if A.shape[0] == 0:
        return A, B, C, D
    import scipy.signal  # here, not at import: it costs 0.3 s to load

    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete((A, B, C, D), sample_time_s, method="zoh")
    return Ad, Bd, Cd, Dd


def _normalized(sos: np.ndarray, gain: float, label: str) -> Cascade:
    sos = np.array(sos, dtype=float).reshape(-1, 6)
    for row in sos:
        row[:3] /= row[3]
        row[4:] /= row[3]
        row[3] = 1.0
        scale = float(np.max(np.abs(row[:3])))
        if scale > 0:
            row[:3] /= scale
            gain *= scale
    return Cascade(sos, gain, label)


def transmission_zeros(mats: Matrices) -> np.ndarray:
    """Finite transmission zeros of a square system from its Rosenbrock pencil.

    Parameters
    ----------
    mats : tuple of ndarray
        (A, B, C, D), as many inputs as outputs.

    Returns
    -------
    ndarray of complex
        The finite generalized eigenvalues of ([[A, B], [C, D]], [[I, 0], [0, 0]]).
    """
    A, B, C, D = (np.asarray(m, dtype=float) for m in mats)
    n = A.shape[0]
    if n == 0:
        return np.zeros(0, dtype=complex)
    M = np.block([[A, B], [C, D]])
    N = np.zeros_like(M)
    N[:n, :n] = np.eye(n)
    alpha, beta = scipy.linalg.eig(M, N, right=False, homogeneous_eigvals=True)
    scale = max(1.0, float(np.linalg.norm(M, 1)))
    finite = np.abs(alpha) < 1e8 * scale * np.abs(beta)
    return alpha[finite] / beta[finite]


def _ss_response(mats: Matrices, z: np.ndarray) -> np.ndarray:
    A, B, C, D = mats
    n = A.shape[0]
    if n == 0:
        return np.full(z.shape, D[0, 0], dtype=complex)
    lam, V = np.linalg.eig(A)
    cond = np.linalg.cond(V)
    if np.isfinite(cond) and cond < 1e8:
        cv = (C @ V)[0]
        vb = np.linalg.solve(V, B)[:, 0]
        return D[0, 0] + np.sum(cv * vb / (z[:, None] - lam[None, :]), axis=1)
    eye = np.eye(n)
    return np.array([D[0, 0] + (C @ np.linalg.solve(zk * eye - A, B))[0, 0] for zk in z])


def cascade_from_state_space(mats: Matrices, label: str = "") -> Cascade:
    """Cascade of second-order sections of a discrete SISO state space.

    Poles are the eigenvalues of A, zeros the transmission zeros, the gain is matched at the
    point of the unit circle farthest from every pole and zero, and :func:`scipy.signal.zpk2sos`
    pairs and orders the sections. No transfer-function polynomial is formed.

    Parameters
    ----------
    mats : tuple of ndarray
        Discrete (A, B, C, D), one input and one output.
    label : str, optional
        Label of the cascade.

    Returns
    -------
    Cascade
    """
    A = mats[0]
    if A.shape[0] == 0:
        return Cascade(np.array([[1.0, 0, 0, 1.0, 0, 0]]), float(mats[3][0, 0]), label)
    poles = np.linalg.eigvals(A)
    zeros = transmission_zeros(mats)
    grid = np.exp(1j * np.pi * np.linspace(0.002, 0.98, 97))
    dist = np.min(np.abs(grid[:, None] - np.concatenate([poles, zeros, [np.inf]])[None, :]), 1)
    z0 = grid[np.argmax(dist)]
    h_ss = _ss_response(mats, np.array([z0]))[0]
    if h_ss == 0:
        return Cascade(np.array([[0.0, 0, 0, 1.0, 0, 0]]), 0.0, label)
    h_zp = np.prod(z0 - zeros) / np.prod(z0 - poles)
    # a strictly proper H has r = n_p − n_z delays: pad r zeros at the origin for zpk2sos,
    # then turn each padded factor z into z⁻¹·z² by shifting a numerator one tap right
    r = poles.size - zeros.size
    import scipy.signal  # here, not at import: it costs 0.3 s to load

    sos = np.array(
        scipy.signal.zpk2sos(np.concatenate([zeros, np.zeros(r)]), poles, 1.0), dtype=float
    )
    for _ in range(r):
        row = next(row for row in sos if row[2] == 0.0)
        row[:3] = [0.0, row[0], row[1]]
    gain = float((h_ss / h_zp).real)
    for row in sos:
        scale = float(np.max(np.abs(row[:3])))
        if scale > 0:
            row[:3] /= scale
            gain *= scale
    return Cascade(sos, gain, label)
