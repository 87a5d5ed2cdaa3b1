"""Sizing: how many actuator/sensor pairs a structure needs, which ones, what each costs and buys.

For k = 1 … K pairs, :func:`size_pairs` finds the best set of k candidate pairs for a
collocated law (dvf, iff, ppf) and reports for it the law's own tuned design, the smallest
closed-loop damping over the target modes, the hardware cost, the damping gained per unit cost
against k − 1, the actuator effort under the plant's disturbances and the loop margins; then
the smallest k that meets the target damping and the plant's margin requirements.

Search
    Sets are compared by the smallest target damping with a common normalized gain tuned per
    set (:mod:`dampctl.sizing.screening`: batched eigenvalues, pilot-gain screening). When
    C(n, k) ≤ ``exhaustive_limit`` (and always for k = 1) every set is considered
    (``method = "exhaustive"``),
    otherwise greedy forward selection from the previous row's set with pairwise-swap
    refinement (``"greedy + swaps"``). The few best sets of the search (``shortlist``) are then
    designed by the law itself — its own per-loop tuning, delay and roll-offs — and the row
    takes the best of them by the law's closed-loop damping, preferring sets that satisfy the
    rank rule.

Reported damping
    ``min_damping`` is min over the target modes of
    :func:`dampctl.analysis.closedloop.closed_loop_modes` for the row's design (the plant's stated
    delay as Padé, hardware roll-offs), i.e. what ``dampctl tune --pairs … --modes …
    [--target-damping Z]`` followed by ``dampctl assess`` gives for that set.
    ``achievable_min_damping`` is the same for the law's design that maximizes it (no target);
    the damping gained per unit cost uses the achievable values.

Rank rule
    A cluster of near-repeated target modes (:func:`dampctl.model.survey.find_clusters`, 2 %) needs
    at least as many pairs as its size whose shape rows on the cluster span it
    (:func:`dampctl.model.survey.cluster_rank`; PBH test, Hautus 1969): one pair on a symmetric
    stage leaves one of its two equal modes undamped. A set that falls short is named in its row and
    is never recommended.

Effort
    RMS actuator command per loop under the plant's disturbances (independent, one-sided force
    PSDs in N²/Hz), from the frequency integral σ_a² = ∫ Σ_d |T_ad(f)|² S_d(f) df of the
    closed-loop transfer T = −(I + K G_yu)⁻¹ K G_yd, with the exact delay e^{−jωT} and the
    hardware roll-offs, on the dense grid of :func:`dampctl.analysis.margins.default_grid`
    (trapezoid rule). For a white PSD it equals the Lyapunov (H2) result; the tests check that.
"""

from __future__ import annotations

import importlib
import math
import time
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from typing import Any, TextIO

import numpy as np

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.analysis.effort import actuator_effort
from dampctl.analysis.margins import loop_margins
from dampctl.errors import DesignRefused, UsageError
from dampctl.model.plant import ModalPlant
from dampctl.model.survey import cluster_rank, find_clusters, pair_rows
from dampctl.progress import Progress
from dampctl.sizing.screening import SetEvaluator, TunedSets, loop_template
from dampctl.sizing.setsearch import all_sets, search_exhaustive, search_greedy

__all__ = ["LAWS", "SAME_DAMPING", "SizingResult", "SizingRow", "actuator_effort", "size_pairs"]

#: relative difference under which two maximized dampings count as the same (the gain
#: search's own tie tolerance: it takes the smallest gains within 0.1 % of its best)
SAME_DAMPING = 1e-3

#: collocated laws sizing can use
LAWS: tuple[str, ...] = ("dvf", "iff", "ppf")
RANK_RULE = (
    "a cluster of near-repeated modes needs at least as many pairs as its size, with shape "
    "vectors that span it; a set that falls short is never recommended"
)
_TOL = 1e-9


@dataclass(frozen=True)
class SizingRow:
    """The best set of one size and what it gives.

    Attributes
    ----------
    pairs_used : int
        Number of pairs k.
    chosen : tuple of str
        Pair names of the set.
    method : str
        ``exhaustive`` or ``greedy + swaps``.
    sets_considered, sets_tuned : int
        Sets screened and sets tuned by the batched search; ``designs`` of them were designed
        by the law.
    designs : int
        Law designs made for this row.
    design : Design
        The law's design for the set (with the target damping when one is given).
    min_damping : float
        Smallest closed-loop damping ratio over the target modes for ``design``.
    achievable_min_damping : float
        The same for the law's design that maximizes it.
    mode_damping : tuple of (int, float)
        (mode, closed-loop damping) of every target mode for ``design``.
    limiting_mode : int
        Target mode with the smallest damping.
    cost : float
        Sum of the costs of the set's actuators and sensors.
    damping_per_cost : float or None
        (achievable_k − achievable_{k−1}) / (cost_k − cost_{k−1}); None for k = 1 or equal cost.
    effort_rms : tuple of (str, float, float or None) or None
        (actuator, RMS command in N or m, max_force_n) under the plant's disturbances; None
        when the plant has none.
    margins : tuple of dict
        Per loop ``{"pair", "gain_margin_db", "phase_margin_deg", "delay_margin_s"}``.
    stable : bool
        Closed loop stable with the stated delay and roll-offs.
    target_met, margins_met : bool or None
        Against the target damping and the plant's margin requirements; None when none given.
    shortfall : tuple of dict
        Clusters the set cannot span: ``{"modes", "pairs_needed", "rank"}``.
    """

    pairs_used: int
    chosen: tuple[str, ...]
    method: str
    sets_considered: int
    sets_tuned: int
    designs: int
    design: Any
    min_damping: float
    achievable_min_damping: float
    mode_damping: tuple[tuple[int, float], ...]
    limiting_mode: int
    cost: float
    damping_per_cost: float | None
    effort_rms: tuple[tuple[str, float, float | None], ...] | None
    margins: tuple[dict, ...]
    stable: bool
    target_met: bool | None
    margins_met: bool | None
    shortfall: tuple[dict, ...]

    @property
    def acceptable(self) -> bool:
        """Stable, target and margins met (or not required), and no cluster shortfall."""
        return (
            self.stable
            and self.target_met is not False
            and self.margins_met is not False
            and not self.shortfall
        )

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (one row of the sizing table)."""
        return {
            "pairs_used": self.pairs_used,
            "chosen": list(self.chosen),
            "min_damping": self.min_damping,
            "achievable_min_damping": self.achievable_min_damping,
            "cost": self.cost,
            "method": self.method,
            "sets_considered": self.sets_considered,
            "sets_tuned": self.sets_tuned,
            "designs": self.designs,
            "limiting_mode": self.limiting_mode,
            "mode_damping": [{"mode": m, "damping": z} for m, z in self.mode_damping],
            "gains": [
                {"pair": lp.pair, "gain": lp.gain, "unit": unit}
                for lp, unit in zip(
                    self.design.loops,
                    self.design.info.get("gain_units", [""] * len(self.design.loops)),
                    strict=False,
                )
            ],
            "damping_per_cost": self.damping_per_cost,
            "effort_rms": None
            if self.effort_rms is None
            else [{"actuator": a, "rms": r, "max_force_n": m} for a, r, m in self.effort_rms],
            "margins": [dict(m) for m in self.margins],
            "stable": self.stable,
            "target_met": self.target_met,
            "margins_met": self.margins_met,
            "cluster_shortfall": [dict(s) for s in self.shortfall],
        }


@dataclass(frozen=True)
class SizingResult:
    """Result of :func:`size_pairs`.

    Attributes
    ----------
    law : str
        The law sized for.
    target_damping : float or None
        Damping ratio required on the target modes.
    modes : tuple of int
        Target modes (1-based).
    rows : tuple of SizingRow
        One per pair count, k = 1 … K.
    recommended : int or None
        Smallest acceptable k (:attr:`SizingRow.acceptable`), None when none up to K is.
    statement : str
        The recommendation, or why there is none, in plain words.
    limiting_mode : int or None
        Without a recommendation: the target mode limiting the largest set.
    clusters : tuple of dict
        Near-repeated clusters among the target modes: ``{"modes", "pairs_needed",
        "rank_all"}`` (rank of all candidates together).
    excluded : tuple of (str, str)
        Candidate pairs the law refused, with the reason.
    evaluations : int
        Closed-loop eigenvalue problems solved by the batched search.
    rank_rule : str
        The rank rule stated in the output (near-repeated clusters need as many pairs).
    seconds : float
        Wall time of the whole sizing (s).
    """

    law: str
    target_damping: float | None
    modes: tuple[int, ...]
    rows: tuple[SizingRow, ...]
    recommended: int | None
    statement: str
    limiting_mode: int | None
    clusters: tuple[dict, ...] = ()
    excluded: tuple[tuple[str, str], ...] = ()
    evaluations: int = 0
    seconds: float = 0.0
    rank_rule: str = field(default=RANK_RULE)

    @property
    def recommended_row(self) -> SizingRow | None:
        """The row of the recommended count, if any."""
        return None if self.recommended is None else self.rows[self.recommended - 1]

    def to_frame(self):
        """The best set per pair count as a pandas DataFrame (needs pandas)."""
        from dampctl.tables import frame, sizing_rows

        return frame(sizing_rows(self))

    def _repr_html_(self) -> str:
        from dampctl.tables import sizing_html

        return sizing_html(self)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (what ``dampctl size --json`` prints)."""
        row = self.recommended_row
        return {
            "law": self.law,
            "target_damping": self.target_damping,
            "modes": list(self.modes),
            "rows": [r.to_dict() for r in self.rows],
            "recommended": self.recommended,
            "recommended_pairs": None if row is None else list(row.chosen),
            "statement": self.statement,
            "limiting_mode": self.limiting_mode,
            "clusters": [dict(c) for c in self.clusters],
            "rank_rule": self.rank_rule,
            "excluded": [{"pair": p, "reason": r} for p, r in self.excluded],
            "evaluations": self.evaluations,
            "seconds": self.seconds,
        }


def size_pairs(
    plant: ModalPlant,
    *,
    law: str = "dvf",
    modes: Sequence[int] | None = None,
    target_damping: float | None = None,
    max_pairs: int | None = None,
    exhaustive_limit: int = 2000,
    candidates: Sequence[str] | None = None,
    shortlist: int = 3,
    progress: TextIO | None = None,
) -> SizingResult:
    """How many pairs, which ones, and what each costs and buys.

    Parameters
    ----------
    plant : ModalPlant
        The plant with its candidate pairs (and their costs).
    law : {"dvf", "iff", "ppf"}, optional
        The collocated law.
    modes : sequence of int, optional
        Target modes (1-based); default the plant's required modes, or all.
    target_damping : float, optional
        Damping ratio to reach on every target mode; default the plant's ``min_damping``.
    max_pairs : int, optional
        Largest set size K; default min(number of usable candidates, 4). Rows stop earlier
        when no larger set exists without two loops sharing an actuator or a sensor.
    exhaustive_limit : int, optional
        Largest C(n, k) searched exhaustively; above it greedy selection with swaps is used
        (single pairs are always searched exhaustively).
    candidates : sequence of str, optional
        Pair names to choose from; default every pair of the plant.
    shortlist : int, optional
        Sets per row handed from the batched search to the law's own design (>= 1).
    progress : file-like, optional
        Stream for a progress bar (drawn only when the search runs longer than 2 s).

    Returns
    -------
    SizingResult

    Raises
    ------
    UsageError
        For an unknown law, a bad option, or when no candidate suits the law.
    """
    start = time.perf_counter()
    module = _law_module(law)
    targets = _target_modes(plant, modes)
    if target_damping is None:
        target_damping = plant.requirements.min_damping
    if target_damping is not None and not 0.0 < float(target_damping) < 1.0:
        raise UsageError(f"target damping must be in (0, 1), got {target_damping}")
    if int(exhaustive_limit) < 1:
        raise UsageError(f"exhaustive limit must be >= 1, got {exhaustive_limit}")
    if int(shortlist) < 1:
        raise UsageError(f"shortlist must be >= 1, got {shortlist}")
    names = [p.name for p in plant.pairs] if candidates is None else list(candidates)
    if len(set(names)) != len(names):
        raise UsageError("a candidate pair is listed twice")
    for name in names:
        plant.pair(name)
    templates, excluded = [], []
    for name in names:
        try:
            unit = module.design(
                plant, [name], modes=[i + 1 for i in targets], gain=1.0, report_margins=False
            )
        except DesignRefused as exc:
            excluded.append((name, exc.message))
            continue
        templates.append(loop_template(plant, unit))
    if not templates:
        raise UsageError(f"no candidate pair suits {law}: " + _grouped_reasons(excluded))
    evaluator = SetEvaluator(plant, templates, [i + 1 for i in targets])
    usable = [i for i in range(len(templates)) if evaluator.usable[i]]
    for i in range(len(templates)):
        if not evaluator.usable[i]:
            excluded.append((templates[i].pair, "adds no damping to the target modes"))
    if not usable:
        raise UsageError("no candidate pair adds damping to the target modes")
    limit = min(len(usable), 4) if max_pairs is None else int(max_pairs)
    if not 1 <= limit <= len(usable):
        raise UsageError(f"max pairs must be in 1..{len(usable)} (usable candidates), got {limit}")
    clusters = _clusters(plant, targets, [templates[i].pair for i in usable])
    maximize_plant = replace(
        plant, requirements=replace(plant.requirements, min_damping=None)
    )
    steps = sum(
        math.comb(len(usable), k)
        if math.comb(len(usable), k) <= exhaustive_limit or k == 1
        else 3 * len(usable) * k
        for k in range(1, limit + 1)
    )
    rows: list[SizingRow] = []
    previous: list[int] = []
    with Progress(steps, "sizing", stream=progress, enabled=progress is not None) as bar:
        for k in range(1, limit + 1):
            count = math.comb(len(usable), k)
            if count <= exhaustive_limit or k == 1:
                sets = all_sets(evaluator, usable, k)
                if sets.shape[0] == 0:
                    break  # every k-set would share an actuator or a sensor
                ranked = search_exhaustive(evaluator, sets, progress=bar)
                method, considered = "exhaustive", sets.shape[0]
            else:
                try:
                    ranked = search_greedy(evaluator, usable, k, start=previous, progress=bar)
                except UsageError:
                    break  # no k loops without shared hardware
                method, considered = "greedy + swaps", ranked.sets.shape[0]
            row = _row(
                plant,
                maximize_plant,
                module,
                evaluator,
                ranked,
                targets=targets,
                target_damping=target_damping,
                k=k,
                method=method,
                considered=considered,
                shortlist=int(shortlist),
                clusters=clusters,
                previous=rows[-1] if rows else None,
            )
            previous = [
                i for i in range(len(templates)) if templates[i].pair in set(row.chosen)
            ]
            rows.append(row)
    recommended = next((r.pairs_used for r in rows if r.acceptable), None)
    statement, limiting = _statement(rows, recommended, target_damping, plant)
    return SizingResult(
        law=law,
        target_damping=None if target_damping is None else float(target_damping),
        modes=tuple(i + 1 for i in targets),
        rows=tuple(rows),
        recommended=recommended,
        statement=statement,
        limiting_mode=limiting,
        clusters=tuple(clusters),
        excluded=tuple(excluded),
        evaluations=evaluator.evaluations,
        seconds=time.perf_counter() - start,
    )


# ---------------------------------------------------------------------- one row
def _better_set(new: tuple, old: tuple, tol: float = SAME_DAMPING) -> bool:
    """Whether (spans clusters, maximized damping, cost) ``new`` beats ``old``: spanning first,
    then damping larger by more than ``tol`` (relative), then, at equal damping, lower cost,
    then, at equal cost, the set that comes first in the plant file (``new[3]``, ``old[3]``: the
    candidates' indices), so that a symmetric tie is decided the same way on every machine."""
    if new[0] != old[0]:
        return new[0]
    if new[1] > old[1] + tol * max(abs(old[1]), 1e-12):
        return True
    if abs(new[1] - old[1]) > tol * max(abs(old[1]), 1e-12):
        return False
    return (new[2], new[3]) < (old[2], old[3])


def _row(
    plant,
    maximize_plant,
    module,
    evaluator: SetEvaluator,
    ranked: TunedSets,
    *,
    targets,
    target_damping,
    k,
    method,
    considered,
    shortlist,
    clusters,
    previous,
) -> SizingRow:
    modes = [i + 1 for i in targets]
    best = None
    tried = 0
    for members in ranked.sets[:shortlist]:
        chosen = tuple(evaluator.templates[p].pair for p in members)
        design = module.design(maximize_plant, list(chosen), modes=modes, target_damping=None)
        tried += 1
        value = _min_damping(plant, design, targets)
        short = _shortfall(plant, chosen, clusters)
        key = (not short, value, _cost(plant, chosen), tuple(sorted(members.tolist())))
        if best is None or _better_set(key, best[0]):
            best = (key, chosen, design, value, short)
    _, chosen, achievable_design, achievable, short = best
    if target_damping is not None:
        design = module.design(plant, list(chosen), modes=modes, target_damping=target_damping)
        tried += 1
    else:
        design = achievable_design
    matched = closed_loop_modes(plant, design)
    damping = matched.damping[list(targets)]
    value = float(damping.min())
    cost = _cost(plant, chosen)
    per_cost = None
    if previous is not None and abs(cost - previous.cost) > 0:
        gained = achievable - previous.achievable_min_damping
        if abs(gained) <= SAME_DAMPING * max(abs(achievable), 1e-12):
            gained = 0.0  # the same damping, as far as the gain search tells them apart
        per_cost = gained / (cost - previous.cost)
    margins = _margins(plant, design)
    return SizingRow(
        pairs_used=k,
        chosen=chosen,
        method=method,
        sets_considered=int(considered),
        sets_tuned=int(ranked.sets.shape[0]),
        designs=tried,
        design=design,
        min_damping=value,
        achievable_min_damping=float(achievable),
        mode_damping=tuple((int(m), float(z)) for m, z in zip(modes, damping, strict=True)),
        limiting_mode=int(modes[int(np.argmin(damping))]),
        cost=cost,
        damping_per_cost=per_cost,
        effort_rms=actuator_effort(plant, design),
        margins=margins,
        stable=bool(matched.stable),
        target_met=None
        if target_damping is None
        else bool(value >= float(target_damping) - 1e-6),
        margins_met=_margins_met(plant, margins),
        shortfall=tuple(short),
    )


def _min_damping(plant, design, targets) -> float:
    matched = closed_loop_modes(plant, design)
    value = float(matched.damping[list(targets)].min())
    return value if matched.stable else min(value, -1.0)


def _cost(plant: ModalPlant, chosen: Sequence[str]) -> float:
    acts = {plant.pair(p).actuator for p in chosen}
    sens = {plant.pair(p).sensor for p in chosen}
    total = sum(plant.actuator(a).cost for a in acts) + sum(plant.sensor(s).cost for s in sens)
    return float(total)


def _margins(plant: ModalPlant, design) -> tuple[dict, ...]:
    out = []
    for pair, m in zip(design.pairs, loop_margins(plant, design), strict=True):
        out.append(
            {
                "pair": pair,
                "gain_margin_db": m.gain_margin_db,
                "phase_margin_deg": m.phase_margin_deg,
                "delay_margin_s": m.delay_margin_s,
            }
        )
    return tuple(out)


def _margins_met(plant: ModalPlant, margins: Sequence[dict]) -> bool | None:
    req = plant.requirements
    if req.min_gain_margin_db is None and req.min_phase_margin_deg is None:
        return None
    ok = True
    for m in margins:
        if req.min_gain_margin_db is not None:
            ok &= m["gain_margin_db"] >= req.min_gain_margin_db
        if req.min_phase_margin_deg is not None:
            ok &= m["phase_margin_deg"] >= req.min_phase_margin_deg
    return bool(ok)


# ---------------------------------------------------------------------- rank rule
def _clusters(plant: ModalPlant, targets, names: Sequence[str]) -> list[dict]:
    b_rows, c_rows = pair_rows(plant, list(names))
    out = []
    for cluster in find_clusters(plant.freqs_hz):
        if sum(1 for i in cluster if i in set(targets)) < 2:
            continue
        out.append(
            {
                "modes": [i + 1 for i in sorted(cluster)],
                "pairs_needed": len(cluster),
                "rank_all": cluster_rank(b_rows, c_rows, sorted(cluster)),
            }
        )
    return out


def _shortfall(plant: ModalPlant, chosen: Sequence[str], clusters: Sequence[dict]) -> list[dict]:
    b_rows, c_rows = pair_rows(plant, list(chosen))
    out = []
    for cluster in clusters:
        rank = cluster_rank(b_rows, c_rows, [m - 1 for m in cluster["modes"]])
        if rank < cluster["pairs_needed"]:
            out.append(
                {"modes": cluster["modes"], "pairs_needed": cluster["pairs_needed"], "rank": rank}
            )
    return out


def _statement(rows, recommended, target, plant) -> tuple[str, int | None]:
    if recommended is not None:
        row = rows[recommended - 1]
        what = f"reaches damping {row.min_damping:.4g}"
        if target is not None:
            what += f" (target {target:g})"
        return (
            f"{recommended} pair(s) suffice: {', '.join(row.chosen)} {what} at cost "
            f"{row.cost:g}",
            None,
        )
    last = rows[-1]
    reasons = []
    if last.shortfall:
        names = "; ".join(f"modes {s['modes']}" for s in last.shortfall)
        reasons.append(f"falls short of the rank rule on {names}")
    if not last.stable:
        reasons.append("is unstable with the stated delay and roll-offs")
    if last.target_met is False:
        reasons.append(
            f"reaches only {last.achievable_min_damping:.4g} against the target {target:g}, "
            f"limited by mode {last.limiting_mode}"
        )
    if last.margins_met is False:
        req = plant.requirements
        reasons.append(
            "misses the margin requirement "
            f"(gain >= {req.min_gain_margin_db} dB, phase >= {req.min_phase_margin_deg} deg)"
        )
    because = "; ".join(reasons) or "does not meet the requirements"
    return (
        f"no set of up to {last.pairs_used} pair(s) meets the requirements: the best "
        f"{last.pairs_used}-pair set ({', '.join(last.chosen)}) {because}",
        last.limiting_mode,
    )


# ---------------------------------------------------------------------- helpers
def _law_module(law: str):
    if law not in LAWS:
        raise UsageError(f"law must be one of {', '.join(LAWS)} for sizing, got {law!r}")
    try:
        return importlib.import_module(f"dampctl.laws.{law}")
    except ImportError:  # pragma: no cover - law not on this branch
        raise UsageError(f"law {law!r} is not available in this version") from None


def _target_modes(plant: ModalPlant, modes) -> list[int]:
    if modes is None or len(modes) == 0:
        modes = plant.requirements.modes or range(1, plant.n_modes + 1)
    out = sorted({int(m) for m in modes})
    for m in out:
        if not 1 <= m <= plant.n_modes:
            raise UsageError(f"mode {m} does not exist (the plant has {plant.n_modes} modes)")
    return [m - 1 for m in out]


def _grouped_reasons(excluded: list[tuple[str, str]]) -> str:
    """One reason per kind of refusal: pairs refused for the same reason are named together."""
    groups: dict[str, list[str]] = {}
    for name, reason in excluded:
        key = reason.replace(repr(name), "{pair}").replace(f"pairs.{name}", "pairs.{pair}")
        groups.setdefault(key, []).append(name)
    parts = []
    for key, names in groups.items():
        text = key.replace("{pair}", repr(names[0]))
        if len(names) > 1:
            text += f" (likewise {', '.join(names[1:])})"
        parts.append(text)
    return "; ".join(parts)
