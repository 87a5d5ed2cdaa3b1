"""Pieces every collocated law needs around its own rule: options, the loop model, the Design."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.analysis.closedloop import plant_loop_delay_s
from dampctl.design import Design, Loop
from dampctl.errors import UsageError
from dampctl.laws._checks import ModeGroups, mode_groups, resolve_pairs, target_indices
from dampctl.laws._tuning import Evaluation, LoopModel
from dampctl.model.plant import ModalPlant, Pair
from dampctl.model.summary import plant_summary

__all__ = ["Setup", "finish", "loop_gains", "search_outcome", "setup"]


@dataclass(frozen=True)
class Setup:
    """The validated request: pairs, target modes, objective groups, target, delay, model."""

    plant: ModalPlant
    pairs: tuple[Pair, ...]
    targets: tuple[int, ...]
    groups: ModeGroups
    target_damping: float | None
    delay_s: float
    model: LoopModel


def setup(
    plant: ModalPlant,
    pairs: Sequence[str],
    law: str,
    *,
    modes: Sequence[int] | None,
    target_damping: float | None,
    delay_s: float | None,
    check_pair,
) -> Setup:
    """Validate the common options of a law and build its loop model.

    ``check_pair(pair)`` raises :class:`~dampctl.errors.DesignRefused` for a pair the law
    cannot use.
    """
    found = resolve_pairs(plant, pairs, law)
    for pair in found:
        check_pair(pair)
    targets = target_indices(plant, modes)
    if target_damping is None:
        target_damping = plant.requirements.min_damping
    if target_damping is not None:
        target_damping = float(target_damping)
        if not 0.0 < target_damping < 1.0:
            raise UsageError(
                f"target damping must be in (0, 1), got {target_damping}", field="target_damping"
            )
    delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
    if not math.isfinite(delay) or delay < 0.0:
        raise UsageError(f"delay must be finite and >= 0 s, got {delay}", field="delay_s")
    groups = mode_groups(plant, found, targets)
    model = LoopModel.build(plant, found, delay_s=delay, score=groups.score)
    return Setup(plant, found, targets, groups, target_damping, delay, model)


def loop_gains(gain: float | Sequence[float] | None, n_loops: int) -> np.ndarray | None:
    """Explicit gain(s): one value for every loop or one per loop; None when tuning."""
    if gain is None:
        return None
    values = np.atleast_1d(np.asarray(gain, dtype=float)).ravel()
    if values.size == 1:
        values = np.repeat(values, n_loops)
    if values.size != n_loops:
        raise UsageError(f"give one gain or {n_loops} gains (one per loop), got {values.size}")
    if not np.all(np.isfinite(values)):
        raise UsageError(f"gains must be finite, got {values.tolist()}", field="gain")
    return values


def search_outcome(target_damping: float | None, reached: bool) -> tuple[str, bool | None]:
    """How a gain search ended, in words, and whether it reached the target.

    Parameters
    ----------
    target_damping : float or None
        The target damping ratio; None when the search maximized.
    reached : bool
        Whether the search reached the target (:attr:`SearchResult.reached`).

    Returns
    -------
    tuning : str
        The ``info["tuning"]`` text.
    reached : bool or None
        None when there was no target.
    """
    if target_damping is None:
        return "maximize the smallest damping", None
    if not reached:
        return "maximize the smallest damping (target not reachable)", False
    return "smallest gains reaching the target", True


def finish(
    request: Setup,
    law: str,
    loops: Sequence[Loop],
    evaluation: Evaluation,
    *,
    tuning: str,
    target_met: bool | None,
    info: dict,
    warnings: Sequence[str] = (),
) -> Design:
    """Assemble the frozen :class:`Design` with the facts every law reports.

    ``evaluation`` is the single-row closed-loop evaluation of the final loops (with delay and
    roll-offs). ``info["min_damping"]`` is the smallest closed-loop damping ratio over all
    target modes, ``info["objective_damping"]`` the value the tuning maximized (it leaves out
    modes the pairs cannot damp: unseen modes and the surplus of a rank-deficient cluster);
    ``target_met`` compares the former with the target.
    """
    plant = request.plant
    damping = evaluation.damping[0]
    stable = bool(evaluation.stable[0])
    objective = request.groups.modes
    tuned = float(request.groups.score(damping[None, :])[0]) if objective else None
    achieved = float(np.min(damping[list(request.targets)]))
    if request.target_damping is not None:
        target_met = bool(achieved >= request.target_damping * (1.0 - 1e-6))
    notes = list(request.groups.warnings) + list(warnings)
    open_min = float(np.min(plant.dampings[list(request.targets)]))
    if request.target_damping is not None and open_min >= request.target_damping:
        notes.append(
            f"the target modes already have damping >= {request.target_damping:g} without "
            "control: the loops are not needed for this target"
        )
    if not stable:
        notes.append(
            "the closed loop is UNSTABLE with the stated delay and roll-offs "
            f"(largest pole real part {evaluation.max_real_part[0]:.4g} 1/s): do not run it"
        )
    off = [lp.pair for lp in loops if lp.gain == 0.0]
    if off and not tuning.startswith("fixed"):
        notes.append(
            f"pair(s) {', '.join(off)}: tuned gain 0 — with the other loops on, turning "
            "them up does not raise the smallest target damping; leave them out, or give them "
            "other target modes"
        )
    if request.target_damping is not None and target_met is False:
        notes.append(
            f"target damping {request.target_damping:g} is not reached: the design reaches "
            f"{_fmt(achieved)} on the target modes"
        )
    common = {
        "tuning": tuning,
        "target_damping": request.target_damping,
        "target_met": target_met,
        "min_damping": achieved,
        "objective_damping": tuned,
        "closed_loop_damping": [
            {"mode": i + 1, "damping": float(damping[i])} for i in request.targets
        ],
        "stable": stable,
        "delay_s": request.delay_s,
        "pair_count": len(request.pairs),
        "unseen_modes": list(request.groups.unseen),
        "cluster_shortfall": [dict(s) for s in request.groups.shortfall],
        "warnings": notes,
    }
    common.update(info)
    return Design(
        law=law,
        plant_fingerprint=plant.fingerprint,
        plant_summary=plant_summary(plant),
        actuators=tuple(lp.actuator for lp in loops),
        sensors=tuple(lp.sensor for lp in loops),
        target_modes=tuple(i + 1 for i in request.targets),
        loops=tuple(loops),
        pairs=tuple(lp.pair for lp in loops),
        plant_title=plant.title,
        info=common,
    )


def _fmt(value) -> str:
    return "nothing" if value is None else f"{value:.4g}"
