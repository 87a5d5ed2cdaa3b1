"""Every closed-loop pole of a modal plant with a controller, without the dense eigenproblem.

The closed-loop poles are the roots of f(s) = p(s) · det(sI − A_c) · det(I + K(s) G(s))
(:mod:`dampctl.analysis.loopresponse`), a polynomial of degree N = 2n + n_c. They are found
all at once by the Ehrlich–Aberth iteration (O. Aberth, "Iteration methods for finding all
zeros of a polynomial simultaneously", *Mathematics of Computation* 27(122), 1973; L. W.
Ehrlich, *Communications of the ACM* 10(2), 1967): each approximation z_k takes the Newton
correction N_k = f(z_k)/f'(z_k) of the polynomial deflated by all the others,

    z_k ← z_k − N_k / (1 − N_k Σ_{j≠k} 1/(z_k − z_j)),

which converges cubically to simple roots and never lets two approximations settle on the same
simple root. f'/f needs only the modal sum and the controller's blocks, O(n·m²) per point, so
one sweep costs O(N·n·m²) against O(N³) for the dense eigenproblem — the approach of the
secular-equation solvers of D. A. Bini and L. Robol ("Solving secular and polynomial equations:
a multiprecision algorithm", *J. Computational and Applied Mathematics* 272, 2014).

The approximations start at the open-loop poles moved by the first-order estimate of each
mode's shift (or at poles the caller knows better, e.g. from a reduced model) and at the
controller's own poles; converged ones are frozen. When every one of the N approximations has
converged, the N roots of the degree-N polynomial are all found: that is the stability
certificate (:func:`certify`). When some do not converge (a multiple root, a start far from
everything) the dense eigenvalues of the closed-loop matrix are used instead, and the result
says so. Modes the loops neither drive nor see keep their open-loop poles exactly.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dampctl.analysis.loopcontroller import controller_response
from dampctl.analysis.loopresponse import CHUNK_BYTES, ControllerResponse, ModalChannels

__all__ = [
    "ABERTH",
    "DENSE",
    "DENSE_BELOW",
    "CharacteristicFunction",
    "ClosedLoopRoots",
    "closed_loop_roots",
    "first_order_shifts",
    "loop_roots",
    "match_to_modes",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: method names reported with the poles
ABERTH = "all poles by Aberth iteration on the modal characteristic function"
DENSE = "all poles by dense eigenvalues of the closed-loop matrix"

#: relative step below which an approximation counts as a root
ROOT_TOL = 1e-12
#: sweeps before giving up on the iteration
MAX_SWEEPS = 400
#: the dense eigenproblem stays the fallback up to this many closed-loop states
DENSE_LIMIT = 4000
#: below this many closed-loop states the dense eigenproblem is the faster way
DENSE_BELOW = 400


class CharacteristicFunction:
    """f'/f of the closed-loop characteristic polynomial at complex points.

    Parameters
    ----------
    channels : ModalChannels
        The plant from the controller's outputs (plant inputs) to its inputs (plant outputs).
    controller : tuple of ndarray or ControllerResponse
        (A_c, B_c, C_c, D_c) with ``u = −(C_c x_c + D_c y)``.
    """

    def __init__(self, channels: ModalChannels, controller):
        self.channels = channels
        self.controller = controller_response(controller)
        self.modes = np.flatnonzero(channels.seen)

    @property
    def degree(self) -> int:
        """Number of roots N = 2·(seen modes) + controller states."""
        return 2 * self.modes.size + self.controller.n_states

    def log_derivative(self, s: np.ndarray) -> np.ndarray:
        """f'(s)/f(s) at complex points.

        Away from the controller's poles f'/f = p'/p + tr((sI − A_c)⁻¹) + tr(M⁻¹M') with
        M = I + K G. Within 20 % of a controller pole K is huge (a cascade of k equal delay
        sections has a pole of order k there) and those terms cancel badly; there the other
        Schur complement is used, f ∝ p · det(I + D_c G) · det(T), T = sI − A_c + B_c W C_c,
        W = G (I + D_c G)⁻¹, which has no controller poles.

        Parameters
        ----------
        s : array_like of complex
            Points (rad/s).

        Returns
        -------
        ndarray of complex
        """
        s = np.atleast_1d(np.asarray(s, dtype=complex)).ravel()
        out = np.empty(s.size, dtype=complex)
        near = self._near_controller_poles(s)
        far = np.flatnonzero(~near)
        if far.size:
            out[far] = self._loop_form(s[far])
        if np.any(near):
            out[near] = self._controller_form(s[near])
        return out

    def _near_controller_poles(self, s: np.ndarray) -> np.ndarray:
        poles = self.controller.poles
        if poles.size == 0:
            return np.zeros(s.size, dtype=bool)
        near = np.zeros(s.size, dtype=bool)
        for p in np.unique(np.round(poles, 6)):
            near |= np.abs(s - p) < 0.2 * max(abs(p), 1e-9)
        return near

    def _loop_form(self, s: np.ndarray) -> np.ndarray:
        out = np.empty(s.size, dtype=complex)
        m = self.channels.D.shape[1]
        step = max(1, int(CHUNK_BYTES // (16 * 6 * max(self.modes.size, 1))))
        for lo in range(0, s.size, step):
            part = s[lo : lo + step]
            G, dG, dlogp = self.channels.response(
                part, derivative=True, log_poles=True, modes=self.modes
            )
            K, dK, trace = self.controller.response(part, derivative=True, log_poles=True)
            M = np.eye(m)[None] + K @ G
            dM = dK @ G + K @ dG
            with np.errstate(all="ignore"):
                try:
                    loop = np.trace(np.linalg.solve(M, dM), axis1=1, axis2=2)
                except np.linalg.LinAlgError:
                    loop = np.array([_solve_trace(a, b) for a, b in zip(M, dM, strict=True)])
            out[lo : lo + step] = dlogp + trace + loop
        return out

    def _controller_form(self, s: np.ndarray) -> np.ndarray:
        Ac, Bc, Cc, Dc = self.controller.state_space
        G, dG, dlogp = self.channels.response(s, derivative=True, log_poles=True, modes=self.modes)
        m_in = Dc.shape[0]
        E = np.eye(m_in)[None] + Dc[None] @ G  # I + D_c G, (P, m_in, m_in)
        F = np.eye(G.shape[1])[None] + G @ Dc[None]  # I + G D_c, (P, m_out, m_out)
        with np.errstate(all="ignore"):
            Einv = np.linalg.inv(E)
            W = G @ Einv
            dW = np.linalg.solve(F, dG) @ Einv
            feed = np.trace(Einv @ (Dc[None] @ dG), axis1=1, axis2=2)
            n_c = Ac.shape[0]
            T = s[:, None, None] * np.eye(n_c) - Ac + Bc[None] @ W @ Cc[None]
            dT = np.eye(n_c)[None] + Bc[None] @ dW @ Cc[None]
            core = np.trace(np.linalg.solve(T, dT), axis1=1, axis2=2)
        return dlogp + feed + core


def _solve_trace(M: np.ndarray, dM: np.ndarray) -> complex:
    try:
        return complex(np.trace(np.linalg.solve(M, dM)))
    except np.linalg.LinAlgError:  # s is a root of det(M) exactly: the step is zero
        return complex(np.inf)


def first_order_shifts(channels: ModalChannels, controller: ControllerResponse) -> np.ndarray:
    """First-order closed-loop shift of each mode's upper pole, −bᵢᵀK(λᵢ)cᵢ λᵢ^o/(λᵢ − λ̄ᵢ).

    From s² + 2ζωs + ω² + bᵀK(s)c s^o = 0 for one mode with the loop around it (Preumont,
    *Vibration Control of Active Structures*, 3rd ed. 2011, collocated control; from memory);
    the other modes are left out, so it is a starting point, not an answer.

    Parameters
    ----------
    channels : ModalChannels
        The plant channels.
    controller : ControllerResponse
        The controller.

    Returns
    -------
    ndarray of complex, shape (n,)
        Shift of each upper pole (rad/s); 0 for a mode with ω = 0.
    """
    lam = channels.poles
    K = controller.response(lam)  # (n, m_in, m_out)
    c = channels.c.T * lam[:, None] ** channels.orders[None, :]  # (n, m_out)
    bkc = np.einsum("ni,nij,nj->n", channels.b, K, c)
    gap = lam - lam.conj()
    with np.errstate(all="ignore"):
        shift = np.where(np.abs(gap) > 0, -bkc / np.where(gap == 0, 1.0, gap), 0.0)
    return np.where(np.isfinite(shift), shift, 0.0)


@dataclass(frozen=True)
class ClosedLoopRoots:
    """Every closed-loop pole of a plant with a controller.

    Attributes
    ----------
    poles : ndarray of complex, shape (2n + n_c,)
        All closed-loop poles (rad/s), both conjugates of each pair.
    method : str
        :data:`ABERTH` or :data:`DENSE`.
    sweeps : int
        Aberth sweeps made (0 for the dense method).
    complete : bool
        True when every pole was found (all approximations converged, or the dense method).
    """

    poles: np.ndarray
    method: str
    sweeps: int
    complete: bool

    @property
    def max_real_part(self) -> float:
        """Largest real part (1/s)."""
        return float(np.max(self.poles.real)) if self.poles.size else -np.inf

    @property
    def stable(self) -> bool:
        """True when every pole has a negative real part (and every pole was found)."""
        return self.complete and self.max_real_part < 0.0


def closed_loop_roots(
    channels: ModalChannels,
    controller: Matrices,
    *,
    starts: dict[int, complex] | None = None,
    plant_matrices: Matrices | None = None,
    tol: float = ROOT_TOL,
    max_sweeps: int = MAX_SWEEPS,
) -> ClosedLoopRoots:
    """All closed-loop poles by Aberth iteration, with the dense eigenproblem as fallback.

    Parameters
    ----------
    channels : ModalChannels
        The plant from the actuators to the sensors.
    controller : tuple of ndarray
        Effective controller (A_c, B_c, C_c, D_c), ``u = −(C_c x_c + D_c y)``.
    starts : dict of int to complex, optional
        Better starting points for some modes' upper poles (0-based mode index to pole), e.g.
        from a reduced model.
    plant_matrices : tuple of ndarray, optional
        (A, B, C, D) of the plant for the dense fallback; without it the fallback is not
        available and an incomplete result is returned as such.
    tol : float, optional
        Relative step below which an approximation counts as converged.
    max_sweeps : int, optional
        Sweeps before the fallback.

    Returns
    -------
    ClosedLoopRoots
    """
    function = CharacteristicFunction(channels, controller)
    ctrl = function.controller
    lam = channels.poles
    unseen = np.flatnonzero(~channels.seen)
    fixed = np.concatenate([lam[unseen], lam[unseen].conj()])
    z0 = _starting_points(function, starts or {})
    roots, sweeps, complete = _aberth(function, z0, tol=tol, max_sweeps=max_sweeps)
    if not complete and plant_matrices is not None:
        from dampctl.analysis.closedloop import closed_loop_matrix

        size = plant_matrices[0].shape[0] + ctrl.n_states
        if size <= DENSE_LIMIT:
            poles = np.linalg.eigvals(closed_loop_matrix(plant_matrices, ctrl.state_space))
            return ClosedLoopRoots(poles=poles, method=DENSE, sweeps=sweeps, complete=True)
    return ClosedLoopRoots(
        poles=np.concatenate([roots, fixed]), method=ABERTH, sweeps=sweeps, complete=complete
    )


def _starting_points(function: CharacteristicFunction, starts: dict[int, complex]) -> np.ndarray:
    """Upper and lower starting point of every seen mode, then the controller's poles, each
    nudged off the open-loop poles (where f'/f has poles) by a small distinct amount."""
    channels, ctrl = function.channels, function.controller
    modes = function.modes
    lam = channels.poles[modes]
    shift = first_order_shifts(channels, ctrl)[modes]
    limit = 0.1 * np.abs(lam)
    big = np.abs(shift) > limit
    shift[big] *= limit[big] / np.abs(shift[big])
    upper = lam + shift
    for k, i in enumerate(modes):
        if int(i) in starts:
            upper[k] = complex(starts[int(i)])
    points = np.concatenate([upper, upper.conj(), _controller_starts(function)])
    count = points.size
    # distinct nudges (golden-angle spiral): identical open-loop poles (repeated delay
    # sections, symmetric modes) must not start at one point
    angle = 2.399963229728653 * np.arange(count)
    size = np.maximum(np.abs(points), 1.0) * 1e-7 * (1.0 + np.arange(count) / count)
    return points + size * np.exp(1j * angle)


def _controller_starts(function: CharacteristicFunction) -> np.ndarray:
    """Starting points for the roots that come from the controller's poles.

    For each group of equal controller poles c, the eigenvalues of the controller closed
    around the plant's response frozen at c, A_c − B_c W(c) C_c (W = G (I + D_c G)⁻¹), are
    found and as many as the group has poles are taken, nearest to c (in log distance) first.
    Where the plant varies slowly near the closed-loop controller roots (they lie well inside
    the left half plane, away from the lightly damped modes) these are close to the roots, and
    they split the groups of equal poles (repeated delay sections) that would otherwise cost
    the iteration many sweeps.
    """
    ctrl = function.controller
    poles = ctrl.poles
    if poles.size == 0:
        return poles
    keys = np.round(poles, 6)
    groups = {}
    for k, key in enumerate(keys):
        groups.setdefault(complex(key), []).append(k)
    Ac, Bc, Cc, Dc = ctrl.state_space
    centres = np.array(list(groups))
    G = function.channels.response(centres, modes=function.modes)
    out = np.empty(poles.size, dtype=complex)
    taken: list[complex] = []
    for (centre, members), Gc in zip(groups.items(), G, strict=True):
        with np.errstate(all="ignore"):
            W = Gc @ np.linalg.inv(np.eye(Dc.shape[0]) + Dc @ Gc)
            values = np.linalg.eigvals(Ac - Bc @ W @ Cc)
        if not np.all(np.isfinite(values)):
            out[members] = poles[members]
            continue
        with np.errstate(all="ignore"):
            distance = np.abs(np.log(np.where(values == 0, 1e-300, values) / (centre or 1e-300)))
        order = np.argsort(distance)
        chosen = [v for v in values[order] if not any(abs(v - t) <= 1e-9 * abs(v) for t in taken)][
            : len(members)
        ]
        if len(chosen) < len(members):
            chosen += list(poles[members[len(chosen) :]])
        out[members] = chosen
        taken.extend(chosen)
    return out


#: an approximation whose step stays below this (relative) without shrinking has reached
#: the precision its root allows (a near-multiple root: a split cascade of equal delay
#: sections is known only to about eps^(1/k), whatever the method)
STALL_TOL = 1e-7


def _aberth(function: CharacteristicFunction, z0: np.ndarray, *, tol: float, max_sweeps: int):
    """Jacobi-style Aberth sweeps; converged approximations are frozen."""
    z = np.array(z0, dtype=complex)
    active = np.ones(z.size, dtype=bool)
    last = np.full(z.size, np.inf)
    stalls = np.zeros(z.size, dtype=int)
    sweeps = 0
    while np.any(active) and sweeps < max_sweeps:
        sweeps += 1
        idx = np.flatnonzero(active)
        with np.errstate(all="ignore"):
            L = function.log_derivative(z[idx])
            newton = 1.0 / L
            repulsion = _repulsion(z, idx)
            step = newton / (1.0 - newton * repulsion)
        bad = ~np.isfinite(step)
        step[bad] = 0.0  # landed on a root exactly (f'/f infinite): nothing to move
        z[idx] -= step
        size = np.abs(step) / np.maximum(np.abs(z[idx]), 1e-300)
        stalled = (size <= STALL_TOL) & (size >= 0.5 * last[idx])
        stalls[idx] = np.where(stalled, stalls[idx] + 1, 0)
        last[idx] = size
        done = (size <= tol) | (stalls[idx] >= 3)
        active[idx[done]] = False
    return z, sweeps, not np.any(active)


def _repulsion(z: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """Σ_{j≠k} 1/(z_k − z_j) for k in idx, in chunks."""
    out = np.empty(idx.size, dtype=complex)
    step = max(1, int(CHUNK_BYTES // (16 * 2 * max(z.size, 1))))
    for lo in range(0, idx.size, step):
        rows = idx[lo : lo + step]
        diff = z[rows][:, None] - z[None, :]
        diff[np.arange(rows.size), rows] = np.inf
        out[lo : lo + step] = np.sum(1.0 / diff, axis=1)
    return out


def loop_roots(
    plant,
    inputs,
    outputs,
    controller,
    *,
    method: str = "auto",
    starts: dict[int, complex] | None = None,
) -> ClosedLoopRoots:
    """All closed-loop poles of a plant between given channels and a controller.

    Parameters
    ----------
    plant : ModalPlant
        The plant (every mode is in the loop).
    inputs, outputs : sequence of str
        The controller's outputs (actuators) and inputs (sensors).
    controller : LoopController or tuple of ndarray
        The effective controller, ``u = −K(s) y``.
    method : {"auto", "dense", "aberth"}, optional
        ``auto``: the dense eigenproblem below :data:`DENSE_BELOW` closed-loop states, else
        the Aberth iteration (with the dense problem as fallback).
    starts : dict of int to complex, optional
        Starting points for some modes' upper poles (Aberth only).

    Returns
    -------
    ClosedLoopRoots
    """
    from dampctl.analysis.closedloop import closed_loop_matrix
    from dampctl.analysis.loopcontroller import LoopController

    if method not in ("auto", "dense", "aberth"):
        raise ValueError(f"method must be auto, dense or aberth, got {method!r}")
    mats = plant.statespace_matrices(inputs, outputs)
    ctrl = controller.matrices() if isinstance(controller, LoopController) else controller
    size = mats[0].shape[0] + ctrl[0].shape[0]
    if method == "dense" or (method == "auto" and size < DENSE_BELOW):
        poles = np.linalg.eigvals(closed_loop_matrix(mats, ctrl))
        return ClosedLoopRoots(poles=poles, method=DENSE, sweeps=0, complete=True)
    channels = ModalChannels.from_plant(plant, inputs, outputs)
    return closed_loop_roots(channels, controller, starts=starts, plant_matrices=mats)


def match_to_modes(open_poles: np.ndarray, closed_poles: np.ndarray):
    """:func:`~dampctl.analysis.closedloop.match_modes`, quicker when the answer is plain.

    When every mode's nearest closed-loop pole (by |ln(p_cl/p_ol)|) is a different pole and
    clearly nearer than the next (by 1 %), that choice is the unique optimal assignment, so it
    is returned without the assignment solver; otherwise the solver decides.

    Parameters
    ----------
    open_poles : array_like of complex, shape (n_modes,)
        Open-loop upper poles.
    closed_poles : array_like of complex
        All closed-loop poles.

    Returns
    -------
    MatchedModes
    """
    from dampctl.analysis.closedloop import MatchedModes, match_modes, modal_damping

    open_poles = np.asarray(open_poles, dtype=complex)
    closed = np.asarray(closed_poles, dtype=complex)
    if closed.size == 0 or open_poles.size < 2:
        return match_modes(open_poles, closed)
    scale = np.max(np.abs(closed))
    candidates = closed[closed.imag >= -1e-9 * max(scale, 1.0)]
    if candidates.size < open_poles.size:
        return match_modes(open_poles, closed)
    log_c = np.log(np.where(candidates == 0, 1e-300, candidates))
    log_o = np.log(open_poles)
    # nearest two candidates of each mode, in chunks (n_modes × n_candidates can be large)
    best = np.empty(open_poles.size, dtype=int)
    gap_ok = np.empty(open_poles.size, dtype=bool)
    step = max(1, int(CHUNK_BYTES // (16 * max(candidates.size, 1))))
    for lo in range(0, open_poles.size, step):
        cost = np.abs(log_c[None, :] - log_o[lo : lo + step, None])
        two = np.argpartition(cost, 1, axis=1)[:, :2]
        rows = np.arange(two.shape[0])
        first, second = cost[rows, two[:, 0]], cost[rows, two[:, 1]]
        swap = second < first
        best[lo : lo + step] = np.where(swap, two[:, 1], two[:, 0])
        gap_ok[lo : lo + step] = np.maximum(first, second) > 1.01 * np.minimum(first, second)
    if not (np.all(gap_ok) and np.unique(best).size == best.size):
        return match_modes(open_poles, closed)
    chosen = candidates[best]
    rest = np.delete(candidates, best)
    omega, damping = modal_damping(chosen)
    max_real = float(np.max(closed.real))
    return MatchedModes(
        poles=chosen,
        freq_hz=omega / (2.0 * np.pi),
        damping=damping,
        other_poles=rest[np.argsort(np.abs(rest))],
        stable=bool(max_real < 0.0),
        max_real_part=max_real,
    )
