"""Model-based damping: an LQG controller on a reduced modal model, checked on the full plant.

Where the pairs are not collocated, loops interact, or an optimal MIMO design is wanted,
:func:`design` builds a linear-quadratic-Gaussian (LQG) controller: an LQR state feedback
``u = −K x̂`` on a Kalman-filter estimate ``x̂`` of a *design model* made of the target modes and
their neighbours. The user asks for damping, not for Q and R; the rules below turn damping into
weights.

**Regulator weights (damping → Q, R).** For one mode q'' + 2ζωq' + ω²q = b u with cost
∫ q₂ q'² + r u² dt (no position weight), the Riccati equation has the closed form
p₁₂ = 0, p₂₂ = r(√(4ζ²ω² + q₂β) − 2ζω) with β = b²/r, so the regulator is velocity feedback and
the closed-loop damping is ζ_cl = √(ζ² + q₂β/(4ω²)) at unchanged ω (for ζ = 0 this is the
closed form of Kwakernaak & Sivan / Anderson & Moore: ζ_cl = √(q₂/r)/(2ω)). Inverting it,
each design-model mode i gets the velocity weight

    q₂,i = 4 ω_i² (ζ_goal,i² − ζ_i²) / β_i,   β_i = Σ_j b_ij² / r_j  (0 when ζ_i ≥ ζ_goal,i)

on its state q_i' (the position states ω_i q_i get no weight), where ζ_goal = the target
damping for target modes and ``FLOOR_DAMPING`` for neighbours (neighbours are modelled, not
targeted). With several inputs the rule stays exact for one mode (minimizing Σ r_j u_j² for a
given modal force gives β); with several modes sharing actuators it is the well-separated-mode
approximation, so the target goals are corrected (at most three more Riccati solves) until the
design model's regulator poles reach the target to 0.1 %. The design model leaves out the
delay, the roll-offs and the other modes, so the controller is then closed on the full plant;
where a target mode falls short there, its goal is scaled by (1 + headroom) × target / reached
and the controller designed again (at most ``FULL_PLANT_ITERATIONS`` times, goals capped at
``MAX_RAISED_GOAL``), keeping the best stable attempt; the damping reached on the full plant
is reported. R = diag(r_j) with r_j = (L_min / L_j)² from the
actuator limits L_j (``max_force_n``, ``max_stroke_m`` for struts; Bryson's rule, common
practice) when every actuator states one, else R = I; only the ratios matter, since Q scales
with R.

**Estimator noise.** Sensor noise comes from ``noise_density`` (one-sided amplitude spectral
density n, sensor unit/√Hz). White noise of continuous intensity V (E v(t)v(τ) = V δ(t−τ)) has
two-sided PSD V and one-sided PSD 2V, so V = n²/2. Process noise enters each mode's velocity
state (its modal force), modes taken independent:

* ``"disturbances"`` (the default when the plant has disturbances and every sensor a noise
  density): W_i = ½ Σ_d b_di² S_d(f_i), the one-sided force PSD S_d of each disturbance mapped
  to modal force at the mode's own frequency (a lightly damped mode responds only near it);
* ``"relative"`` (otherwise): the dual of the regulator rule, W_i = 4ω_i²(ζ_e² − ζ_i²)/γ_i with
  γ_i = Σ_k ‖c_ki‖²/V_k (c_ki the sensor row on mode i's two states), which gives the
  single-mode Kalman filter the damping ζ_e on target modes (default twice the target, at most
  0.7: estimator faster than regulator, common practice) and ``FLOOR_DAMPING`` on neighbours
  (their estimate follows the model's prediction of their response to u). Sensors without a
  noise density then get V_k = max_i ‖c_ki‖² (relative units).

Every mode keeps at least the floor W_i of ζ_e = ``FLOOR_DAMPING`` so undamped modes stay
stabilizable, and with either rule a target mode's process noise is raised (the single-mode
relation, at most three more Riccati solves) until its estimator pole is damped to at least
ζ_e (raised in proportion where the full-plant correction below raises the regulator's goal,
at most 0.7): a regulator pole and an estimator pole that nearly coincide split widely under
the full plant's delay and left-out modes (seen on the demo stage's gap-sensor pairs: 0.026
instead of 0.05 on mode 6). Riccati equations are solved by python-control ``lqr`` / ``lqe``
(slycot).

**Design model.** The target modes plus their neighbours: every mode within a frequency factor
``neighbours`` (default 2, an octave) of the target band, provided the actuators reach it and the
sensors see it (a mode one of them misses cannot spill over; Balas 1978). Modes above the band
enter as their static compliance (displacement-like sensors: + c b/ω²; accelerometers lose
their direct term), modes below are left out. The controller is then always checked on the
full plant with the plant's stated delay and roll-offs: every mode's closed-loop damping is
listed and residual modes pushed unstable are flagged as spillover. Residual modes the loop
drives unstable (and that the actuators reach and the sensors see) then join the design model
and the design is repeated — the cure of Balas 1978 — at most ``SPILLOVER_ROUNDS`` times, a
round kept only when its full-plant loop is better (stable, or fewer unstable modes). When the
loop is still unstable, the target asks for more than a stable loop gives: the design aims at
``BACKOFF_FACTORS`` × the target in turn and keeps the first stable loop, with a warning
(``info["aimed_damping"]``; the target itself is reported missed).

**Reduction.** ``order=N`` reduces the controller by balanced truncation (python-control
``balred``, slycot ``ab09ad``/``ab09md``; unstable controller poles are kept whole and the stable
part is truncated, Hsu & Hou 1991). The error bound ‖K − K_N‖∞ ≤ 2 Σ discarded Hankel singular
values of the stable part (Enns 1984; Glover 1984) is reported with the damping the reduced
controller actually keeps on the full plant.

**Margins.** LQG has no guaranteed margins (Doyle 1978), so loop-at-a-time gain and phase
margins at the plant input are always given (:func:`dampctl.analysis.margins.loop_margins`).

Controller convention (:mod:`dampctl.design`): with the design model x' = Ax + Bu,
y = Cx + Du and u = −K x̂, the estimator x̂' = Ax̂ + Bu + L(y − Cx̂ − Du) gives
x̂' = (A − BK − LC + LDK) x̂ + L y, stored as (A − BK − LC + LDK, L, K, 0) with
u = −(C_c x_c + D_c y).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any, Literal

import numpy as np

from dampctl.analysis.closedloop import plant_loop_delay_s
from dampctl.analysis.margins import default_grid, loop_margins
from dampctl.design import Design
from dampctl.errors import DesignRefused, UsageError
from dampctl.laws._lqg_gains import (
    ESTIMATOR_FACTOR,
    FLOOR_DAMPING,
    GOAL_HEADROOM,
    GOAL_ITERATIONS,
    GOAL_TOL,
    MAX_ESTIMATOR_DAMPING,
    damping_weights,
    estimator_noise,
    input_gains,
    output_gains,
    pole_damping,
    tune_estimator,
    tune_regulator,
)
from dampctl.laws.reduction import Reduction, reduce_controller
from dampctl.laws.spillover import check_on_plant
from dampctl.model.plant import ModalPlant
from dampctl.model.summary import plant_summary

__all__ = [
    "BACKOFF_FACTORS",
    "DEFAULT_TARGET_DAMPING",
    "ESTIMATOR_FACTOR",
    "FLOOR_DAMPING",
    "FULL_PLANT_ITERATIONS",
    "GOAL_HEADROOM",
    "GOAL_ITERATIONS",
    "GOAL_TOL",
    "MAX_ESTIMATOR_DAMPING",
    "NEIGHBOUR_FACTOR",
    "SPILLOVER_ROUNDS",
    "TARGET_TOL",
    "Reduction",
    "check_on_plant",
    "damping_weights",
    "design",
    "design_model_matrices",
    "design_modes",
    "lqg_controller",
    "reduce_controller",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: target damping ratio when neither the call nor the plant's requirements give one
DEFAULT_TARGET_DAMPING = 0.05
#: default frequency factor around the target band that selects neighbour modes
NEIGHBOUR_FACTOR = 2.0
#: a mode whose modal input (output) gain is below this fraction of the plant's largest is
#: treated as unreachable (unseen)
REACH_TOL = 1e-10
#: relative shortfall of the closed-loop target damping that is reported
TARGET_TOL = 0.01
#: redesigns with the target goals raised where the full plant falls short, and the cap
FULL_PLANT_ITERATIONS = 3
MAX_RAISED_GOAL = 0.5
#: redesigns with residual modes that the loop drives unstable added to the design model
SPILLOVER_ROUNDS = 2
#: when no stable loop reaches the target: the lower aims tried, as fractions of the target
BACKOFF_FACTORS = (0.7, 0.5, 0.35, 0.25)

REGULATOR_RULE = (
    "velocity weight per design-model mode q2 = 4 w^2 (z_goal^2 - z^2) / beta, "
    "beta = sum_j b_j^2 / r_j; z_goal = target damping (targets), floor (neighbours); "
    "exact for one mode: z_cl = sqrt(z^2 + q2 beta / (4 w^2))"
)


def lqg_controller(
    A: np.ndarray, B: np.ndarray, C: np.ndarray, D: np.ndarray, K: np.ndarray, L: np.ndarray
) -> Matrices:
    """Observer-based controller of a plant model, in the ``u = −(C_c x_c + D_c y)`` convention.

    Parameters
    ----------
    A, B, C, D : ndarray
        Model x' = Ax + Bu, y = Cx + Du (inputs actuators, outputs sensors, SI units).
    K : ndarray, shape (n_u, n)
        State-feedback gain, u = −K x̂.
    L : ndarray, shape (n, n_y)
        Estimator gain, x̂' = A x̂ + B u + L (y − C x̂ − D u).

    Returns
    -------
    tuple of ndarray
        (A − BK − LC + LDK, L, K, 0).
    """
    A, B, C, D, K, L = (np.asarray(m, dtype=float) for m in (A, B, C, D, K, L))
    Ac = A - B @ K - L @ C + L @ D @ K
    return Ac, L.copy(), K.copy(), np.zeros((K.shape[0], L.shape[1]))


def design_modes(
    plant: ModalPlant, targets: Sequence[int], *, neighbours: float = NEIGHBOUR_FACTOR
) -> tuple[int, ...]:
    """Target modes plus neighbours within a frequency factor of the target band (0-based).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    targets : sequence of int
        Target modes, 0-based indices.
    neighbours : float, optional
        Frequency factor (>= 1): modes with f_min/neighbours <= f <= f_max·neighbours join.

    Returns
    -------
    tuple of int
        Sorted 0-based mode indices of the design model (before reachability checks).
    """
    w = plant.omegas
    lo, hi = np.min(w[list(targets)]) / neighbours, np.max(w[list(targets)]) * neighbours
    chosen = set(targets) | {i for i in range(plant.n_modes) if lo <= w[i] <= hi}
    return tuple(sorted(chosen))


# ---------------------------------------------------------------------- the law
def design(
    plant: ModalPlant,
    actuators: Sequence[str],
    sensors: Sequence[str],
    *,
    modes: Sequence[int] | None = None,
    target_damping: float | None = None,
    order: int | None = None,
    neighbours: float = NEIGHBOUR_FACTOR,
    process_noise: Literal["auto", "disturbances", "relative"] = "auto",
    estimator_damping: float | None = None,
    delay_s: float | None = None,
    pairs: Sequence[str] = (),
) -> Design:
    """Design an LQG damping controller and check it on the full plant.

    Parameters
    ----------
    plant : ModalPlant
        The plant (all its modes are used in the check).
    actuators, sensors : sequence of str
        Actuator names (controller outputs: N or m) and sensor names (controller inputs, SI).
        May be empty when ``pairs`` is given.
    modes : sequence of int, optional
        Target modes, 1-based; default (None or empty) the plant's ``requirements.modes``, else
        every mode.
    target_damping : float, optional
        Closed-loop damping ratio wanted on the target modes, in (0, 1); default the plant's
        ``requirements.min_damping``, else 0.05.
    order : int, optional
        Reduce the controller to this many states by balanced truncation.
    neighbours : float, optional
        Frequency factor (>= 1) around the target band whose modes join the design model;
        default 2. Use 1 for the target modes only.
    process_noise : {"auto", "disturbances", "relative"}, optional
        Estimator process-noise rule (module docstring). ``auto``: ``disturbances`` when the
        plant has disturbances and every sensor a noise density, else ``relative``.
    estimator_damping : float, optional
        Damping ratio the ``relative`` rule gives each mode's estimator, in (0, 1); default
        min(2 × target damping, 0.7).
    delay_s : float, optional
        Loop delay (s) used in the full-plant check and margins; default the plant's stated
        delay (``loop_delay_s`` plus ZOH and one sample at ``sample_rate_hz``).
    pairs : sequence of str, optional
        Pair names; when given they set the actuators and sensors (pair k: actuator k,
        sensor k) and are recorded in the design.

    Returns
    -------
    Design
        ``law="lqg"``, ``controller=(A, B, C, D)``; ``info`` holds the rules and weights, the
        design model, the full-plant closed-loop modes with spillover flags, the reduction
        (bound, damping kept) and the loop-at-a-time margins at the plant input.

    Raises
    ------
    UsageError
        Bad mode numbers, damping, order or option values.
    DesignRefused
        A target mode the actuators cannot reach or the sensors cannot see.
    """
    actuators, sensors, pairs = _hardware(plant, actuators, sensors, pairs)
    targets = _targets(plant, modes)
    zeta_c = _target_damping(plant, target_damping)
    if not neighbours >= 1.0:
        raise UsageError(f"neighbours must be a frequency factor >= 1, got {neighbours}")
    if process_noise not in ("auto", "disturbances", "relative"):
        raise UsageError(
            f"process_noise must be one of auto, disturbances, relative, got {process_noise!r}"
        )
    zeta_e = min(ESTIMATOR_FACTOR * zeta_c, MAX_ESTIMATOR_DAMPING)
    if estimator_damping is not None:
        zeta_e = _ratio(estimator_damping, "estimator_damping")
    if order is not None and (isinstance(order, bool) or int(order) != order or order < 1):
        raise UsageError(f"order must be a whole number of states >= 1, got {order!r}")

    full = plant.statespace_matrices(actuators, sensors)
    beta_all = input_gains(full, plant.n_modes, _input_weights(plant, actuators))
    warnings: list[str] = []
    kept, dropped = _reachable(plant, targets, neighbours, full, beta_all)
    r = _input_weights(plant, actuators)
    delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
    setup = _Setup(plant, actuators, sensors, targets, pairs, r, zeta_c, zeta_e, process_noise)
    reach_seen = np.logical_and(*_reach_and_seen(full, plant.n_modes, beta_all))
    chosen, added = _design_with_spillover(setup, kept, delay, reach_seen)
    aimed = zeta_c
    if not chosen["check"]["stable"]:
        # the target asks for more than a stable loop can give here: aim lower, step by step,
        # and keep the first stable design (the target stays the user's; it is reported missed)
        for factor in BACKOFF_FACTORS:
            lower = zeta_c * factor
            own_e = estimator_damping is None
            trial_setup = replace(
                setup,
                zeta_c=lower,
                zeta_e=min(ESTIMATOR_FACTOR * lower, MAX_ESTIMATOR_DAMPING) if own_e else zeta_e,
            )
            trial, trial_added = _design_with_spillover(trial_setup, kept, delay, reach_seen)
            if trial["check"]["stable"]:
                chosen, added, aimed = trial, trial_added, lower
                warnings.append(
                    f"no stable loop found aiming at damping {zeta_c:g}: the design aims at "
                    f"{lower:.3g} instead and reaches "
                    f"{trial['check']['target_damping_min']:.3g} on the target modes"
                )
                break
    kept, model_modes = chosen["kept"], [i + 1 for i in chosen["kept"]]
    attempts, controller, check = chosen["attempts"], chosen["controller"], chosen["check"]
    regulator, estimator = chosen["regulator"], chosen["estimator"]
    if estimator.pop("relative_sensor_noise"):
        warnings.append("some sensors have no noise_density: estimator noise is in relative units")

    info: dict[str, Any] = {
        "target_damping": zeta_c,
        "regulator": regulator,
        "estimator": estimator,
        "design_model": {
            "modes": model_modes,
            "targets": [i + 1 for i in targets],
            "neighbours": [i + 1 for i in kept if i not in targets],
            "added_for_spillover": sorted(added),
            "left_out": dropped,
            "neighbour_factor": float(neighbours),
            "static_correction": "modes above the band as static compliance",
        },
        "aimed_damping": aimed,
        "full_plant_correction": {
            "rule": (
                "where a target mode falls short on the full plant (delay, roll-offs, all "
                "modes), its goal is scaled by (1 + headroom) target / reached and the "
                f"controller designed again, at most {FULL_PLANT_ITERATIONS} times; the best "
                "stable attempt is kept"
            ),
            "attempts": len(attempts),
            "first_goals": attempts[0][0],
            "goals_used": chosen["goals"],
            "target_damping_min_per_attempt": [a[1]["target_damping_min"] for a in attempts],
            "stable_per_attempt": [bool(a[1]["stable"]) for a in attempts],
            "attempt_used": chosen["attempt_used"],
            "attempt_reason": chosen["attempt_reason"],
        },
    }
    result = _make(plant, actuators, sensors, targets, controller, pairs, info)
    info["closed_loop"] = check
    info["full_order"] = int(controller[0].shape[0])
    info["controller_order"] = info["full_order"]
    info["reduction"] = None
    if order is not None and int(order) != controller[0].shape[0]:
        reduction = reduce_controller(controller, int(order))
        result = _make(plant, actuators, sensors, targets, reduction.controller, pairs, info)
        reduced_check = check_on_plant(
            plant, result, model_modes=model_modes, delay_s=delay
        ).to_dict()
        info["reduction"] = {
            "method": "balanced truncation (stable part; unstable poles kept)",
            "order": reduction.order,
            "full_order": reduction.full_order,
            "unstable_states": reduction.unstable_states,
            "hankel_singular_values": list(reduction.hankel_singular_values),
            "error_bound": reduction.error_bound,
            "full_order_target_damping_min": check["target_damping_min"],
            "kept_target_damping_min": reduced_check["target_damping_min"],
        }
        info["closed_loop_full_order"] = check
        info["closed_loop"] = check = reduced_check
        info["controller_order"] = reduction.order
    info["margins"] = _margins_info(plant, result, delay)
    info["margins_note"] = (
        "loop-at-a-time at the plant input, other loops closed; LQG has no guaranteed margins "
        "(Doyle 1978); null = no crossover"
    )
    warnings += _warnings(plant, check, info["margins"], zeta_c)
    info["warnings"] = warnings
    return _make(plant, actuators, sensors, targets, result.controller, pairs, info)


# ---------------------------------------------------------------------- design on a model
@dataclass(frozen=True)
class _Setup:
    """What every design-model attempt of one call shares."""

    plant: ModalPlant
    actuators: tuple
    sensors: tuple
    targets: list
    pairs: tuple
    r: np.ndarray
    zeta_c: float
    zeta_e: float
    process_noise: str


def _synthesize(setup: _Setup, kept, model, goals: np.ndarray, delay: float) -> dict:
    """Controller for one set of goals on one design model, and its full-plant check."""
    plant, targets, zeta_c = setup.plant, setup.targets, setup.zeta_c
    w, z = plant.omegas[kept], plant.dampings[kept]
    is_target = np.array([i in targets for i in kept])
    beta = input_gains(model, len(kept), setup.r)
    est_goals = np.array([setup.zeta_e if i in targets else FLOOR_DAMPING for i in kept])
    q_vel, K, regulator_damping, effective = tune_regulator(
        model, w, z, goals, is_target, beta, setup.r
    )
    # the estimator's target poles aim at zeta_e, raised with the regulator's goal when the
    # full-plant correction raises it: poles of regulator and estimator that nearly coincide
    # split widely under the full plant's delay and left-out modes
    raised = est_goals * goals / (zeta_c * (1.0 + GOAL_HEADROOM))
    aim = np.where(
        is_target, np.minimum(np.maximum(est_goals, raised), MAX_ESTIMATOR_DAMPING), est_goals
    )
    noise = estimator_noise(plant, model, kept, setup.sensors, setup.process_noise, aim)
    noise["W"], L = tune_estimator(model, noise["W"], noise["V"], w, z, aim, is_target)
    controller = lqg_controller(*model, K, L)
    trial = _make(plant, setup.actuators, setup.sensors, targets, controller, setup.pairs, {})
    model_modes = [i + 1 for i in kept]
    check = check_on_plant(plant, trial, model_modes=model_modes, delay_s=delay).to_dict()
    return {
        "controller": controller,
        "check": check,
        "regulator": {
            "rule": REGULATOR_RULE,
            "state_weight": "velocity states only",
            "velocity_weights": q_vel.tolist(),
            "input_weights": setup.r.tolist(),
            "damping_goals": goals.tolist(),
            "corrected_goals": effective.tolist(),
            "regulator_damping": regulator_damping,
        },
        "estimator": {
            "process_noise": noise["rule"],
            "sensor_noise_density": noise["density"],
            "sensor_noise_intensity": np.diag(noise["V"]).tolist(),
            "process_noise_intensity": noise["W"].tolist(),
            "estimator_damping_goals": aim.tolist() if noise["rule"] == "relative" else None,
            "estimator_damping": pole_damping(model[0] - L @ model[2], w, z),
            "conversion": "intensity = ASD^2 / 2 (one-sided ASD to continuous white intensity)",
            "relative_sensor_noise": noise["relative_sensor_noise"],
        },
    }


def _design_on(setup: _Setup, kept: list, delay: float) -> dict:
    """The best controller on one design model, with the full-plant correction of the goals.

    The design model leaves out the delay, the roll-offs and the modes outside it: where the
    full plant falls short on a target mode, that mode's goal is scaled by
    (1 + GOAL_HEADROOM) target / reached and the controller designed again (at most
    FULL_PLANT_ITERATIONS times). Kept: the stable attempt with the largest smallest target
    damping among those that reduce no more residual modes' damping than the first.
    """
    plant, targets, zeta_c = setup.plant, setup.targets, setup.zeta_c
    model = design_model_matrices(plant, setup.actuators, setup.sensors, [i + 1 for i in kept])
    is_target = np.array([i in targets for i in kept])
    goal = min(zeta_c * (1.0 + GOAL_HEADROOM), 0.99)
    goals = np.array([goal if t else FLOOR_DAMPING for t in is_target])
    attempts = []
    for _ in range(FULL_PLANT_ITERATIONS + 1):
        attempt = _synthesize(setup, kept, model, goals, delay)
        attempts.append((goals.tolist(), attempt))
        check = attempt["check"]
        reached = {m["mode"] - 1: m["closed_loop_damping"] for m in check["modes"]}
        short = np.array(
            [t and 0 < reached[i] < zeta_c for i, t in zip(kept, is_target, strict=True)]
        )
        if not check["stable"] or not np.any(short):
            break
        if len(attempts) > 1 and _attempt_rank(attempts[-1][1]["check"], attempts) < max(
            _attempt_rank(a[1]["check"], attempts) for a in attempts[:-1]
        ):
            break  # raising the goals made it worse: going on from a worse attempt cannot help
        aim_c = zeta_c * (1.0 + GOAL_HEADROOM)
        raised = np.array([goals[k] * aim_c / max(reached[i], 1e-6) for k, i in enumerate(kept)])
        goals = np.where(short, np.minimum(raised, MAX_RAISED_GOAL), goals)
        if np.allclose(goals, attempts[-1][0]):
            break
    used = max(range(len(attempts)), key=lambda k: _attempt_rank(attempts[k][1]["check"], attempts))
    goals_used, best = attempts[used]
    return {
        **best,
        "kept": list(kept),
        "goals": goals_used,
        "attempts": [(g, a["check"]) for g, a in attempts],
        "attempt_used": used + 1,
        "attempt_reason": _attempt_reason(attempts, used, zeta_c),
    }


def _attempt_rank(check: dict, attempts: list) -> tuple:
    """Order of attempts: stable first, then no more residual modes' damping reduced than the
    first attempt, then the larger smallest target damping, then the earlier (smaller goals)."""
    spilled = len(attempts[0][1]["check"]["spillover_reduced"])
    return (
        bool(check["stable"]),
        len(check["spillover_reduced"]) <= spilled,
        check["target_damping_min"],
    )


def _attempt_reason(attempts: list, used: int, zeta_c: float) -> str:
    """Why attempt ``used`` (0-based) is the one kept, in words, naming the worse ones."""
    checks = [a[1]["check"] for a in attempts]
    kept = checks[used]
    if len(checks) == 1:
        if not kept["stable"]:
            return "only attempt: unstable on the full plant, no correction tried"
        return "only attempt: the full plant needed no correction of the goals"
    others = []
    for k, check in enumerate(checks):
        if k == used:
            continue
        what = (
            "unstable"
            if not check["stable"]
            else f"smallest target damping {check['target_damping_min']:.4g}"
        )
        worse = not check["stable"] or check["target_damping_min"] < kept["target_damping_min"]
        others.append(f"attempt {k + 1} {what}{' (worse)' if worse else ''}")
    state = "stable" if kept["stable"] else "no attempt stable"
    met = " (meets the target)" if kept["target_damping_min"] >= zeta_c * (1 - TARGET_TOL) else ""
    return (
        f"best {state} attempt: smallest target damping {kept['target_damping_min']:.4g}{met}; "
        + "; ".join(others)
    )


def _design_with_spillover(setup: _Setup, kept: list, delay: float, reach_seen: np.ndarray):
    """:func:`_design_on`, then residual modes driven unstable added to the design model.

    Residual modes the controller drives unstable (and that the actuators reach and the sensors
    see) join the design model — the cure of Balas 1978 — and the design is repeated, at most
    SPILLOVER_ROUNDS times, while that makes the full-plant loop better. Returns the chosen
    design and the modes added (1-based).
    """
    added: list[int] = []
    chosen = _design_on(setup, kept, delay)
    for _ in range(SPILLOVER_ROUNDS):
        check = chosen["check"]
        spilled = [
            m - 1
            for m in check["spillover_unstable"]
            if m - 1 not in chosen["kept"] and reach_seen[m - 1]
        ]
        if check["stable"] or not spilled:
            break
        trial = _design_on(setup, sorted(chosen["kept"] + spilled), delay)
        if not _better(trial["check"], check):
            break
        chosen, added = trial, added + [m + 1 for m in spilled]
    return chosen, added


def _reach_and_seen(full, n_modes: int, beta_all: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per plant mode: reached by the actuators, and seen by the sensors (REACH_TOL)."""
    gamma_all = output_gains(full[2], n_modes, np.ones(full[2].shape[0]))
    ok = []
    for gains in (beta_all, gamma_all):
        top = np.max(gains)
        ok.append(gains > REACH_TOL * top if top > 0 else gains > 0)
    return ok[0], ok[1]


def _better(new: dict, old: dict) -> bool:
    """Whether a full-plant check is better: stable first, then fewer unstable spillover modes,
    then a smaller largest real part."""

    def rank(check):
        return (
            check["stable"],
            -len(check["spillover_unstable"]),
            -check["max_real_part"],
        )

    return rank(new) > rank(old)


# ---------------------------------------------------------------------- helpers
def _make(plant, actuators, sensors, targets, controller, pairs, info) -> Design:
    return Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        plant_summary=plant_summary(plant),
        actuators=tuple(actuators),
        sensors=tuple(sensors),
        target_modes=tuple(i + 1 for i in targets),
        controller=controller,
        pairs=tuple(pairs),
        plant_title=plant.title,
        info=info,
    )


def _hardware(plant, actuators, sensors, pairs):
    actuators, sensors, pairs = list(actuators), list(sensors), list(pairs)
    if pairs:
        from_pairs = [plant.pair(p) for p in pairs]
        a = [p.actuator for p in from_pairs]
        s = [p.sensor for p in from_pairs]
        if (actuators and actuators != a) or (sensors and sensors != s):
            raise UsageError("give either pairs or actuators and sensors, not conflicting both")
        actuators, sensors = a, s
    if not actuators or not sensors:
        raise UsageError("LQG needs at least one actuator and one sensor")
    for names, what in ((actuators, "actuator"), (sensors, "sensor")):
        if len(set(names)) != len(names):
            raise UsageError(f"an {what} is named twice in {names}")
    for name in actuators:
        plant.actuator(name)
    for name in sensors:
        plant.sensor(name)
    return actuators, sensors, pairs


def _targets(plant, modes) -> list[int]:
    numbers = list(modes or ()) or list(plant.requirements.modes)
    if not numbers:
        numbers = list(range(1, plant.n_modes + 1))
    for m in numbers:
        if isinstance(m, bool) or int(m) != m or not 1 <= m <= plant.n_modes:
            raise UsageError(f"mode {m!r} does not exist (the plant has modes 1-{plant.n_modes})")
    return sorted({int(m) - 1 for m in numbers})


def _ratio(value, name: str) -> float:
    value = float(value)
    if not 0.0 < value < 1.0:
        raise UsageError(f"{name} must be a damping ratio in (0, 1), got {value!r}")
    return value


def _target_damping(plant, target_damping) -> float:
    if target_damping is None:
        target_damping = plant.requirements.min_damping or DEFAULT_TARGET_DAMPING
    return _ratio(target_damping, "target_damping")


def _input_weights(plant, actuators) -> np.ndarray:
    limits = []
    for name in actuators:
        act = plant.actuator(name)
        limits.append(act.max_force_n if act.kind == "force" else act.max_stroke_m)
    if any(v is None for v in limits):
        return np.ones(len(actuators))
    limits = np.asarray(limits, dtype=float)
    return (limits.min() / limits) ** 2


def _reachable(plant, targets, neighbours, full, beta_all):
    """Design-model modes (0-based) and the neighbours left out, with the reason."""
    reach, seen = _reach_and_seen(full, plant.n_modes, beta_all)
    for i in targets:
        if not reach[i]:
            raise DesignRefused(
                f"mode {i + 1} cannot be reached by the actuators (its shape is zero there)"
            )
        if not seen[i]:
            raise DesignRefused(f"mode {i + 1} cannot be seen by the sensors")
    kept, dropped = [], []
    for i in design_modes(plant, targets, neighbours=neighbours):
        if reach[i] and seen[i]:
            kept.append(i)
        else:
            why = "not reached by the actuators" if not reach[i] else "not seen by the sensors"
            dropped.append({"mode": i + 1, "reason": why + " (cannot spill over)"})
    return kept, dropped


def design_model_matrices(
    plant: ModalPlant, actuators: Sequence[str], sensors: Sequence[str], modes: Sequence[int]
) -> Matrices:
    """State space of the design model: the given modes, with the static correction of higher ones.

    Parameters
    ----------
    plant : ModalPlant
        The full plant.
    actuators, sensors : sequence of str
        Inputs (N or m) and outputs (SI units).
    modes : sequence of int
        Modes of the model, 1-based.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D) in the balanced modal form of :meth:`ModalPlant.statespace_matrices`,
        restricted to ``modes``. Modes above the highest kept one add their static compliance
        c b/ω² to D for displacement-like (and force) sensors and drop their direct term c b for
        accelerometers, so the model's DC gain of a displacement sensor is the full plant's when
        no lower mode is left out.
    """
    kept = sorted(int(m) - 1 for m in modes)
    full = plant.statespace_matrices(actuators, sensors)
    A, B, C, D = full
    idx = np.ravel([[2 * i, 2 * i + 1] for i in kept])
    D = D.copy()
    w_top = plant.omegas[kept].max()
    above = [i for i in range(plant.n_modes) if i not in kept and plant.omegas[i] > w_top]
    if above:
        b = np.column_stack([plant.input_row(a) for a in actuators])  # n_modes × n_u
        for o, name in enumerate(sensors):
            row, order = plant.output_row(name)
            if order == 0:
                D[o] += (row[above] / plant.omegas[above] ** 2) @ b[above]
            elif order == 2:
                D[o] -= row[above] @ b[above]
    return A[np.ix_(idx, idx)], B[idx], C[:, idx], D


def _finite_or_none(value):
    if value is None:
        return None
    value = float(value)
    return value if np.isfinite(value) else None


def _margins_info(plant, design_, delay) -> list[dict]:
    # The default grid holds every natural frequency exactly; an undamped mode's modal sum is
    # infinite there, so those points are left out (the crossovers are bracketed either side).
    grid = default_grid(plant, design_)
    undamped = plant.freqs_hz[plant.dampings == 0.0]
    grid = grid[~np.isin(grid, undamped)]
    out = []
    for m in loop_margins(plant, design_, delay_s=delay, freq_hz=grid):
        out.append(
            {
                "actuator": m.loop,
                "gain_margin_db": _finite_or_none(m.gain_margin_db),
                "gain_reduction_margin_db": _finite_or_none(m.gain_reduction_margin_db),
                "phase_margin_deg": _finite_or_none(m.phase_margin_deg),
                "delay_margin_s": _finite_or_none(m.delay_margin_s),
                "crossover_hz": _finite_or_none(m.crossover_hz),
            }
        )
    return out


def _warnings(plant, check, margins, zeta_c) -> list[str]:
    out = []
    if not check["stable"]:
        out.append(
            "the closed loop on the full plant is UNSTABLE (its margins do not mean stability)"
        )
    if check["spillover_unstable"]:
        modes = ", ".join(str(m) for m in check["spillover_unstable"])
        out.append(
            f"spillover: mode(s) {modes} outside the targets are driven unstable (add them "
            "to the design model, e.g. raise neighbours, or use collocated pairs)"
        )
    if check["spillover_reduced"]:
        modes = ", ".join(str(m) for m in check["spillover_reduced"])
        out.append(f"spillover: damping of mode(s) {modes} is reduced by the loop")
    if check["target_damping_min"] < zeta_c * (1.0 - TARGET_TOL):
        out.append(
            f"target damping {zeta_c:.3g} not reached (lowest target mode damping "
            f"{check['target_damping_min']:.3g})"
        )
    req = plant.requirements
    for m in margins:
        gm, pm = m["gain_margin_db"], m["phase_margin_deg"]
        if req.min_gain_margin_db is not None and gm is not None and gm < req.min_gain_margin_db:
            out.append(f"loop {m['actuator']}: gain margin {gm:.3g} dB below the requirement")
        if (
            req.min_phase_margin_deg is not None
            and pm is not None
            and (pm < req.min_phase_margin_deg)
        ):
            out.append(f"loop {m['actuator']}: phase margin {pm:.3g} deg below the requirement")
    return out
