"""Discrete-time controllers: Tustin or ZOH equivalents as second-order sections.

A design's controller ``u = −K(s) y`` becomes, at a sample rate f_s = 1/T, one
:class:`DiscreteController` holding for each decentralized loop

* the discrete state space (A, B, C, D) of the loop (the exact discretization),
* a **cascade** of second-order sections (b0, b1, b2, a1, a2 with a0 = 1) and a gain, from the
  poles (eigenvalues of A), the transmission zeros of the discrete SISO state space and the
  gain matched at a frequency, then paired and ordered by :func:`scipy.signal.zpk2sos`; the
  transfer-function polynomial route is never taken (it loses all accuracy for lightly damped
  banks of filters). Under Tustin a branch needs no root finding at all: each continuous
  section maps exactly to one biquad (three coefficients), so a single-branch loop and every
  branch of the parallel form are built that way, sections ordered with the poles closest to
  the unit circle last,
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

from dampctl.analysis.closedloop import series_matrices
from dampctl.design import Branch, Design, Section
from dampctl.discrete.mimo import (
    PREWARP_LIMIT,
    DiscretePath,
    _discrete_mimo,
    _given_discrete,
    _not_prewarped,
    paths_matrices,
)
from dampctl.discrete.sections import (
    Cascade,
    ParallelForm,
    _bilinear,
    _block_diagonal,
    _empty,
    _normalized,
    _parallel_matrices,
    _readonly,
    _ss_response,
    _zoh,
    cascade_from_state_space,
    sos_response,
    transmission_zeros,
)
from dampctl.errors import UsageError

__all__ = [
    "Cascade",
    "DiscreteController",
    "DiscreteLoop",
    "DiscretePath",
    "ParallelForm",
    "centre_frequency",
    "discretize",
    "sos_response",
    "transmission_zeros",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
#: relative error of the sections against the state space above which a note is raised
REALISATION_TOLERANCE = 1e-6
METHODS = ("tustin", "zoh")


@dataclass(frozen=True)
class DiscreteLoop:
    """One decentralized loop ``u_k = −K_k(z) y_k`` in discrete time.

    Attributes
    ----------
    pair, actuator, sensor : str
        The loop's pair and signals.
    cascade : Cascade
        Cascade of second-order sections and gain (zpk2sos pairing and ordering; for a
        single-branch Tustin loop, the exact biquad of each continuous section).
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
    def cascade_gain(self) -> float:
        """Gain of the cascade (multiplies its normalized sections; not the law's gain)."""
        return self.cascade.gain

    def matrices(self) -> Matrices:
        """Discrete state space of the recommended form."""
        return self.cascade.matrices() if self.form == "cascade" else self.parallel.matrices()


@dataclass(frozen=True)
class DiscreteController:
    """A design's controller at a sample rate, ready for export.

    Attributes
    ----------
    rate_hz : float
        Sample rate f_s (Hz).
    method : {"tustin", "zoh", "given"}
        Discretization method (``"given"``: a discrete custom controller used as it is).
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
    block_prewarp_hz : tuple of float or None
        MIMO design under Tustin: the prewarp frequency (Hz) of each modal block, None where
        a block was not prewarped (the loops carry their sections' own ``prewarp_hz``).
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
    block_prewarp_hz: tuple[float | None, ...] = ()

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


# ---------------------------------------------------------------------- methods


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


def _bilinear_row(section: Section, c: float) -> np.ndarray:
    """Exact Tustin image of a section of degree ≤ 2: s ← c (1 − z⁻¹)/(1 + z⁻¹).

    Both polynomials are padded to the denominator's degree n and multiplied by (1 + z⁻¹)^n,
    which for n ≤ 2 is exact arithmetic on three coefficients (no root finding).
    """
    n = len(section.den) - 1
    den = np.array(section.den, dtype=float)
    num = np.zeros(n + 1)
    num[n + 1 - len(section.num) :] = section.num

    def image(p):
        if n == 2:
            p0, p1, p2 = p[0] * c * c, p[1] * c, p[2]
            return np.array([p0 + p1 + p2, 2.0 * (p2 - p0), p0 - p1 + p2])
        if n == 1:
            return np.array([p[0] * c + p[1], p[1] - p[0] * c, 0.0])
        return np.array([p[0], 0.0, 0.0])

    b, a = image(num), image(den)
    return np.concatenate([b / a[0], [1.0], a[1:] / a[0]])


def _branch_discrete(branch: Branch, method: str, T: float, prewarp, notes: list[str]):
    """Discrete state space of one branch, the prewarp frequency of each section (Hz), and
    for Tustin the exact biquad of each section (None for ZOH)."""
    system = _empty([[branch.gain]])
    used: list[float | None] = []
    if method == "zoh":
        for section in branch.sections:
            system = series_matrices(system, _section_matrices(section))
        return _zoh(system, T), used, None
    rows = []
    for section in branch.sections:
        mats = _section_matrices(section)
        if prewarp == "none" or mats[0].shape[0] == 0:
            w = None
        elif prewarp == "auto":
            w = centre_frequency(section)
        else:
            w = 2.0 * math.pi * float(prewarp)
        if w is not None and w * T / (2.0 * math.pi) >= PREWARP_LIMIT:
            notes.append(_not_prewarped("section", w, T))
            w = None
        used.append(None if w is None else w / (2.0 * math.pi))
        system = series_matrices(system, _bilinear(mats, T, w))
        if mats[0].shape[0]:
            rows.append(_bilinear_row(section, w / math.tan(w * T / 2) if w else 2.0 / T))
        else:
            rows.append(np.array([section.num[0] / section.den[0], 0, 0, 1.0, 0, 0]))
    return system, used, rows


def _exact_cascade(rows, gain: float, label: str) -> Cascade:
    """Branch cascade from exact per-section biquads, poles closest to |z| = 1 last."""
    rows = [np.asarray(r, dtype=float) for r in rows] or [np.array([1.0, 0, 0, 1.0, 0, 0])]
    radius = [float(np.max(np.abs(np.roots([1.0, r[4], r[5]])), initial=0.0)) for r in rows]
    order = np.argsort(radius, kind="stable")
    return _normalized(np.array([rows[k] for k in order]), gain, label)


def _grid_error(form_response, ss: Matrices, T: float) -> float:
    """Largest error on 400 frequencies up to Nyquist, relative to the response there (floored
    at 1e-6 of the peak, so deep nulls such as a Tustin zero at z = −1 do not dominate)."""
    freq = np.linspace(0.001, 0.499, 400) / T
    ref = _ss_response(ss, np.exp(2j * np.pi * freq * T))
    got = form_response(freq)
    scale = np.maximum(np.abs(ref), 1e-6 * np.max(np.abs(ref)) + 1e-300)
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
    if design.controller_rate_hz is not None:
        own = design.controller_rate_hz
        if abs(rate_hz - own) > 1e-9 * own:
            raise UsageError(
                f"this controller is discrete at {own:.6g} Hz and runs at that rate only: "
                f"export it with --rate {own:.6g} (got {rate_hz:.6g} Hz)"
            )
        notes_given: list[str] = []
        state_space, paths = _given_discrete(design, 1.0 / own, notes_given)
        return DiscreteController(
            rate_hz=own,
            method="given",
            prewarp="none",
            law=design.law,
            plant_fingerprint=design.plant_fingerprint,
            actuators=design.actuators,
            sensors=design.sensors,
            target_modes=design.target_modes,
            loops=(),
            state_space=tuple(_readonly(np.asarray(m, dtype=float)) for m in state_space),
            paths=paths,
            notes=tuple(dict.fromkeys(notes_given)),
        )
    prewarp = _check_prewarp(prewarp, method, rate_hz)
    T = 1.0 / rate_hz
    notes: list[str] = []
    block_prewarp: list[float | None] = []
    if design.loops:
        loops = tuple(_discrete_loop(lp, method, T, prewarp, notes) for lp in design.loops)
        state_space = _block_diagonal([lp.state_space for lp in loops])
        paths: tuple[DiscretePath, ...] = ()
    else:
        loops = ()
        state_space, paths = _discrete_mimo(design, method, T, prewarp, notes, block_prewarp)
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
        block_prewarp_hz=tuple(block_prewarp),
    )


def _check_prewarp(prewarp, method: str, rate_hz: float):
    if isinstance(prewarp, str):
        if prewarp not in ("auto", "none"):
            raise UsageError(
                f"prewarp must be 'auto', 'none' or a frequency in Hz, got {prewarp!r}"
            )
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
        mats, warp, rows = _branch_discrete(branch, method, T, prewarp, notes)
        parts.append(mats)
        used.extend(warp)
        label = branch.label or f"branch {b + 1}"
        if rows is None:
            branches.append(cascade_from_state_space(mats, label))
        else:
            branches.append(_exact_cascade(rows, branch.gain, label))
    ss = _parallel_matrices(parts, 0.0)
    if len(branches) == 1 and method == "tustin":
        cascade = Cascade(branches[0].sos, branches[0].gain, loop.pair)
    else:
        cascade = cascade_from_state_space(ss, loop.pair)
    parallel = ParallelForm(0.0, tuple(branches))
    rate = 1.0 / T
    cascade_error = _grid_error(lambda f: cascade.response(f, rate), ss, T)
    parallel_error = _grid_error(lambda f: parallel.response(f, rate), ss, T)
    form = "parallel" if len(branches) > 1 and parallel_error < cascade_error else "cascade"
    error = min(cascade_error, parallel_error)
    if error > REALISATION_TOLERANCE:
        notes.append(
            f"loop {loop.pair}: the sections reproduce the discrete state space only to "
            f"{error:.1e} relative; check the frequency response before use"
        )
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
