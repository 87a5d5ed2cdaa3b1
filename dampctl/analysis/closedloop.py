"""Closed-loop poles of a plant with a controller, and matching them to the plant's modes.

Shared by the damping laws (tuning), assessment and sizing. Pure numpy/scipy: no
python-control model is built, so this is cheap enough to call inside searches.

Conventions: the plant is ``x' = A x + B u, y = C x + D u`` and the controller
``x_c' = A_c x_c + B_c y, u = −(C_c x_c + D_c y)`` (negative feedback, as in
:mod:`dampctl.design`). Loop delays and first-order actuator/sensor roll-offs are folded into
the controller (:func:`lag_elements`), with the delay as a Padé approximant since poles are
needed here; frequency-domain checks elsewhere use the exact e^{−jωT}.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.linalg import block_diag
from scipy.optimize import linear_sum_assignment

__all__ = [
    "MatchedModes",
    "block_diagonal",
    "closed_loop_matrix",
    "closed_loop_modes",
    "delay_matrices",
    "delay_sections",
    "effective_controller",
    "lag_elements",
    "match_modes",
    "match_repeated",
    "modal_damping",
    "open_loop_poles",
    "pade_matrices",
    "plant_loop_delay_s",
    "reference_omega",
    "repeated_clusters",
    "sampling_delay_s",
    "series_matrices",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def closed_loop_matrix(plant: Matrices, controller: Matrices) -> np.ndarray:
    """State matrix of the negative-feedback loop of a plant and a controller.

    Parameters
    ----------
    plant : tuple of ndarray
        (A, B, C, D) of the plant, inputs = actuators, outputs = sensors.
    controller : tuple of ndarray
        (A_c, B_c, C_c, D_c) with ``u = −(C_c x_c + D_c y)``.

    Returns
    -------
    ndarray, shape (n + n_c, n + n_c)
        Closed-loop state matrix over the states ``[x, x_c]``.

    Raises
    ------
    numpy.linalg.LinAlgError
        When the loop is algebraically ill-posed (I + D_c D singular).
    """
    A, B, C, D = plant
    Ac, Bc, Cc, Dc = controller
    n, nc = A.shape[0], Ac.shape[0]
    E = np.linalg.inv(np.eye(D.shape[1]) + Dc @ D) if np.any(D) and np.any(Dc) else None
    if E is None:
        Ux, Uc = -Dc @ C, -Cc
    else:
        Ux, Uc = -E @ Dc @ C, -E @ Cc
    out = np.empty((n + nc, n + nc))
    out[:n, :n] = A + B @ Ux
    out[:n, n:] = B @ Uc
    out[n:, :n] = Bc @ (C + D @ Ux)
    out[n:, n:] = Ac + Bc @ D @ Uc
    return out


def series_matrices(first: Matrices, second: Matrices) -> Matrices:
    """State space of ``second ∘ first`` (the output of ``first`` drives ``second``).

    Parameters
    ----------
    first, second : tuple of ndarray
        (A, B, C, D) of the two systems; first's outputs must match second's inputs.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D) of the series connection, states ``[x_first, x_second]``.
    """
    A1, B1, C1, D1 = first
    A2, B2, C2, D2 = second
    n1, n2 = A1.shape[0], A2.shape[0]
    A = np.zeros((n1 + n2, n1 + n2))
    A[:n1, :n1] = A1
    A[n1:, :n1] = B2 @ C1
    A[n1:, n1:] = A2
    return A, np.vstack([B1, B2 @ D1]), np.hstack([D2 @ C1, C2]), D2 @ D1


def pade_matrices(delay_s: float, order: int = 2) -> Matrices:
    """SISO state space of the [order/order] Padé approximant of e^{−s·delay}.

    Parameters
    ----------
    delay_s : float
        Delay (s), >= 0. Zero gives a unit gain with no states.
    order : int, optional
        Approximant order (1 to 10).

    Returns
    -------
    tuple of ndarray
        (A, B, C, D), one input and one output.
    """
    if delay_s <= 0.0:
        return np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.ones((1, 1))
    from math import comb, factorial

    k = np.arange(order + 1)
    coeff = np.array(
        [factorial(2 * order - j) * comb(order, j) / factorial(2 * order) for j in k]
    ) * (delay_s**k)
    den = coeff[::-1]  # Σ c_j (sT)^j, highest power first
    num = (coeff * (-1.0) ** k)[::-1]
    den, num = den / den[0], num / den[0]
    A = np.zeros((order, order))
    A[0, :] = -den[1:]
    A[1:, :-1] = np.eye(order - 1)
    B = np.zeros((order, 1))
    B[0, 0] = 1.0
    C = (num[1:] - num[0] * den[1:]).reshape(1, order)
    return A, B, C, np.array([[num[0]]])


#: largest number of [2/2] Padé sections per channel in a delay cascade
MAX_DELAY_SECTIONS = 12


def delay_sections(delay_s: float, omega_ref: float) -> int:
    """Number m of [2/2] Padé sections so that ω_ref·T/m ≤ 1 (1 to 12; 0 for T = 0).

    One [2/2] section is all-pass (exact magnitude) and its phase error at ωT = 1 is 1.3e-3 rad,
    so a cascade of m sections of T/m each is that accurate up to ω_ref.

    Parameters
    ----------
    delay_s : float
        Delay (s).
    omega_ref : float
        Highest frequency (rad/s) where the phase must be right.

    Returns
    -------
    int
    """
    if delay_s <= 0.0:
        return 0
    product = omega_ref * delay_s
    if not math.isfinite(product):
        return MAX_DELAY_SECTIONS
    return int(min(max(math.ceil(product), 1), MAX_DELAY_SECTIONS))


def delay_matrices(delay_s: float, omega_ref: float) -> Matrices:
    """SISO state space of e^{−sT} as a cascade of :func:`delay_sections` [2/2] Padé sections.

    Parameters
    ----------
    delay_s : float
        Delay T (s), >= 0.
    omega_ref : float
        Frequency (rad/s) up to which the phase is accurate to about 1.3e-3 rad.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D), one input and one output.
    """
    m = delay_sections(delay_s, omega_ref)
    if m == 0:
        return pade_matrices(0.0)
    one = pade_matrices(delay_s / m, 2)
    chain = one
    for _ in range(m - 1):
        chain = series_matrices(chain, one)
    return chain


def reference_omega(plant) -> float:
    """Delay-accuracy frequency (rad/s) used for a plant's closed-loop poles: 1.5 × top mode.

    Every closed-loop computation of poles with a delay (tuning, sizing, tables, assessment)
    uses this reference, so their damping figures agree.

    Parameters
    ----------
    plant : ModalPlant
        The plant.

    Returns
    -------
    float
        1.5 × its highest natural frequency (rad/s).
    """
    return 1.5 * float(np.max(plant.omegas))


def lag_elements(
    controller: Matrices,
    *,
    delay_s: float = 0.0,
    actuator_bandwidth_hz: Sequence[float | None] = (),
    sensor_bandwidth_hz: Sequence[float | None] = (),
    pade_order: int = 2,
    omega_ref: float | None = None,
) -> Matrices:
    """Fold loop delay and first-order roll-offs into a controller.

    The effective controller is ``R_a(s) · e^{−sT} · K(s) · R_s(s)`` with diagonal first-order
    low-passes R (unit DC gain) at the given corners and the delay as a Padé approximant on every
    actuator channel.

    Parameters
    ----------
    controller : tuple of ndarray
        (A_c, B_c, C_c, D_c), sensors in, actuators out.
    delay_s : float, optional
        Loop delay (s) on every channel.
    actuator_bandwidth_hz, sensor_bandwidth_hz : sequence of float or None, optional
        Corner frequency (Hz) of each actuator / sensor channel; None or missing: ideal.
    pade_order : int, optional
        Order of a single delay approximant (used when ``omega_ref`` is None).
    omega_ref : float, optional
        Frequency (rad/s) up to which the delay's phase must be accurate: the delay becomes a
        cascade of :func:`delay_sections` [2/2] sections (see :func:`delay_matrices`).

    Returns
    -------
    tuple of ndarray
        The effective controller (A, B, C, D), same sign convention.
    """
    _Ac, _Bc, _Cc, Dc = controller
    n_out, n_in = Dc.shape
    system = _diagonal_lowpass(sensor_bandwidth_hz, n_in)
    system = series_matrices(system, controller)
    if delay_s > 0.0:
        if omega_ref is None:
            one = pade_matrices(delay_s, pade_order)
        else:
            one = delay_matrices(delay_s, omega_ref)
        system = series_matrices(system, _repeat(one, n_out))
    return series_matrices(system, _diagonal_lowpass(actuator_bandwidth_hz, n_out))


def _diagonal_lowpass(corners_hz: Sequence[float | None], n: int) -> Matrices:
    corners = [None] * n if not corners_hz else list(corners_hz)
    blocks = []
    for corner in corners:
        if corner is None:
            blocks.append((np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.ones((1, 1))))
        else:
            w = 2.0 * np.pi * corner
            blocks.append((np.array([[-w]]), np.array([[w]]), np.ones((1, 1)), np.zeros((1, 1))))
    return block_diagonal(blocks)


def _repeat(system: Matrices, n: int) -> Matrices:
    return block_diagonal([system] * n)


def block_diagonal(systems) -> Matrices:
    """Block-diagonal connection of state spaces (system k: inputs k, outputs k).

    Parameters
    ----------
    systems : sequence of tuple of ndarray
        (A, B, C, D) of each system; empty (zero-state) systems allowed.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D) of the side-by-side systems, states in order.
    """
    return tuple(block_diag(*[np.atleast_2d(s[k]) for s in systems]) for k in range(4))


def modal_damping(poles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Natural frequency (rad/s) and damping ratio of each pole.

    Parameters
    ----------
    poles : array_like of complex
        Poles (rad/s).

    Returns
    -------
    omega : ndarray
        |p| (rad/s).
    damping : ndarray
        −Re(p)/|p| (1 for a stable real pole, negative when unstable).
    """
    poles = np.asarray(poles, dtype=complex)
    omega = np.abs(poles)
    with np.errstate(invalid="ignore", divide="ignore"):
        damping = np.where(omega > 0, -poles.real / np.where(omega > 0, omega, 1.0), 1.0)
    return omega, damping


@dataclass(frozen=True)
class MatchedModes:
    """Closed-loop poles matched one-to-one to the plant's modes.

    Attributes
    ----------
    poles : ndarray of complex, shape (n_modes,)
        Closed-loop pole (upper half plane, or real) assigned to each plant mode, in mode order.
    freq_hz : ndarray, shape (n_modes,)
        |pole|/2π (Hz).
    damping : ndarray, shape (n_modes,)
        Damping ratio −Re/|p| of each matched pole (1.0 for a real pole: the mode no longer
        oscillates; negative when unstable).
    other_poles : ndarray of complex
        The remaining closed-loop poles (controller, filter, roll-off and delay states), upper
        half plane and real axis only.
    stable : bool
        True when every closed-loop pole has a negative real part.
    max_real_part : float
        Largest real part (1/s) of any closed-loop pole.
    """

    poles: np.ndarray
    freq_hz: np.ndarray
    damping: np.ndarray
    other_poles: np.ndarray
    stable: bool
    max_real_part: float


def match_modes(open_poles: np.ndarray, closed_poles: np.ndarray) -> MatchedModes:
    """Assign closed-loop poles to open-loop modes by minimum total distance.

    Matching is a linear assignment on the distance |ln(p_cl / p_ol)| (scale-free, so a 1 Hz
    and a 5 kHz mode weigh alike), not a sort, so a row always speaks of the same physical mode
    even for near-repeated modes or a pole that has moved far.

    Parameters
    ----------
    open_poles : array_like of complex, shape (n_modes,)
        Open-loop pole of each mode in the upper half plane (−ζω + jω√(1−ζ²)).
    closed_poles : array_like of complex
        All closed-loop poles (both conjugates).

    Returns
    -------
    MatchedModes
    """
    open_poles = np.asarray(open_poles, dtype=complex)
    closed = np.asarray(closed_poles, dtype=complex)
    scale = np.max(np.abs(closed)) if closed.size else 1.0
    candidates = closed[closed.imag >= -1e-9 * max(scale, 1.0)]
    safe = np.where(candidates == 0, 1e-300, candidates)
    cost = np.abs(np.log(safe[None, :] / open_poles[:, None]))
    rows, cols = linear_sum_assignment(cost)
    chosen = np.empty(open_poles.size, dtype=complex)
    chosen[rows] = candidates[cols]
    rest = np.delete(candidates, cols)
    omega, damping = modal_damping(chosen)
    max_real_part = float(np.max(closed.real)) if closed.size else -np.inf
    return MatchedModes(
        poles=chosen,
        freq_hz=omega / (2.0 * np.pi),
        damping=damping,
        other_poles=rest[np.argsort(np.abs(rest))],
        stable=bool(max_real_part < 0.0),
        max_real_part=max_real_part,
    )


def open_loop_poles(omegas: np.ndarray, dampings: np.ndarray) -> np.ndarray:
    """Upper-half-plane poles −ζω + jω√(1−ζ²) (rad/s) of modes.

    Parameters
    ----------
    omegas : array_like
        Natural frequencies ω (rad/s).
    dampings : array_like
        Damping ratios ζ, 0 <= ζ < 1.

    Returns
    -------
    ndarray of complex
        One pole per mode (rad/s).
    """
    omegas, dampings = np.asarray(omegas, float), np.asarray(dampings, float)
    return -dampings * omegas + 1j * omegas * np.sqrt(1.0 - dampings**2)


def sampling_delay_s(sample_rate_hz: float | None) -> float:
    """Equivalent delay (s) of a zero-order hold plus one sample of computation: 1.5 / f_s.

    The ZOH lags by exactly ωT/2 and one sample of latency by ωT (Franklin, Powell & Workman,
    *Digital Control of Dynamic Systems*, 3rd ed. 1998, discrete equivalents); zero when no
    sample rate is given.

    Parameters
    ----------
    sample_rate_hz : float or None
        Sample rate f_s (Hz) of the real-time target; None or 0 for a continuous loop.

    Returns
    -------
    float
        Equivalent delay (s).
    """
    return 0.0 if not sample_rate_hz else 1.5 / float(sample_rate_hz)


def plant_loop_delay_s(plant) -> float:
    """Loop delay (s) the plant file states: ``loop_delay_s`` plus ZOH and one sample.

    Parameters
    ----------
    plant : ModalPlant
        Its requirements give ``loop_delay_s`` and ``sample_rate_hz``.

    Returns
    -------
    float
        Total loop delay (s).
    """
    req = plant.requirements
    return float(req.loop_delay_s or 0.0) + sampling_delay_s(req.sample_rate_hz)


def effective_controller(
    plant,
    design,
    *,
    delay_s: float | None = None,
    roll_off: bool = True,
    pade_order: int | None = None,
) -> Matrices:
    """The design's controller with the loop's delay and the hardware roll-offs folded in.

    Parameters
    ----------
    plant : ModalPlant
        The plant (supplies actuator/sensor ``bandwidth_hz`` and the default delay).
    design : Design
        The design.
    delay_s : float, optional
        Loop delay (s); default :func:`plant_loop_delay_s` of the plant.
    roll_off : bool, optional
        Include the first-order actuator and sensor roll-offs stated in the plant file.
    pade_order : int, optional
        Order of one Padé approximant for the whole delay; default None: a cascade of [2/2]
        sections accurate up to :func:`reference_omega` (what every pole computation uses).

    Returns
    -------
    tuple of ndarray
        (A, B, C, D) with ``u = −(C x_c + D y)``.
    """
    delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
    act_bw = [plant.actuator(a).bandwidth_hz for a in design.actuators] if roll_off else []
    sen_bw = [_sensor_bandwidth(plant, s) for s in design.sensors] if roll_off else []
    return lag_elements(
        design.statespace_matrices(),
        delay_s=delay,
        actuator_bandwidth_hz=act_bw,
        sensor_bandwidth_hz=sen_bw,
        pade_order=pade_order or 2,
        omega_ref=reference_omega(plant) if pade_order is None else None,
    )


def _sensor_bandwidth(plant, name: str):
    return next((s.bandwidth_hz for s in plant.sensors if s.name == name), None)


def closed_loop_modes(
    plant,
    design,
    *,
    delay_s: float | None = None,
    roll_off: bool = True,
    pade_order: int | None = None,
) -> MatchedModes:
    """Closed-loop poles of plant + design, matched to the plant's modes by assignment.

    Every pole is computed (:func:`dampctl.analysis.rootsearch.loop_roots`): by the dense
    eigenproblem for small loops, by the Aberth iteration on the modal characteristic function
    for large ones (the same poles to rounding, at O(n²) instead of O(n³) cost).

    Parameters
    ----------
    plant : ModalPlant
        The plant (all its modes are in the loop).
    design : Design
        The design (its actuators and sensors must exist in the plant).
    delay_s : float, optional
        Loop delay (s), as a Padé approximant; default the plant's stated delay
        (:func:`plant_loop_delay_s`). Pass 0 for the ideal loop.
    roll_off : bool, optional
        Include actuator and sensor roll-offs stated in the plant file.
    pade_order : int, optional
        Order of one Padé approximant for the whole delay; default None: a cascade of [2/2]
        sections accurate up to :func:`reference_omega`.

    Returns
    -------
    MatchedModes
        One matched pole per plant mode, plus the controller-side poles.
    """
    from dampctl.analysis.loopcontroller import LoopController
    from dampctl.analysis.rootsearch import loop_roots, match_to_modes

    ctrl = LoopController.for_design(
        plant, design, delay_s=delay_s, roll_off=roll_off, pade_order=pade_order
    )
    roots = loop_roots(plant, design.actuators, design.sensors, ctrl)
    open_poles = open_loop_poles(plant.omegas, plant.dampings)
    matched = match_to_modes(open_poles, roots.poles)
    clusters = repeated_clusters(open_poles)
    if not clusters:
        return matched
    loop = closed_loop_matrix(plant.statespace_matrices(design.actuators, design.sensors),
                              ctrl.matrices())
    return match_repeated(matched, clusters, loop)


def repeated_clusters(open_poles: np.ndarray, *, rtol: float = 1e-9) -> list[list[int]]:
    """Groups of modes (0-based) with the same open-loop pole (exactly repeated frequencies).

    Parameters
    ----------
    open_poles : array_like of complex
        Open-loop upper pole of each mode.
    rtol : float, optional
        Relative distance under which two poles count as the same.

    Returns
    -------
    list of list of int
        Each group of two or more modes, in mode order.
    """
    poles = np.asarray(open_poles, dtype=complex)
    order = np.argsort(np.abs(poles), kind="stable")
    groups, current = [], [int(order[0])] if poles.size else []
    for k in order[1:]:
        last = poles[current[-1]]
        if abs(poles[k] - last) <= rtol * max(abs(last), 1e-300):
            current.append(int(k))
        else:
            groups.append(current)
            current = [int(k)]
    groups.append(current)
    return [sorted(g) for g in groups if len(g) > 1]


def match_repeated(matched: MatchedModes, clusters: list[list[int]], loop: np.ndarray
                   ) -> MatchedModes:
    """Re-assign the poles of each repeated cluster to the modes by their eigenvectors.

    Poles alone cannot tell two modes of one frequency apart: both open-loop poles are the
    same point, so a pole moved by the loop is as near one as the other. The closed-loop
    eigenvector can: projected on the modal subspace of the cluster (the states
    ``[ω_i q_i, q_i']`` of its modes), it says which shape direction the pole belongs to. Each
    pole of the cluster goes to the mode holding the largest share of its eigenvector (a linear
    assignment on those shares), so a direction no loop sees keeps its own open-loop pole.

    Parameters
    ----------
    matched : MatchedModes
        The matching by pole distance (:func:`match_modes`).
    clusters : list of list of int
        Groups of modes with the same open-loop pole (:func:`repeated_clusters`).
    loop : ndarray
        Closed-loop state matrix, plant states (two per mode, in mode order) first.

    Returns
    -------
    MatchedModes
    """
    poles = matched.poles.copy()
    size = loop.shape[0]
    for group in clusters:
        cluster_poles = poles[group]
        share = np.empty((len(group), len(group)))
        for k, p in enumerate(cluster_poles):
            # eigenvector of the pole: the right singular vector of (loop - p I) of least gain
            _u, _s, vh = np.linalg.svd(loop - p * np.eye(size))
            v = vh[-1].conj()
            energy = np.array([abs(v[2 * m]) ** 2 + abs(v[2 * m + 1]) ** 2 for m in group])
            share[k] = energy / max(energy.sum(), 1e-300)
        rows, cols = linear_sum_assignment(-share)
        for k, j in zip(rows, cols, strict=True):
            poles[group[j]] = cluster_poles[k]
    omega, damping = modal_damping(poles)
    return MatchedModes(poles=poles, freq_hz=omega / (2.0 * np.pi), damping=damping,
                        other_poles=matched.other_poles, stable=matched.stable,
                        max_real_part=matched.max_real_part)
