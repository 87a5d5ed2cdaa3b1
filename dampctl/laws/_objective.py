"""The collocated laws' tuning objective under constraints, capped modes, and what limits gains.

Constraints (a candidate breaking one scores −inf, as an unstable one does):

* closed-loop stability (eigenvalues with the Padé delay and the roll-offs);
* the spillover floor: no mode outside the objective may fall below half its open-loop
  damping (:attr:`dampctl.laws._checks.ModeGroups.floor`);
* the plant's margin requirements (``min_gain_margin_db``, ``min_phase_margin_deg``,
  ``min_disk_margin_db``), on a grid with the exact delay (:mod:`dampctl.laws._constraints`).

Balanced max-min (our rule, stated here). Before the search, every objective mode's damping is
read over a scan of the feasible gains (a common scale on a log grid, and each loop alone). A
mode whose damping cannot be raised by at least ``CAP_TOLERANCE`` (10 %) of its open-loop
damping (at least 1e-4 in damping ratio) is *capped*: it leaves the max-min objective, which
then maximizes the smallest damping among the modes the loops can move, and it keeps the
spillover floor like a mode outside the targets. Its reason is found by the same scan with the
delay removed ("delay": it moves then), with the hardware roll-offs removed too ("roll-off"),
or neither ("not seen": the loops barely reach or see it). Among gains whose objective is
within 0.1 % of the best, the smallest are taken (:mod:`dampctl.laws._tuning`); then, when
maximizing, the next smallest group damping is raised with the smaller ones held within 0.1 %
of their values, level by level (lexicographic max-min, :meth:`Objective.balance`), so that
a mode the loops can push further is not left at the level of the hardest one.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from dampctl.laws._constraints import MarginLimits, design_margins, unit_responses
from dampctl.laws._tuning import _refine_loops as refine_loops
from dampctl.laws._tuning import stack_loops

__all__ = ["CAP_TOLERANCE", "Objective", "build_objective", "constraint_info", "with_margins"]

#: a target mode whose damping the feasible gains raise by less than this fraction of its
#: open-loop damping is capped (left out of the max-min objective)
CAP_TOLERANCE = 0.10
#: smallest damping rise (ratio) that counts as moving a mode, for lightly damped modes
CAP_FLOOR = 1e-4
#: how much (relative) a smaller group damping may give up while the next one is raised
LEX_TOLERANCE = 1e-3
#: factor by which the chosen gains are raised to find the constraint that limits them
PROBE = 1.1


@dataclass(frozen=True)
class Objective:
    """Constrained objective of a decentralized gain-affine law (DVF, IFF).

    Attributes
    ----------
    request : Setup
        The law's request (its ``groups`` possibly without the capped modes).
    unit : tuple of ndarray
        Effective unit-gain controller (delay and roll-offs folded in).
    limits : MarginLimits or None
        Margin requirements with the grid plant response; None when none is stated.
    unit_freq : ndarray or None
        Each loop's unit-gain controller response on the limits' grid.
    capped : tuple of dict
        Capped target modes: ``mode`` (1-based), ``reason``, ``open_loop_damping``,
        ``max_damping`` (the most the scan reached).
    """

    request: object
    unit: tuple
    limits: MarginLimits | None
    unit_freq: np.ndarray | None
    capped: tuple[dict, ...] = ()

    def scores(self, gains: np.ndarray) -> np.ndarray:
        """Objective of each row of gains (n_eval, n_loops), −inf where a constraint breaks."""
        gains = np.atleast_2d(gains)
        score = self.request.model.evaluate_gains(self.unit, gains).score
        return self._margins(gains, score)

    def sorted_values(self, gains: np.ndarray) -> np.ndarray:
        """Each objective group's damping, ascending, per row (n_eval, n_groups); rows that
        break a constraint are all −inf."""
        gains = np.atleast_2d(gains)
        ev = self.request.model.evaluate_gains(self.unit, gains)
        groups = self.request.groups
        cols = []
        for members, rank in groups.groups:
            values = -np.sort(-ev.damping[:, list(members)], axis=1)
            cols.append(values[:, rank - 1])
        values = np.sort(np.array(cols).T, axis=1) if cols else np.zeros((gains.shape[0], 0))
        ok = np.isfinite(self._margins(gains, ev.score))
        return np.where(ok[:, None], values, -np.inf)

    def balance(self, gains: np.ndarray) -> np.ndarray:
        """Lexicographic max-min after the max-min: with the smallest group damping held
        within ``LEX_TOLERANCE`` of its value, raise the next smallest, and so on (a
        loop-against-rest pattern search per level, :func:`dampctl.laws._tuning.refine_loops`).
        """
        gains = np.asarray(gains, dtype=float)
        start = self.sorted_values(gains[None, :])[0]
        if start.size < 2 or not np.all(np.isfinite(start)) or not np.any(gains > 0):
            return gains
        floors = []
        for level in range(1, start.size):
            floors.append(start[level - 1] * (1.0 - LEX_TOLERANCE))

            def run(trial, level=level, floors=tuple(floors)):
                values = self.sorted_values(trial)
                held = np.all(values[:, :level] >= np.array(floors)[None, :], axis=1)
                return np.where(held, values[:, level], -np.inf)

            here = float(run(gains[None, :])[0])
            if not np.isfinite(here):
                break
            gains, _ = refine_loops(run, gains, here, passes=4)
            start = self.sorted_values(gains[None, :])[0]
        return gains

    def _margins(self, gains: np.ndarray, score: np.ndarray) -> np.ndarray:
        if self.limits is None:
            return score
        live = np.isfinite(score)
        if np.any(live):
            check = self.limits.check_diagonal(self.unit_freq, gains[live])
            score = score.copy()
            score[np.flatnonzero(live)[~check.ok]] = -np.inf
        return score

    def limited_by(self, gains: np.ndarray) -> list[str]:
        """What stops the gains from rising: the constraints broken at ``PROBE`` × the gains
        (all loops together, then each loop alone), or the objective itself."""
        request = self.request
        n = gains.size
        if not np.any(gains > 0):
            return ["the smallest damping falls with any gain: the loops are best off"]
        trials = [gains * PROBE] + [
            np.where(np.arange(n) == k, gains * PROBE, gains) for k in range(n) if gains[k] > 0
        ]
        trials = np.array(trials)
        ev = request.model.evaluate_gains(self.unit, trials)
        here = float(self.scores(gains[None, :])[0])
        found: list[str] = []
        check = None
        if self.limits is not None:
            check = self.limits.check_diagonal(self.unit_freq, trials)
        for row in range(trials.shape[0]):
            for reason in broken_constraints(request, ev, row, check, self.limits):
                if reason not in found:
                    found.append(reason)
        if not found:
            scores = ev.score
            if np.all(scores <= here * (1 + 1e-9)):
                found.append("the smallest damping of the movable target modes peaks here")
            else:
                found.append("the search's resolution (higher gains score a little more)")
        for entry in self.capped:
            found.append(f"{entry['reason']} caps mode {entry['mode']}")
        return found


def broken_constraints(request, ev, row: int, check, limits) -> list[str]:
    """The constraints candidate ``row`` of an evaluation breaks, in words."""
    reasons = []
    if not ev.stable[row]:
        reasons.append("stability (a closed-loop pole crosses into the right half-plane)")
    floor = request.groups.floor
    for i in np.flatnonzero(ev.damping[row] < floor - 1e-12):
        share = 1.0 - floor[i] / request.plant.dampings[i] if floor[i] > 0 else 1.0
        reasons.append(
            f"spillover: mode {i + 1} would lose more than {share:.0%} of its open-loop damping"
        )
    if check is not None and not check.ok[row]:
        reasons.extend(check.violations(limits, row, [p.name for p in request.pairs]))
    return reasons


def build_objective(request, unit_loops, base: np.ndarray, log_range) -> Objective:
    """The constrained objective of a gain-affine law, with its capped modes found.

    Parameters
    ----------
    request : Setup
        The law's request.
    unit_loops : sequence of Loop
        Unit-gain loops (the law's filters, gain 1).
    base : ndarray
        Per-loop gain normalization of the search.
    log_range : (float, float)
        log10 range of the common scale the search scans.
    """
    model = request.model
    unit = model.effective(stack_loops(unit_loops))
    limits = MarginLimits.build(request.plant, request.pairs, delay_s=request.delay_s)
    if limits.stated:
        unit_freq = unit_responses(unit_loops, limits.freq_hz)
    else:
        limits, unit_freq = None, None
    objective = Objective(request, unit, limits, unit_freq)
    modes = list(request.groups.modes)
    if not modes:
        return objective
    scan = _scan_gains(base, log_range)
    feasible = _feasible_damping(objective, unit, scan)
    open_loop = request.plant.dampings
    movable = _moves(feasible, open_loop, modes)
    capped_idx = [i for i, m in zip(modes, movable, strict=True) if not m]
    if not capped_idx or len(capped_idx) == len(modes):
        return objective
    # reasons: the same scan without the delay, then without the hardware roll-offs too
    nodelay = replace(model, delay_s=0.0)
    ideal = replace(
        nodelay,
        actuator_bandwidth_hz=(None,) * len(model.actuator_bandwidth_hz),
        sensor_bandwidth_hz=(None,) * len(model.sensor_bandwidth_hz),
    )
    reasons = {}
    for label, variant in (("delay", nodelay), ("roll-off", ideal)):
        unit_v = variant.effective(stack_loops(unit_loops))
        ev = variant.evaluate_gains(unit_v, scan)
        damping = np.where(ev.stable[:, None], ev.damping, -np.inf)
        for i, m in zip(capped_idx, _moves(damping, open_loop, capped_idx), strict=True):
            if m and i not in reasons:
                reasons[i] = label
    capped = tuple(
        {
            "mode": i + 1,
            "reason": reasons.get(i, "not seen"),
            "open_loop_damping": float(open_loop[i]),
            "max_damping": float(np.max(feasible[:, i]))
            if np.any(np.isfinite(feasible[:, i]))
            else None,
        }
        for i in capped_idx
    )
    groups = request.groups
    kept = tuple(
        (tuple(m for m in members if m not in capped_idx), rank) for members, rank in groups.groups
    )
    kept = tuple((members, min(rank, len(members))) for members, rank in kept if members)
    floor = groups.floor.copy()
    floor[capped_idx] = 0.5 * open_loop[capped_idx]
    groups = replace(groups, groups=kept, floor=floor)
    request = replace(request, groups=groups, model=replace(model, score=groups.score))
    return replace(objective, request=request, capped=capped)


def _scan_gains(base: np.ndarray, log_range) -> np.ndarray:
    """Common-scale log scan and each loop alone on the same scale (rows of gains)."""
    scales = np.logspace(log_range[0], log_range[1], round(4 * (log_range[1] - log_range[0])) + 1)
    rows = [scales[:, None] * base[None, :]]
    if base.size > 1:
        for k in range(base.size):
            alone = np.zeros((scales.size, base.size))
            alone[:, k] = scales * base[k]
            rows.append(alone)
    return np.vstack(rows)


def _feasible_damping(objective: Objective, unit, scan: np.ndarray) -> np.ndarray:
    """Damping of every mode at the feasible scan rows (−inf on infeasible rows)."""
    model = objective.request.model
    ev = model.evaluate_gains(unit, scan)
    floor = objective.request.groups.floor
    ok = ev.stable & np.all(ev.damping >= floor[None, :] - 1e-12, axis=1)
    if objective.limits is not None and np.any(ok):
        check = objective.limits.check_diagonal(objective.unit_freq, scan[ok])
        ok[np.flatnonzero(ok)[~check.ok]] = False
    return np.where(ok[:, None], ev.damping, -np.inf)


def _moves(damping: np.ndarray, open_loop: np.ndarray, modes) -> list[bool]:
    """Whether each mode's damping rises by the cap tolerance somewhere in the rows."""
    out = []
    for i in modes:
        rise = CAP_TOLERANCE * open_loop[i] if open_loop[i] > 0 else 0.0
        best = np.max(damping[:, i]) if damping.shape[0] else -np.inf
        out.append(bool(best >= open_loop[i] + max(rise, CAP_FLOOR)))
    return out


def constraint_info(objective: Objective, gains: np.ndarray, reached: bool | None) -> dict:
    """The ``info`` entries on constraints: ``limited_by`` (None when a target was reached
    with the smallest gains), ``capped_modes`` and the rule."""
    limited = None if reached else objective.limited_by(np.asarray(gains, dtype=float))
    return {
        "limited_by": limited,
        "capped_modes": [dict(c) for c in objective.capped],
        "constraint_rule": (
            "stable; no mode outside the objective below half its open-loop damping; the "
            "plant's stated gain, phase and disk margins (exact delay, on a grid); a target "
            f"mode the feasible gains raise by less than {CAP_TOLERANCE:.0%} of its open-loop "
            "damping is capped: left out of the max-min, kept above half its open-loop damping"
        ),
    }


def with_margins(design, plant, delay_s: float):
    """The design with its margins (:func:`dampctl.laws._constraints.design_margins`) in
    ``info``; a stated margin it misses is added to the warnings."""
    facts = design_margins(plant, design, delay_s=delay_s)
    warnings = list(design.info.get("warnings", []))
    need = facts["margin_requirements"]
    for m in facts["margins"]:
        if need["min_phase_margin_deg"] is not None and (
            m["phase_margin_deg"] is not None
            and m["phase_margin_deg"] < need["min_phase_margin_deg"]
        ):
            warnings.append(
                f"loop {m['pair']}: phase margin {m['phase_margin_deg']:.1f}° below the "
                f"required {need['min_phase_margin_deg']:.1f}°"
            )
        if need["min_gain_margin_db"] is not None and (
            m["gain_margin_db"] is not None and m["gain_margin_db"] < need["min_gain_margin_db"]
        ):
            warnings.append(
                f"loop {m['pair']}: gain margin {m['gain_margin_db']:.1f} dB below the "
                f"required {need['min_gain_margin_db']:.1f} dB"
            )
    disk = facts["disk_margin"]["gain_margin_db"]
    if (
        need["min_disk_margin_db"] is not None
        and disk is not None
        and (disk < need["min_disk_margin_db"])
    ):
        warnings.append(
            f"all-loop disk margin ±{disk:.2f} dB below the required "
            f"±{need['min_disk_margin_db']:.2f} dB"
        )
    return replace(design, info={**design.info, **facts, "warnings": warnings})
