"""Sizing passive parts: how much absorber mass, and which piezoelectric struts to shunt.

Where passive parts have a size to choose, the same question as for loops — what does each
step up cost and buy — gets the same kind of table:

* absorbers (:func:`size_absorbers`): one row per mass ratio μ (absorber mass over the mode's
  effective mass at its site, the same μ for every target mode), each tuned by
  :func:`dampctl.laws.tmd.design` (rule and refinement);
* shunts (:func:`size_shunts`): for k = 1, 2, … struts, the set of k piezoelectric struts (from
  the pairs whose actuator has ``capacitance_f`` and ``coupling_k``) whose rule design gives the
  largest smallest damping (every set tried, at most :data:`MAX_SETS` per size, else the best
  k − 1 set plus one strut), then designed with :func:`dampctl.laws.shunt.design`.

Each row gives the smallest damping over the target modes (as the law's design reports it),
the largest peak ratio at the outputs (with / without the parts), the added mass and the cost
(absorbers and shunts from the plant's ``[[parts]]`` prices, struts from their actuator cost).
The recommendation is the cheapest row — the lightest for absorbers — that reaches the target
damping (default the plant's ``min_damping``), or none, with the limiting mode. A viscous
damper has no size to choose beyond its coefficient, which its law already optimizes.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from dampctl.errors import UsageError
from dampctl.laws import shunt, tmd
from dampctl.laws._passive import mode_numbers
from dampctl.model.plant import ModalPlant

__all__ = [
    "DEFAULT_MASS_RATIOS",
    "MAX_SETS",
    "PassiveSizing",
    "PassiveSizingRow",
    "size_absorbers",
    "size_shunts",
]

#: mass ratios tried by default (common practice spans about 1 to 10 %)
DEFAULT_MASS_RATIOS = (0.005, 0.01, 0.02, 0.05, 0.1)
#: largest number of strut sets of one size tried exhaustively
MAX_SETS = 200


@dataclass(frozen=True)
class PassiveSizingRow:
    """One size of the passive parts.

    Attributes
    ----------
    size : float
        The mass ratio μ (absorbers) or the number of struts (shunts).
    chosen : tuple of str
        The absorbers' sites, or the shunted pairs.
    min_damping : float
        Smallest damping ratio over the target modes.
    limiting_mode : int
        The target mode with that damping.
    peak_ratio : float
        Largest peak ratio at the outputs, with / without the parts.
    added_mass_kg : float
        Absorber mass added (kg).
    cost : float or None
        Cost from the plant file; None when a part has no price.
    target_met : bool or None
        Whether ``min_damping`` reaches the target (None without a target).
    """

    size: float
    chosen: tuple[str, ...]
    min_damping: float
    limiting_mode: int
    peak_ratio: float
    added_mass_kg: float
    cost: float | None
    target_met: bool | None

    def to_dict(self) -> dict[str, Any]:
        """JSON form (the attribute names)."""
        return {
            "size": self.size,
            "chosen": list(self.chosen),
            "min_damping": self.min_damping,
            "limiting_mode": self.limiting_mode,
            "peak_ratio": self.peak_ratio,
            "added_mass_kg": self.added_mass_kg,
            "cost": self.cost,
            "target_met": self.target_met,
        }


@dataclass(frozen=True)
class PassiveSizing:
    """A table of sizes of passive parts and the recommendation.

    Attributes
    ----------
    law : str
        ``tmd`` or ``shunt``.
    size_name : str
        What ``size`` means: ``mass_ratio`` or ``struts``.
    modes : tuple of int
        Target modes.
    target_damping : float or None
        The damping each target mode must reach.
    rows : tuple of PassiveSizingRow
        One per size, smallest first.
    recommended : int or None
        Index of the recommended row.
    statement : str
        The recommendation in a sentence.
    """

    law: str
    size_name: str
    modes: tuple[int, ...]
    target_damping: float | None
    rows: tuple[PassiveSizingRow, ...]
    recommended: int | None
    statement: str

    def to_dict(self) -> dict[str, Any]:
        """JSON form: ``law``, ``size_name``, ``modes``, ``target_damping``, ``rows``,
        ``recommended``, ``statement``."""
        return {
            "law": self.law,
            "size_name": self.size_name,
            "modes": list(self.modes),
            "target_damping": self.target_damping,
            "rows": [r.to_dict() for r in self.rows],
            "recommended": self.recommended,
            "statement": self.statement,
        }


def size_absorbers(
    plant: ModalPlant,
    *,
    modes: Sequence[int] | None = None,
    sites: str | Sequence[str] | None = None,
    mass_ratios: Sequence[float] = DEFAULT_MASS_RATIOS,
    target_damping: float | None = None,
) -> PassiveSizing:
    """Absorbers of growing mass on the target modes, and the lightest that reaches the target.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : sequence of int, optional
        Target modes (default the plant's required modes).
    sites : str or sequence of str, optional
        Absorber sites (as :func:`dampctl.laws.tmd.design`).
    mass_ratios : sequence of float, optional
        The mass ratios μ to try, each for every target mode.
    target_damping : float, optional
        Damping to reach (default the plant's ``min_damping``).

    Returns
    -------
    PassiveSizing
    """
    targets = mode_numbers(plant, modes, "tmd")
    ratios = sorted({float(m) for m in mass_ratios})
    if not ratios or ratios[0] <= 0:
        raise UsageError("mass ratios must be > 0", field="mass_ratios")
    target = _target(plant, target_damping)
    rows = []
    for mu in ratios:
        design = tmd.design(plant, modes=targets, mass_ratio=mu, sites=sites)
        rows.append(_row(plant, mu, tuple(a.site for a in design.parts), design, targets,
                         target))
    return _finish("tmd", "mass_ratio", targets, target, rows, lightest=True)


def size_shunts(
    plant: ModalPlant,
    *,
    modes: Sequence[int] | None = None,
    candidates: Sequence[str] | None = None,
    kind: str = "RL",
    max_pairs: int | None = None,
    target_damping: float | None = None,
) -> PassiveSizing:
    """How many piezoelectric struts to shunt, and which.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : sequence of int, optional
        Target modes (default the plant's required modes).
    candidates : sequence of str, optional
        Pairs to choose from (default every pair on a piezoelectric strut, one per strut).
    kind : {"RL", "R"}, optional
        The network.
    max_pairs : int, optional
        Largest number of struts tried (default all candidates).
    target_damping : float, optional
        Damping to reach (default the plant's ``min_damping``).

    Returns
    -------
    PassiveSizing
    """
    targets = mode_numbers(plant, modes, "shunt")
    pool = _piezo_pairs(plant, candidates)
    top = len(pool) if max_pairs is None else min(int(max_pairs), len(pool))
    if top < 1:
        raise UsageError("max_pairs must be >= 1", field="max_pairs")
    target = _target(plant, target_damping)
    rows, previous = [], ()
    for k in range(1, top + 1):
        sets = list(itertools.combinations(pool, k))
        if len(sets) > MAX_SETS:  # greedy: the best set of one less, plus one strut
            sets = [(*previous, p) for p in pool if p not in previous]
        scored = []
        for chosen in sets:
            quick = shunt.design(plant, list(chosen), modes=targets, kind=kind, refine=False)
            scored.append((quick.info["min_damping"], -_cost_or_inf(plant, quick), chosen))
        best = max(scored, key=lambda s: (s[0], s[1]))[2]
        design = shunt.design(plant, list(best), modes=targets, kind=kind)
        rows.append(_row(plant, k, tuple(best), design, targets, target, struts=True))
        previous = best
    return _finish("shunt", "struts", targets, target, rows, lightest=False)


def _piezo_pairs(plant: ModalPlant, candidates) -> list[str]:
    names = list(candidates) if candidates else [p.name for p in plant.pairs]
    out, struts = [], set()
    for name in names:
        pair = plant.pair(name)
        actuator = plant.actuator(pair.actuator)
        if not actuator.piezo or actuator.name in struts:
            if candidates and not actuator.piezo:
                raise UsageError(f"pair {name}: {actuator.name!r} is not a piezoelectric strut")
            continue
        struts.add(actuator.name)
        out.append(name)
    if not out:
        raise UsageError("no pair on a piezoelectric strut (capacitance_f and coupling_k) to "
                         "shunt")
    return out


def _target(plant: ModalPlant, target_damping: float | None) -> float | None:
    target = plant.requirements.min_damping if target_damping is None else target_damping
    if target is not None and not 0.0 < target < 1.0:
        raise UsageError(f"target damping must be in (0, 1), got {target}")
    return target


def _cost_or_inf(plant, design) -> float:
    cost = _cost(plant, design, struts=True)
    return float("inf") if cost is None else cost


def _cost(plant, design, *, struts: bool = False) -> float | None:
    prices = [plant.part_price(p.price_kind, getattr(p, "mass_kg", 0.0)) for p in design.parts]
    if any(p is None for p in prices):
        return None
    total = float(sum(prices))
    if struts:
        total += sum(plant.actuator(p.actuator).cost for p in design.parts)
    return total


def _row(plant, size, chosen, design, targets, target, *, struts=False) -> PassiveSizingRow:
    from dampctl.analysis.passive import passive_modes

    damping = passive_modes(plant, design.parts).matched.damping
    limiting = min(targets, key=lambda m: damping[m - 1])
    smallest = float(damping[limiting - 1])
    return PassiveSizingRow(
        size=float(size),
        chosen=chosen,
        min_damping=smallest,
        limiting_mode=int(limiting),
        peak_ratio=float(design.info["refinement"]["peak_ratio"]),
        added_mass_kg=float(design.info["added_mass_kg"]),
        cost=_cost(plant, design, struts=struts),
        target_met=None if target is None else bool(smallest >= target),
    )


def _finish(law, size_name, targets, target, rows, *, lightest: bool) -> PassiveSizing:
    meeting = [k for k, r in enumerate(rows) if r.target_met]
    recommended = None
    if meeting:
        if lightest or any(rows[k].cost is None for k in meeting):
            recommended = meeting[0]
        else:
            recommended = min(meeting, key=lambda k: (rows[k].cost, k))
    what = "mass ratio" if size_name == "mass_ratio" else "struts"
    if target is None:
        statement = "no target damping stated: compare the rows"
    elif recommended is None:
        last = rows[-1]
        statement = (
            f"no {what} tried reaches damping {target:g}: the largest gives {last.min_damping:.4g}"
            f", limited by mode {last.limiting_mode}"
        )
    else:
        r = rows[recommended]
        size = (f"{r.size:g}" if size_name == "mass_ratio"
                else f"{int(r.size)} ({', '.join(r.chosen)})")
        statement = f"{what} {size} reaches damping {r.min_damping:.4g} (target {target:g})"
    return PassiveSizing(law, size_name, tuple(targets), target, tuple(rows), recommended,
                         statement)
