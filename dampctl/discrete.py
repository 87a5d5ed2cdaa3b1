"""Discrete-time controllers: Tustin or ZOH equivalents as second-order sections.

A design's controller ``u = −K(s) y`` becomes, at a sample rate f_s = 1/T, one
:class:`DiscreteController` holding for each decentralized loop

* the discrete state space (A, B, C, D) of the loop (the exact discretization),
* a **cascade** of second-order sections (b0, b1, b2, a1, a2 with a0 = 1) and a gain, from the
  poles (eigenvalues of A), the transmission zeros of the discrete SISO state space and the
  gain matched at a frequency, then paired and ordered by :func:`scipy.signal.zpk2sos`; the
  transfer-function polynomial route is never taken (it loses all accuracy for lightly damped
  banks of filters),
* a **parallel** form, one cascade per branch of the loop (for a bank of positive-position
  filters one biquad per filter), summed; it is recommended when the loop has several branches
  and it reproduces the state space better than the cascade does.

For a MIMO (LQG) design the discrete state space is exported, and, when the controller's state
matrix is diagonalizable with a well-conditioned eigenvector basis, a modal realisation: real
2×2 (or 1×1) blocks, giving for every actuator/sensor path a parallel sum of biquads plus a
feedthrough.

Methods: ``"tustin"`` (bilinear) with prewarping ``"auto"`` (each continuous section — or each
modal block of a MIMO controller — prewarped at its own centre frequency: a second-order
section at the natural frequency of its poles, a first-order one at its corner; pure gains and
integrators are not warped), a fixed frequency in Hz (as :func:`control.sample_system` with
``prewarp_frequency``) or ``"none"``; or ``"zoh"`` (exact e^{pT} pole mapping of the loop's
state space). Sections with a centre frequency at or above 0.45 f_s are not prewarped (the
warping map diverges at the Nyquist frequency); a note says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Literal

import numpy as np
import scipy.linalg
import scipy.signal

from dampctl.closedloop import series_matrices
from dampctl.design import Branch, Design, Section
from dampctl.errors import UsageError

__all__ = [
    "Cascade",
    "DiscreteController",
    "DiscreteLoop",
    "DiscretePath",
    "ParallelForm",
    "discretize",
    "sos_response",
    "transmission_zeros",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
METHODS = ("tustin", "zoh")
#: sections whose centre frequency is at or above this fraction of f_s are not prewarped
PREWARP_LIMIT = 0.45
#: largest eigenvector condition number accepted for a modal realisation of a MIMO controller
MODAL_COND_LIMIT = 1e8


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
    A = scipy.linalg.block_diag(*[p[0] for p in parts]) if parts else np.zeros((0, 0))
    A = np.asarray(A, dtype=float).reshape(sum(p[0].shape[0] for p in parts), -1)
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
        """H(e^{jωT}) at ``freq_hz`` (Hz) for sample rate ``rate_hz`` (Hz)."""
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
        """H(e^{jωT}) at ``freq_hz`` (Hz) for sample rate ``rate_hz`` (Hz)."""
        freq_hz = np.asarray(freq_hz, dtype=float)
        out = np.full(freq_hz.shape, self.feedthrough, dtype=complex)
        for branch in self.branches:
            out += branch.response(freq_hz, rate_hz)
        return out

    def matrices(self) -> Matrices:
        """Discrete state space (A, B, C, D) of the sum."""
        return _parallel_matrices([b.matrices() for b in self.branches], self.feedthrough)


@dataclass(frozen=True)
class DiscreteLoop:
    """One decentralized loop ``u_k = −K_k(z) y_k`` in discrete time.

    Attributes
    ----------
    pair, actuator, sensor : str
        The loop's pair and signals.
    cascade : Cascade
        Cascade of second-order sections and gain (zpk2sos pairing and ordering).
    parallel : ParallelForm
        One cascade per branch of the continuous loop, summed.
    state_space : tuple of ndarray
        Discrete (A, B, C, D) from which both forms were derived.
    prewarp_hz : tuple of float or None
        Prewarp frequency (Hz) used for each continuous section, branch by branch (None: not
        warped); empty for ZOH.
    cascade_error, parallel_error : float
        Largest relative error of each form against the state space on a frequency grid.
    form : {"cascade", "parallel"}
        The recommended realisation (used by verification and the C routine).
    """

    pair: str
    actuator: str
    sensor: str
    cascade: Cascade
    parallel: ParallelForm
    state_space: Matrices
    prewarp_hz: tuple[float | None, ...]
    cascade_error: float
    parallel_error: float
    form: str

    @property
    def sos(self) -> np.ndarray:
        """Sections of the cascade, shape (n, 6)."""
        return self.cascade.sos

    @property
    def gain(self) -> float:
        """Gain of the cascade."""
        return self.cascade.gain

    def matrices(self) -> Matrices:
        """Discrete state space of the recommended form."""
        return self.cascade.matrices() if self.form == "cascade" else self.parallel.matrices()


@dataclass(frozen=True)
class DiscretePath:
    """One actuator/sensor path of a MIMO controller as parallel biquads (modal realisation).

    Attributes
    ----------
    actuator, sensor : str
        Output and input of the path.
    parallel : ParallelForm
        ``D[a, s] + Σ_blocks biquad``.
    """

    actuator: str
    sensor: str
    parallel: ParallelForm


@dataclass(frozen=True)
class DiscreteController:
    """A design's controller at a sample rate, ready for export.

    Attributes
    ----------
    rate_hz : float
        Sample rate f_s (Hz).
    method : {"tustin", "zoh"}
        Discretization method.
    prewarp : str
        ``"auto"``, ``"none"`` or the fixed prewarp frequency in Hz as text; ``"none"`` for ZOH.
    law, plant_fingerprint : str
        From the design.
    actuators, sensors : tuple of str
        Outputs and inputs of the controller.
    target_modes : tuple of int
        The design's target modes (1-based).
    loops : tuple of DiscreteLoop
        Decentralized loops (empty for a MIMO design).
    state_space : tuple of ndarray
        Discrete (A, B, C, D) of the whole controller (``u = −(C x + D y)``).
    paths : tuple of DiscretePath
        Modal sections of a MIMO design, one per actuator/sensor path (empty when the loops
        hold the sections, or when no modal realisation was possible).
    notes : tuple of str
        What the engineer should know (sections not prewarped, no modal realisation ...).
    """

    rate_hz: float
    method: str
    prewarp: str
    law: str
    plant_fingerprint: str
    actuators: tuple[str, ...]
    sensors: tuple[str, ...]
    target_modes: tuple[int, ...]
    loops: tuple[DiscreteLoop, ...]
    state_space: Matrices
    paths: tuple[DiscretePath, ...] = ()
    notes: tuple[str, ...] = field(default=())

    @property
    def sample_time_s(self) -> float:
        """T = 1/f_s (s)."""
        return 1.0 / self.rate_hz

    def realisation_matrices(self) -> Matrices:
        """Discrete (A, B, C, D) of what the target runs: the recommended form of each loop,
        the modal paths of a MIMO design, or its state space when it has no sections."""
        if self.loops:
            return _block_diagonal([lp.matrices() for lp in self.loops])
        if self.paths:
            return paths_matrices(self.paths, self.actuators, self.sensors)
        return tuple(np.array(m) for m in self.state_space)


def paths_matrices(paths, actuators, sensors) -> Matrices:
    """State space of a MIMO controller given as parallel forms per path.

    Parameters
    ----------
    paths : sequence of DiscretePath
        One per (actuator, sensor) path.
    actuators, sensors : sequence of str
        Output and input order.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D), inputs = sensors, outputs = actuators.
    """
    n_out, n_in = len(actuators), len(sensors)
    parts = []
    D = np.zeros((n_out, n_in))
    for path in paths:
        o, j = list(actuators).index(path.actuator), list(sensors).index(path.sensor)
        A, B, C, Dp = path.parallel.matrices()
        Bf = np.zeros((A.shape[0], n_in))
        Bf[:, j] = B[:, 0]
        Cf = np.zeros((n_out, A.shape[0]))
        Cf[o, :] = C[0, :]
        D[o, j] += Dp[0, 0]
        parts.append((A, Bf, Cf))
    A = np.asarray(scipy.linalg.block_diag(*[p[0] for p in parts]), dtype=float)
    A = A.reshape(sum(p[0].shape[0] for p in parts), -1)
    B = np.vstack([p[1] for p in parts])
    C = np.hstack([p[2] for p in parts])
    return A, B, C, D


def _block_diagonal(systems) -> Matrices:
    out = []
    for k in range(4):
        mats = [np.atleast_2d(s[k]) for s in systems]
        rows, cols = sum(m.shape[0] for m in mats), sum(m.shape[1] for m in mats)
        full = np.zeros((rows, cols))
        r = c = 0
        for m in mats:
            full[r : r + m.shape[0], c : c + m.shape[1]] = m
            r, c = r + m.shape[0], c + m.shape[1]
        out.append(full)
    return tuple(out)


# ---------------------------------------------------------------------- methods
def _bilinear(mats: Matrices, sample_time_s: float, prewarp_rad_s: float | None) -> Matrices:
    """Tustin equivalent, s ← c (z−1)/(z+1), c = ω_p / tan(ω_p T/2) (2/T without prewarp)."""
    A, B, C, D = (np.asarray(m, dtype=float) for m in mats)
    if A.shape[0] == 0:
        return A, B, C, D
    dt = sample_time_s
    if prewarp_rad_s:
        dt = 2.0 * math.tan(prewarp_rad_s * sample_time_s / 2.0) / prewarp_rad_s
    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete((A, B, C, D), dt, method="bilinear")
    return Ad, Bd, Cd, Dd


def _zoh(mats: Matrices, sample_time_s: float) -> Matrices:
    A, B, C, D = (np.asarray(m, dtype=float) for m in mats)
    if A.shape[0] == 0:
        return A, B, C, D
    Ad, Bd, Cd, Dd, _ = scipy.signal.cont2discrete((A, B, C, D), sample_time_s, method="zoh")
    return Ad, Bd, Cd, Dd


def _section_matrices(section: Section) -> Matrices:
    den = np.array(section.den) / section.den[0]
    num = np.zeros(den.size)
    num[den.size - len(section.num) :] = np.array(section.num) / section.den[0]
    order = den.size - 1
    if order == 0:
        return _empty([[num[0]]])
    A = np.zeros((order, order))
    A[0, :] = -den[1:]
    if order == 2:
        A[1, 0] = 1.0
    B = np.zeros((order, 1))
    B[0, 0] = 1.0
    C = (num[1:] - num[0] * den[1:]).reshape(1, order)
    return A, B, C, np.array([[num[0]]])


def centre_frequency(section: Section) -> float | None:
    """Centre frequency (rad/s) of a continuous section, for prewarping.

    Parameters
    ----------
    section : Section
        A continuous section num(s)/den(s).

    Returns
    -------
    float or None
        Second order: natural frequency √(den₂/den₀) of its poles (the larger real-pole corner
        when den₂ = 0); first order: its corner den₁/den₀; None for a pure gain or an integrator.
    """
    den = np.array(section.den, dtype=float) / section.den[0]
    if den.size == 3 and den[2] != 0.0:
        return float(math.sqrt(abs(den[2])))
    if den.size >= 2 and den[-1 if den.size == 2 else 1] != 0.0:
        return float(abs(den[-1 if den.size == 2 else 1]))
    return None


def _branch_discrete(branch: Branch, method: str, T: float, prewarp, notes: list[str]):
    """Discrete state space of one branch and the prewarp frequency of each section (Hz)."""
    system = _empty([[branch.gain]])
    used: list[float | None] = []
    if method == "zoh":
        for section in branch.sections:
            system = series_matrices(system, _section_matrices(section))
        return _zoh(system, T), used
    for section in branch.sections:
        mats = _section_matrices(section)
        if prewarp == "none" or mats[0].shape[0] == 0:
            w = None
        elif prewarp == "auto":
            w = centre_frequency(section)
        else:
            w = 2.0 * math.pi * float(prewarp)
        if w is not None and w * T / (2.0 * math.pi) >= PREWARP_LIMIT:
            notes.append(
                f"section at {w / (2 * math.pi):.6g} Hz is at or above {PREWARP_LIMIT} f_s: "
                "not prewarped"
            )
            w = None
        used.append(None if w is None else w / (2.0 * math.pi))
        system = series_matrices(system, _bilinear(mats, T, w))
    return system, used


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


def _cascade_from_ss(mats: Matrices, T: float, label: str = "") -> Cascade:
    """Poles = eig(A), zeros = transmission zeros, gain matched away from poles and zeros."""
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


def _biquad_of_block(Ad: np.ndarray, bd: np.ndarray, cd: np.ndarray, label: str) -> Cascade:
    """Biquad of a 1- or 2-state SISO block with no feedthrough (strictly proper)."""
    n = Ad.shape[0]
    if n == 1:
        row = [0.0, cd[0] * bd[0], 0.0, 1.0, -Ad[0, 0], 0.0]
    else:
        a1, a2 = -np.trace(Ad), np.linalg.det(Ad)
        # c (zI − A)⁻¹ b = (c b z + c adj(−A) b)/(z² + a1 z + a2), adj(zI − A) = zI − A + tr(A) I
        b1 = float(cd @ bd)
        b2 = float(cd @ ((np.trace(Ad) * np.eye(2) - Ad) @ bd)) * -1.0
        row = [0.0, b1, b2, 1.0, a1, a2]
    return _normalized(np.array([row]), 1.0, label)


def _grid_error(form_response, ss: Matrices, T: float) -> float:
    freq = np.linspace(0.001, 0.499, 400) / T
    ref = _ss_response(ss, np.exp(2j * np.pi * freq * T))
    got = form_response(freq)
    scale = np.maximum(np.abs(ref), 1e-12 * np.max(np.abs(ref)) + 1e-300)
    return float(np.max(np.abs(got - ref) / scale))


# ---------------------------------------------------------------------- entry point
def discretize(
    design: Design,
    rate_hz: float,
    *,
    method: Literal["tustin", "zoh"] = "tustin",
    prewarp: Literal["auto", "none"] | float = "auto",
) -> DiscreteController:
    """Discretize a design's controller at a sample rate.

    Parameters
    ----------
    design : Design
        The design (decentralized loops or a MIMO controller).
    rate_hz : float
        Sample rate f_s (Hz), > 0.
    method : {"tustin", "zoh"}, optional
        Bilinear (Tustin) or zero-order-hold equivalent. Default ``"tustin"``.
    prewarp : {"auto", "none"} or float, optional
        Tustin only: ``"auto"`` prewarps each section (or modal block) at its own centre
        frequency, a number is one prewarp frequency (Hz) for every section, ``"none"`` is plain
        Tustin. Ignored (recorded as ``"none"``) for ZOH when left at ``"auto"``.

    Returns
    -------
    DiscreteController

    Raises
    ------
    UsageError
        Unknown method, non-positive rate, a prewarp frequency with ZOH or at/above Nyquist.
    """
    rate_hz = float(rate_hz)
    if not math.isfinite(rate_hz) or rate_hz <= 0:
        raise UsageError(f"sample rate must be a positive number of Hz, got {rate_hz!r}")
    if method not in METHODS:
        raise UsageError(f"method must be one of {', '.join(METHODS)}, got {method!r}")
    prewarp = _check_prewarp(prewarp, method, rate_hz)
    T = 1.0 / rate_hz
    notes: list[str] = []
    if design.loops:
        loops = tuple(_discrete_loop(lp, method, T, prewarp, notes) for lp in design.loops)
        state_space = _block_diagonal([lp.state_space for lp in loops])
        paths: tuple[DiscretePath, ...] = ()
    else:
        loops = ()
        state_space, paths = _discrete_mimo(design, method, T, prewarp, notes)
    return DiscreteController(
        rate_hz=rate_hz,
        method=method,
        prewarp=prewarp if isinstance(prewarp, str) else repr(float(prewarp)),
        law=design.law,
        plant_fingerprint=design.plant_fingerprint,
        actuators=design.actuators,
        sensors=design.sensors,
        target_modes=design.target_modes,
        loops=loops,
        state_space=tuple(_readonly(m) for m in state_space),
        paths=paths,
        notes=tuple(dict.fromkeys(notes)),
    )


def _check_prewarp(prewarp, method: str, rate_hz: float):
    if isinstance(prewarp, str):
        if prewarp not in ("auto", "none"):
            raise UsageError(f"prewarp must be 'auto', 'none' or a frequency in Hz, got {prewarp!r}")
        return "none" if method == "zoh" else prewarp
    value = float(prewarp)
    if method == "zoh":
        raise UsageError("a prewarp frequency applies to Tustin only, not to ZOH")
    if not math.isfinite(value) or not 0.0 < value < PREWARP_LIMIT * rate_hz:
        raise UsageError(
            f"prewarp frequency must be in (0, {PREWARP_LIMIT} × sample rate) Hz, got {value!r}"
        )
    return value


def _discrete_loop(loop, method: str, T: float, prewarp, notes: list[str]) -> DiscreteLoop:
    parts, used = [], []
    branches = []
    for b, branch in enumerate(loop.branches):
        mats, warp = _branch_discrete(branch, method, T, prewarp, notes)
        parts.append(mats)
        used.extend(warp)
        label = branch.label or f"branch {b + 1}"
        branches.append(_cascade_from_ss(mats, T, label))
    ss = _parallel_matrices(parts, 0.0)
    cascade = _cascade_from_ss(ss, T, loop.pair)
    parallel = ParallelForm(0.0, tuple(branches))
    rate = 1.0 / T
    cascade_error = _grid_error(lambda f: cascade.response(f, rate), ss, T)
    parallel_error = _grid_error(lambda f: parallel.response(f, rate), ss, T)
    form = "parallel" if len(branches) > 1 and parallel_error < cascade_error else "cascade"
    return DiscreteLoop(
        pair=loop.pair,
        actuator=loop.actuator,
        sensor=loop.sensor,
        cascade=cascade,
        parallel=parallel,
        state_space=tuple(_readonly(m) for m in ss),
        prewarp_hz=tuple(used),
        cascade_error=cascade_error,
        parallel_error=parallel_error,
        form=form,
    )


def _modal_blocks(A: np.ndarray):
    """Real block-diagonalizing basis T (A T = T Λ) and the state slices of its blocks."""
    lam, V = np.linalg.eig(A)
    order = np.argsort(np.abs(lam))
    lam, V = lam[order], V[:, order]
    columns, blocks, used = [], [], np.zeros(lam.size, bool)
    scale = max(1.0, float(np.max(np.abs(lam)))) if lam.size else 1.0
    for k in range(lam.size):
        if used[k]:
            continue
        used[k] = True
        start = len(columns)
        if abs(lam[k].imag) <= 1e-12 * scale:
            columns.append(V[:, k].real / np.linalg.norm(V[:, k].real))
            blocks.append(slice(start, start + 1))
            continue
        partner = next(
            (j for j in range(lam.size) if not used[j] and abs(lam[j] - lam[k].conj()) < 1e-8 * scale),
            None,
        )
        if partner is None:
            return None
        used[partner] = True
        v = V[:, k] if lam[k].imag > 0 else V[:, partner]
        columns += [v.real, v.imag]
        blocks.append(slice(start, start + 2))
    Tm = np.column_stack(columns) if columns else np.zeros((0, 0))
    if Tm.size and (not np.isfinite(np.linalg.cond(Tm)) or np.linalg.cond(Tm) > MODAL_COND_LIMIT):
        return None
    return Tm, blocks


def _discrete_mimo(design: Design, method: str, T: float, prewarp, notes: list[str]):
    A, B, C, D = design.statespace_matrices()
    modal = _modal_blocks(A) if A.shape[0] else (np.zeros((0, 0)), [])
    if modal is None:
        if method == "tustin" and prewarp == "auto":
            notes.append("MIMO controller has no well-conditioned modal form: plain Tustin used")
            prewarp = "none"
        w = None if prewarp in ("auto", "none") else 2.0 * math.pi * float(prewarp)
        ss = _bilinear((A, B, C, D), T, w) if method == "tustin" else _zoh((A, B, C, D), T)
        notes.append("no modal realisation: export the discrete state space only")
        return ss, ()
    Tm, blocks = modal
    Tinv = np.linalg.inv(Tm) if Tm.size else Tm
    Am, Bm, Cm = Tinv @ A @ Tm, Tinv @ B, C @ Tm
    parts = []
    for sl in blocks:
        sub = (Am[sl, sl], Bm[sl, :], Cm[:, sl], np.zeros(D.shape))
        if method == "zoh":
            parts.append(_zoh(sub, T))
            continue
        w = None
        if prewarp == "auto":
            w = float(np.max(np.abs(np.linalg.eigvals(sub[0])))) or None
        elif prewarp != "none":
            w = 2.0 * math.pi * float(prewarp)
        if w is not None and w * T / (2.0 * math.pi) >= PREWARP_LIMIT:
            notes.append(f"modal block at {w / (2 * math.pi):.6g} Hz not prewarped (near Nyquist)")
            w = None
        parts.append(_bilinear(sub, T, w))
    Ad = _block_diagonal([(p[0], p[1], p[2], p[3]) for p in parts])[0]
    Bd = np.vstack([p[1] for p in parts]) if parts else np.zeros((0, D.shape[1]))
    Cd = np.hstack([p[2] for p in parts]) if parts else np.zeros((D.shape[0], 0))
    Dd = D + sum((p[3] for p in parts), np.zeros(D.shape))
    paths = []
    for o, act in enumerate(design.actuators):
        for j, sen in enumerate(design.sensors):
            terms = []
            for b, sl in enumerate(blocks):
                # strictly proper part of the block; its feedthrough is in Dd
                p = parts[b]
                terms.append(_biquad_of_block(p[0], p[1][:, j], p[2][o, :], f"block {b + 1}"))
            paths.append(DiscretePath(act, sen, ParallelForm(float(Dd[o, j]), tuple(terms))))
    notes.append("MIMO state space is in the controller's modal coordinates (real 2×2 blocks)")
    return (Ad, Bd, Cd, Dd), tuple(paths)
