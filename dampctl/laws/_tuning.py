"""Gain search shared by the collocated laws: batched closed-loop eigenvalues, no models.

Every candidate is a controller state space (A_c, B_c, C_c, D_c) with the loop delay (Padé)
and the hardware roll-offs already folded in (:func:`dampctl.analysis.closedloop.lag_elements`). The
closed-loop matrices of a batch are stacked and handed to one ``numpy.linalg.eigvals`` call;
closed-loop poles are matched to the plant's modes by assignment
(:func:`dampctl.analysis.closedloop.match_modes`).

The search (:func:`search_gains`) works on per-loop gains ``g = s · base`` with a common scale
s over a log grid (base normalizes each loop by what its pair sees), then refines s locally and
finally each loop against the rest (loop k by f, the others by c, on a 3 × 3 pattern search:
a max-min objective has kinks where two modes share the smallest damping, which moving one
loop alone cannot leave). Either it maximizes the objective (the smallest closed-loop damping
ratio over the target groups, unstable = −inf), taking the smallest gains within 0.1 % of the
maximum, or it finds the smallest gains that reach a target damping (then lowers each loop
alone while the target still holds). When maximizing with several loops, the same search also
runs once per loop on the other loops with that one off, and is then refined in all loops from
there with it nearly off; the best result is kept, so that adding a loop does not lower what
the others reach (a loop whose gain only costs damping is returned at 0).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.analysis.closedloop import (
    block_diagonal,
    closed_loop_matrix,
    lag_elements,
    match_modes,
    open_loop_poles,
    reference_omega,
)

__all__ = ["Evaluation", "LoopModel", "SearchResult", "search_gains", "stack_loops"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: relative tolerance under which two objective values count as equal (prefer smaller gains)
_TIE = 1e-3


@dataclass(frozen=True)
class Evaluation:
    """Closed-loop facts of a batch of candidates.

    Attributes
    ----------
    damping : ndarray, shape (n_eval, n_modes)
        Damping ratio of the pole matched to each plant mode.
    poles : ndarray of complex, shape (n_eval, n_modes)
        Matched poles (rad/s).
    stable : ndarray of bool, shape (n_eval,)
    max_real_part : ndarray, shape (n_eval,)
        Largest real part (1/s) of any closed-loop pole.
    score : ndarray, shape (n_eval,)
        Objective (−inf when unstable).
    """

    damping: np.ndarray
    poles: np.ndarray
    stable: np.ndarray
    max_real_part: np.ndarray
    score: np.ndarray


@dataclass(frozen=True)
class LoopModel:
    """A plant's loop matrices with the hardware that lies between it and the controller.

    Parameters
    ----------
    plant_mats : tuple of ndarray
        (A, B, C, D) of the plant from the loops' actuators to their sensors.
    open_poles : ndarray of complex
        Open-loop upper-half-plane pole of each mode.
    delay_s : float
        Loop delay (s), folded in as a Padé approximant.
    actuator_bandwidth_hz, sensor_bandwidth_hz : sequence of float or None
        First-order hardware roll-off corners per loop (None: ideal).
    score : callable
        Objective over the damping ratios of a batch (n_eval, n_modes) -> (n_eval,).
    omega_ref : float
        Delay-accuracy frequency (rad/s): the delay is a cascade of [2/2] Padé sections
        accurate up to it (:func:`dampctl.analysis.closedloop.reference_omega` of the plant, as for
        every pole computation).
    """

    plant_mats: Matrices
    open_poles: np.ndarray
    delay_s: float
    actuator_bandwidth_hz: tuple[float | None, ...]
    sensor_bandwidth_hz: tuple[float | None, ...]
    score: Callable[[np.ndarray], np.ndarray]
    omega_ref: float = 0.0

    @classmethod
    def build(cls, plant, pairs, *, delay_s: float, score) -> LoopModel:
        """Loop model of ``plant`` for the given pairs (see class parameters)."""
        actuators = [p.actuator for p in pairs]
        sensors = [p.sensor for p in pairs]
        return cls(
            plant_mats=plant.statespace_matrices(actuators, sensors),
            open_poles=open_loop_poles(plant.omegas, plant.dampings),
            delay_s=float(delay_s),
            actuator_bandwidth_hz=tuple(plant.actuator(a).bandwidth_hz for a in actuators),
            sensor_bandwidth_hz=tuple(plant.sensor(s).bandwidth_hz for s in sensors),
            score=score,
            omega_ref=reference_omega(plant),
        )

    def effective(self, controller: Matrices) -> Matrices:
        """The controller with the delay and the hardware roll-offs folded in."""
        return lag_elements(
            controller,
            delay_s=self.delay_s,
            actuator_bandwidth_hz=self.actuator_bandwidth_hz,
            sensor_bandwidth_hz=self.sensor_bandwidth_hz,
            omega_ref=self.omega_ref,
        )

    def evaluate(self, controllers: Sequence[Matrices]) -> Evaluation:
        """Closed-loop facts of effective controllers of one size (one eigvals call)."""
        stack = np.array([closed_loop_matrix(self.plant_mats, c) for c in controllers])
        return self._facts(np.linalg.eigvals(stack))

    def evaluate_gains(self, unit: Matrices, gains: np.ndarray) -> Evaluation:
        """Closed-loop facts of a unit-gain effective controller scaled per loop.

        Valid for decentralized loops: the effective controller is diagonal, so scaling its
        input k by g_k scales loop k.
        """
        Ac, Bc, Cc, Dc = unit
        gains = np.atleast_2d(np.asarray(gains, dtype=float))
        return self.evaluate([(Ac, Bc * g[None, :], Cc, Dc * g[None, :]) for g in gains])

    def _facts(self, eigenvalues: np.ndarray) -> Evaluation:
        rows = [match_modes(self.open_poles, ev) for ev in eigenvalues]
        damping = np.array([r.damping for r in rows])
        stable = np.array([r.stable for r in rows])
        score = np.where(stable, self.score(damping), -np.inf)
        return Evaluation(
            damping=damping,
            poles=np.array([r.poles for r in rows]),
            stable=stable,
            max_real_part=np.array([r.max_real_part for r in rows]),
            score=score,
        )


@dataclass(frozen=True)
class SearchResult:
    """Outcome of :func:`search_gains`.

    Attributes
    ----------
    gains : ndarray, shape (n_loops,)
        Chosen per-loop gains (the law's normalization).
    score : float
        Objective at the chosen gains (smallest target damping ratio).
    best_score : float
        Largest objective seen (the max-min damping the search found).
    reached : bool
        True when a target was given and reached (always True without a target).
    evaluations : int
        Closed-loop eigenvalue problems solved.
    """

    gains: np.ndarray
    score: float
    best_score: float
    reached: bool
    evaluations: int


def search_gains(
    evaluate: Callable[[np.ndarray], np.ndarray],
    base: np.ndarray,
    *,
    target: float | None = None,
    log_range: tuple[float, float] = (-4.0, 2.0),
    points_per_decade: int = 4,
    refine_loops: bool = True,
) -> SearchResult:
    """Search per-loop gains ``g = s · base`` (then loop by loop) for the damping objective.

    Parameters
    ----------
    evaluate : callable
        Maps gains (n_eval, n_loops) to objective values (n_eval,), −inf when unstable.
    base : ndarray, shape (n_loops,)
        Per-loop gain normalization (> 0).
    target : float, optional
        Damping ratio to reach with the smallest gains; None maximizes the objective.
    log_range : (float, float), optional
        log10 range of the common scale s.
    points_per_decade : int, optional
        Grid density of the common-scale scan.
    refine_loops : bool, optional
        Refine each loop's gain separately after the common scale (several loops only).

    Returns
    -------
    SearchResult
    """
    base = np.asarray(base, dtype=float)
    count = 0

    def run(gains: np.ndarray) -> np.ndarray:
        nonlocal count
        count += gains.shape[0]
        return np.asarray(evaluate(gains), dtype=float)

    n = round((log_range[1] - log_range[0]) * points_per_decade) + 1
    scales = np.logspace(log_range[0], log_range[1], n)
    scores = run(scales[:, None] * base[None, :])
    best_seen = float(np.max(scores))
    reached = True
    reach = -np.inf if target is None else target * (1.0 - 1e-9)  # repeated poles: ~1e-8
    if target is not None and np.any(scores >= reach):
        k = int(np.argmax(scores >= reach))
        lo = scales[k - 1] if k > 0 else scales[0] / 10.0
        hi = scales[k]
        for _ in range(3):  # three batched bisection passes on the log scale
            fine = np.logspace(np.log10(lo), np.log10(hi), 9)
            values = run(fine[:, None] * base[None, :])
            ok = values >= reach
            j = int(np.argmax(ok)) if np.any(ok) else len(fine) - 1
            lo, hi = fine[max(j - 1, 0)], fine[j]
        gains = hi * base
        if refine_loops and base.size > 1:
            gains = _reduce_loops(run, gains, reach)
        score = float(run(gains[None, :])[0])
        best_seen = max(best_seen, score)
        return SearchResult(gains, score, best_seen, True, count)
    if target is not None:
        reached = False
    results = [_zoom_and_refine(run, base, scores, scales, refine_loops)]
    if refine_loops and base.size > 1:
        # Multi-start, so that adding a loop does not leave the result below what the other
        # loops reach without it (a max-min objective has local optima the per-loop refinement
        # cannot leave): for each loop, the search on the other loops with that one off, then
        # the refinement of all loops from there with that one nearly off. The best is kept.
        for k in range(base.size):
            results.append(_without_loop(run, base, k, scales))
    gains, score = max(results, key=lambda item: item[1])
    best_seen = max(best_seen, score)
    return SearchResult(gains, score, best_seen, reached, count)


def _without_loop(run, base: np.ndarray, k: int, scales: np.ndarray):
    """Best gains with loop k off (searched on the others), then refined with it nearly off."""
    others = np.arange(base.size) != k

    def run_others(gains: np.ndarray) -> np.ndarray:
        full = np.zeros((gains.shape[0], base.size))
        full[:, others] = gains
        return run(full)

    sub = base[others]
    sub_scores = run_others(scales[:, None] * sub[None, :])
    gains_sub, score = _zoom_and_refine(run_others, sub, sub_scores, scales, sub.size > 1)
    if not np.isfinite(score):
        return np.zeros(base.size), score
    gains = np.zeros(base.size)
    gains[others] = gains_sub
    scale = float(np.exp(np.mean(np.log(gains_sub / sub))))
    gains[k] = 1e-3 * scale * base[k]  # nearly off, so that the refinement can turn it up
    start = float(run(gains[None, :])[0])
    if start < score:  # the small gain cost damping: keep the loop off
        gains[k], start = 0.0, score
        return gains, score
    return _refine_loops(run, gains, start)


def _zoom_and_refine(run, base, scores, scales, refine_loops):
    """Zoom the common scale around the best scan point, then refine loop by loop."""
    n = scales.size
    k = _smallest_best(scores)
    scale, score = scales[k], float(scores[k])
    lo, hi = scales[max(k - 1, 0)], scales[min(k + 1, n - 1)]
    for _ in range(6):  # zoom around the best scale until it is fixed to ~1e-4
        if hi / lo < 1.0 + 1e-4:
            break
        fine = np.logspace(np.log10(lo), np.log10(hi), 9)
        fine_scores = run(fine[:, None] * base[None, :])
        j = _smallest_best(fine_scores)
        if fine_scores[j] >= score:
            scale, score = fine[j], float(fine_scores[j])
        lo, hi = fine[max(j - 1, 0)], fine[min(j + 1, fine.size - 1)]
    gains = scale * base
    if refine_loops and base.size > 1 and np.isfinite(score):
        gains, score = _refine_loops(run, gains, score)
    return gains, score


def _smallest_best(scores: np.ndarray) -> int:
    """Index of the first (smallest gain) score within the tie tolerance of the maximum."""
    best = np.max(scores)
    if not np.isfinite(best):
        return 0
    tol = _TIE * max(abs(best), 1e-6)
    return int(np.argmax(scores >= best - tol))


def _refine_loops(run, gains: np.ndarray, score: float, passes: int = 8):
    """Loop-against-rest pattern search on a max-min objective.

    Each step scales loop k by f and all other loops together by c on a 3 × 3 pattern (one
    batch): a move of one loop alone cannot leave a kink where two modes share the smallest
    damping, a move of k against the rest can. The pattern keeps its size while a pass
    improves and halves when it does not, down to a factor of 10^±0.03.
    """
    span = 0.4
    steps = np.array([-1.0, 0.0, 1.0])
    f_exp, c_exp = np.repeat(steps, 3), np.tile(steps, 3) / 2.0
    keep = (f_exp != 0) | (c_exp != 0)
    f_exp, c_exp = f_exp[keep], c_exp[keep]
    for _ in range(passes):
        improved = False
        for k in range(gains.size):
            trial = np.repeat(gains[None, :], f_exp.size, axis=0)
            others = np.arange(gains.size) != k
            trial[:, k] *= 10.0 ** (span * f_exp)
            trial[:, others] *= (10.0 ** (span * c_exp))[:, None]
            values = run(trial)
            j = int(np.argmax(values))
            if values[j] > score + _TIE * 1e-2 * max(abs(score), 1e-6):
                gains, score, improved = trial[j], float(values[j]), True
        if not improved:
            span /= 2.0
            if span < 0.03:
                break
    return gains, score


def _reduce_loops(run, gains: np.ndarray, target: float) -> np.ndarray:
    factors = np.logspace(-1.0, 0.0, 11)[:-1]
    for k in range(gains.size):
        trial = np.repeat(gains[None, :], factors.size, axis=0)
        trial[:, k] *= factors
        ok = run(trial) >= target
        if np.any(ok):
            gains = trial[int(np.argmax(ok))]
    return gains


def stack_loops(loops) -> Matrices:
    """Block-diagonal (A, B, C, D) of decentralized loops (loop k: input k, output k)."""
    return block_diagonal([lp.statespace_matrices() for lp in loops])

