"""Weights and gains of the LQG design (see :mod:`dampctl.laws.lqg` for the rules).

Damping goals become regulator velocity weights and estimator process-noise intensities (the
single-mode closed form and its dual), the Riccati equations are solved with one scale factor
for the solver's sake, and the goals of coupled modes are corrected until the design model's
regulator and estimator poles reach them.
"""

from __future__ import annotations

import numpy as np

from dampctl.analysis.closedloop import match_modes, open_loop_poles
from dampctl.errors import UsageError

__all__ = [
    "ESTIMATOR_FACTOR",
    "FLOOR_DAMPING",
    "GOAL_HEADROOM",
    "GOAL_ITERATIONS",
    "GOAL_TOL",
    "MAX_ESTIMATOR_DAMPING",
    "damping_weights",
    "estimator_noise",
    "input_gains",
    "output_gains",
    "pole_damping",
    "tune_estimator",
    "tune_regulator",
]

#: damping goal of neighbour modes and floor of regulator/estimator weights
FLOOR_DAMPING = 1e-3
#: default estimator damping = this factor times the target damping, capped at 0.7
ESTIMATOR_FACTOR = 2.0
MAX_ESTIMATOR_DAMPING = 0.7
#: corrections of the target goals for mode coupling, and the tolerance they aim at
GOAL_ITERATIONS = 3
GOAL_TOL = 1e-3
#: the regulator aims this fraction above the target damping, so that the small detuning the
#: estimator and the modes outside the design model cause on the full plant still meets it
GOAL_HEADROOM = 0.03


def damping_weights(
    omegas: np.ndarray, dampings: np.ndarray, goals: np.ndarray, gains: np.ndarray
) -> np.ndarray:
    """Velocity weights that give each mode a damping goal (the single-mode LQR closed form).

    Parameters
    ----------
    omegas : array_like
        Natural frequencies ω_i (rad/s).
    dampings : array_like
        Open-loop damping ratios ζ_i.
    goals : array_like
        Damping ratios wanted, one per mode.
    gains : array_like
        Squared modal input gains β_i = Σ_j b_ij²/r_j (regulator), or squared modal output gains
        γ_i = Σ_k ‖c_ki‖²/V_k (estimator, by duality), > 0.

    Returns
    -------
    ndarray
        q_i = 4 ω_i² max(goal_i² − ζ_i², 0) / β_i: the weight on the velocity state (regulator)
        or the process-noise intensity on it (estimator).
    """
    omegas, dampings = np.asarray(omegas, float), np.asarray(dampings, float)
    goals, gains = np.asarray(goals, float), np.asarray(gains, float)
    return 4.0 * omegas**2 * np.maximum(goals**2 - dampings**2, 0.0) / gains


def input_gains(mats, n_modes: int, r: np.ndarray) -> np.ndarray:
    B = mats[1]
    rows = B[2 * np.arange(n_modes) + 1]
    return np.sum(rows**2 / r[None, :], axis=1)


def output_gains(C: np.ndarray, n_modes: int, V: np.ndarray) -> np.ndarray:
    blocks = C.reshape(C.shape[0], n_modes, 2)
    return np.sum(np.sum(blocks**2, axis=2) / V[:, None], axis=0)


def estimator_noise(plant, model, kept, sensors, rule, goals) -> dict:
    density = [float(plant.sensor(s).noise_density) for s in sensors]
    have_noise = all(d > 0 for d in density)
    C = model[2]
    n = len(kept)
    if have_noise:
        V = np.array(density) ** 2 / 2.0
    else:
        blocks = C.reshape(C.shape[0], n, 2)
        V = np.max(np.sum(blocks**2, axis=2), axis=1)
    if rule == "auto":
        rule = "disturbances" if plant.disturbances and have_noise else "relative"
    if rule == "disturbances" and not (plant.disturbances and have_noise):
        raise UsageError(
            "process_noise='disturbances' needs disturbances in the plant and a noise_density "
            "on every sensor"
        )
    w, z = plant.omegas[kept], plant.dampings[kept]
    gamma = output_gains(C, n, V)
    floor = damping_weights(w, z, np.full(n, FLOOR_DAMPING), gamma)
    if rule == "disturbances":
        W = np.zeros(n)
        for d in plant.disturbances:
            b = plant.input_row(d.name)[kept]
            W += 0.5 * b**2 * d.psd_at(plant.freqs_hz[kept])
        # A target mode the disturbances barely excite would keep an undamped estimator pole
        # (the closed-loop poles are the regulator's and the estimator's): give it at least the
        # intensity that damps its estimator pole to the target (plus headroom).
        target_goal = np.where(
            goals > FLOOR_DAMPING,
            np.minimum(goals / ESTIMATOR_FACTOR * (1.0 + GOAL_HEADROOM), MAX_ESTIMATOR_DAMPING),
            FLOOR_DAMPING,
        )
        W = np.maximum(W, damping_weights(w, z, target_goal, gamma))
    else:
        W = damping_weights(w, z, goals, gamma)
    return {
        "rule": rule,
        "density": density,
        "V": np.diag(V),
        "W": np.maximum(W, floor),
        "relative_sensor_noise": not have_noise,
    }


def tune_regulator(model, w, z, goals, is_target, beta, r):
    """Velocity weights and LQR gain, with the target goals corrected for mode coupling.

    The single-mode rule is exact for one mode; with several modes sharing actuators the
    regulator poles land slightly off. Up to ``GOAL_ITERATIONS`` times, each target mode's goal
    is scaled by target / reached (regulator poles of the design model) until every target is
    within ``GOAL_TOL``.
    """
    effective = np.maximum(goals, FLOOR_DAMPING)
    floor = damping_weights(w, z, np.full(w.shape, FLOOR_DAMPING), beta)
    for attempt in range(GOAL_ITERATIONS + 1):
        q_vel = np.maximum(damping_weights(w, z, effective, beta), floor)
        K = _regulator_gain(model, q_vel, r)
        reached = np.array(pole_damping(model[0] - model[1] @ K, w, z))
        short = is_target & (reached < goals * (1.0 - GOAL_TOL)) & (reached > 0)
        if not np.any(short) or attempt == GOAL_ITERATIONS:
            break
        effective = np.where(short, np.minimum(effective * goals / reached, 0.99), effective)
    return q_vel, K, reached.tolist(), effective


def _positive_median(values: np.ndarray) -> float:
    positive = values[values > 0]
    return float(np.median(positive)) if positive.size else 1.0


def _regulator_gain(model, q_vel, r) -> np.ndarray:
    """LQR gain, with Q and R scaled by one factor for the solver (K does not change).

    The factor makes the two sides of the Hamiltonian of one size: in SI units they can differ
    by 10 orders of magnitude, which the Schur ordering in the solver does not survive.
    """
    import control

    A, B, _, _ = model
    n = A.shape[0] // 2
    vel = 2 * np.arange(n) + 1
    Q = np.zeros((2 * n, 2 * n))
    Q[vel, vel] = q_vel
    c_r = np.sqrt(_positive_median(input_gains(model, n, r)) / _positive_median(q_vel))
    K, _, _ = control.lqr(A, B, Q * c_r, np.diag(r) * c_r)
    return np.asarray(K)


def _estimator_gain(model, W, V) -> np.ndarray:
    """Kalman gain, with W and V scaled by one factor for the solver (L does not change)."""
    import control

    A, _, C, _ = model
    n = A.shape[0] // 2
    vel = 2 * np.arange(n) + 1
    G = np.zeros((2 * n, n))
    G[vel, np.arange(n)] = 1.0
    gamma = output_gains(C, n, np.diag(V))
    c_e = np.sqrt(_positive_median(W) / _positive_median(gamma))
    L, _, _ = control.lqe(A, G, C, np.diag(W) / c_e, V / c_e)
    return np.asarray(L)


def tune_estimator(model, W, V, w, z, goals, is_target):
    """Kalman gain, with the process noise of under-damped target modes raised.

    The closed-loop poles are the regulator's and the estimator's, so a target mode whose
    estimator pole stays below the aimed damping (weakly excited or weakly observed, with the
    modes coupled through the sensors) keeps a lightly damped closed-loop pole. Up to
    ``GOAL_ITERATIONS`` times its intensity is scaled by (goal² − ζ²)/(reached² − ζ²), the
    single-mode relation, until every target estimator pole reaches the goal within
    ``GOAL_TOL``. Returns the intensities used and the gain.
    """
    W = np.array(W, dtype=float)
    need = np.where(is_target, goals, 0.0)
    for attempt in range(GOAL_ITERATIONS + 1):
        L = _estimator_gain(model, W, V)
        reached = np.array(pole_damping(model[0] - L @ model[2], w, z))
        short = is_target & (reached < need * (1.0 - GOAL_TOL)) & (reached > 0)
        if not np.any(short) or attempt == GOAL_ITERATIONS:
            break
        ratio = (need**2 - z**2) / np.maximum(reached**2 - z**2, 1e-12)
        W = np.where(short, W * np.clip(ratio, 1.0, 1e6), W)
    return W, L


def pole_damping(Acl: np.ndarray, w: np.ndarray, z: np.ndarray) -> list[float]:
    matched = match_modes(open_loop_poles(w, z), np.linalg.eigvals(Acl))
    return [float(v) for v in matched.damping]
