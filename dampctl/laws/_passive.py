"""Pieces shared by the passive laws (tmd, viscous, shunt): the peak objective, its refinement,
and the assembled :class:`~dampctl.design.Design`.

Peak objective
    The tuned parts (absorbers, shunts) are refined on the full plant for the smallest response
    peaks at the outputs: mode by mode, the ratio of the peak of |H| with the parts to the
    peak without them, in a window around each target mode and at the outputs that show it,
    and the largest of these ratios (:class:`PeakObjective`). The inputs are the plant's
    disturbances (else a force or extension at every part's port), the outputs the plant's
    performance outputs (else every part's port motion).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

import numpy as np
from scipy.optimize import minimize

from dampctl.analysis.passive import PassiveSweep, passive_model, passive_modes
from dampctl.design import Design
from dampctl.errors import UsageError
from dampctl.model.passive import PassivePart
from dampctl.model.plant import ModalPlant
from dampctl.model.summary import plant_summary
from dampctl.model.survey import find_clusters

__all__ = [
    "BAND",
    "PeakObjective",
    "mode_numbers",
    "passive_design",
    "refine_log",
]

#: half-width of the band searched around each target mode (factor)
BAND = 1.5
#: grid points per target mode's band
_POINTS = 700


def mode_numbers(plant: ModalPlant, modes: Sequence[int] | None, law: str) -> tuple[int, ...]:
    """Target modes (1-based, sorted): given, or the plant's required modes.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : sequence of int or None
        1-based mode numbers.
    law : str
        The law, for messages.

    Returns
    -------
    tuple of int
    """
    chosen = list(modes) if modes else list(plant.requirements.modes)
    if not chosen:
        raise UsageError(
            f"{law}: give the target modes (--modes): the plant file states none", field="modes"
        )
    out = tuple(sorted({int(m) for m in chosen}))
    for m in out:
        if not 1 <= m <= plant.n_modes:
            raise UsageError(
                f"mode {m} does not exist (the plant has {plant.n_modes} modes, numbered from 1)",
                field="modes",
            )
    return out


class PeakObjective:
    """Largest peak ratio (with / without the parts) at the outputs, mode by mode.

    Each target mode has a window between the geometric means of its frequency with its
    neighbours' (all plant modes; at most a factor :data:`BAND` either side). In each window
    and at each output that shows the mode (its open-loop peak in the window lies within
    ±max(3ζ, 1 %) of the mode), the ratio of the largest |H| with the parts to the largest
    without is taken (|H| is the largest over the inputs); the objective is the largest of
    these ratios, so that every target mode counts, whatever its size at the outputs. A mode no
    output shows is left out (its peak is not what the outputs see); when no output shows any
    target mode, every output counts for every mode.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    parts : sequence of parts
        Parts fixing the ports (their values change in :meth:`ratio`).
    modes : sequence of int
        Target modes (1-based).

    Attributes
    ----------
    plant : ModalPlant
        The plant.
    inputs, outputs : tuple of str
        What the responses run from and to (module docstring).
    shown : tuple of str
        The outputs that count for some target mode.
    unshown : tuple of int
        Target modes no output shows: left out (their ratio is NaN; their parts keep the rule).
    lo_hz, hi_hz : float
        The band covered by the windows (Hz).
    """

    def __init__(self, plant: ModalPlant, parts: Sequence[PassivePart], modes: Sequence[int]):
        model = passive_model(plant, parts)
        self.plant = plant
        self.inputs = tuple(d.name for d in plant.disturbances) or model.ports.actuators
        self.outputs = tuple(o.name for o in plant.outputs) or model.ports.sensors
        windows = _windows(plant, modes)
        grid = _grid(plant, windows)
        self.lo_hz, self.hi_hz = float(grid[0]), float(grid[-1])
        self._sweep = PassiveSweep(plant, model, grid, self.inputs, self.outputs)
        open_mag = np.max(np.abs(self._sweep.frf().open), axis=1)  # (n_out, n_f)
        self._terms = []  # (output rows, grid mask, open peaks) per target mode
        found = []
        for m, (lo, hi) in zip(modes, windows, strict=True):
            mask = (grid >= lo) & (grid <= hi)
            peaks = np.max(open_mag[:, mask], axis=1)
            at = grid[mask][np.argmax(open_mag[:, mask], axis=1)]
            f, z = plant.freqs_hz[m - 1], plant.dampings[m - 1]
            band = max(3.0 * z, 0.01)
            found.append([o for o in range(len(self.outputs))
                          if peaks[o] > 0 and abs(at[o] / f - 1.0) <= band])
            self._terms.append((mask, peaks))
        if not any(found):  # no output shows any target mode: every output counts
            found = [[o for o in range(len(self.outputs)) if p[o] > 0] for _, p in self._terms]
        self._terms = [(np.array(rows, dtype=int), mask, peaks[rows])
                       for rows, (mask, peaks) in zip(found, self._terms, strict=True)]
        self.unshown = tuple(m for m, rows in zip(modes, found, strict=True) if not rows)
        self.shown = tuple(self.outputs[o] for o in sorted({o for rows in found for o in rows}))

    def ratios(self, parts: Sequence[PassivePart]) -> np.ndarray:
        """Peak ratio of each target mode: with the parts over without, worst output.

        Parameters
        ----------
        parts : sequence of parts
            Part values on the same ports.

        Returns
        -------
        ndarray, shape (n_target_modes,)
            NaN for a mode no output shows.
        """
        closed = np.max(np.abs(self._sweep.closed(parts)), axis=1)  # (n_out, n_f)
        out = np.full(len(self._terms), np.nan)
        for k, (rows, mask, peaks) in enumerate(self._terms):
            if rows.size:
                out[k] = float(np.max(np.max(closed[rows][:, mask], axis=1) / peaks))
        return out

    def ratio(self, parts: Sequence[PassivePart]) -> float:
        """The largest peak ratio with the parts over the target modes and their outputs.

        Parameters
        ----------
        parts : sequence of parts
            Part values on the same ports.

        Returns
        -------
        float
        """
        values = self.ratios(parts)
        return float(np.nanmax(values)) if np.any(np.isfinite(values)) else 1.0

    def describe(self) -> dict:
        """JSON-ready description: ``inputs``, ``outputs``, ``band_hz``, ``modes_not_shown``."""
        return {
            "inputs": list(self.inputs),
            "outputs": list(self.shown),
            "band_hz": [self.lo_hz, self.hi_hz],
            "modes_not_shown": list(self.unshown),
        }


def _windows(plant: ModalPlant, modes: Sequence[int]) -> list[tuple[float, float]]:
    """(lo, hi) in Hz around each target mode: geometric means with its neighbours."""
    freqs = np.sort(plant.freqs_hz)
    out = []
    for m in modes:
        f = plant.freqs_hz[m - 1]
        below, above = freqs[freqs < f * (1 - 1e-12)], freqs[freqs > f * (1 + 1e-12)]
        lo = math.sqrt(f * below[-1]) if below.size else 0.0
        hi = math.sqrt(f * above[0]) if above.size else math.inf
        out.append((max(lo, f / BAND), min(hi, f * BAND)))
    return out


def _grid(plant: ModalPlant, windows) -> np.ndarray:
    pieces = [np.geomspace(lo, hi, _POINTS) for lo, hi in windows]
    for f, z in zip(plant.freqs_hz, plant.dampings, strict=True):
        if z > 0:  # resolve the open-loop peaks (an undamped mode's own frequency stays out)
            pieces.append(f * np.exp(z * np.linspace(-3.0, 3.0, 61)))
    grid = np.unique(np.concatenate(pieces))
    lo, hi = min(w[0] for w in windows), max(w[1] for w in windows)
    grid = grid[(grid >= lo) & (grid <= hi)]
    for f, z in zip(plant.freqs_hz, plant.dampings, strict=True):
        if z == 0:
            grid = grid[np.abs(grid / f - 1.0) > 1e-9]
    return grid


def refine_log(
    cost: Callable[[np.ndarray], float], start: np.ndarray, *, span: float = 1.0
) -> tuple[np.ndarray, float]:
    """Minimize ``cost`` over positive parameters by Nelder–Mead on their logarithms.

    Parameters
    ----------
    cost : callable
        Takes the parameters (ndarray, > 0) and returns the value to minimize.
    start : array_like
        Starting parameters (> 0).
    span : float, optional
        Size of the first simplex: 0.1 × span in natural-log units along each parameter
        (default 1: about ±10 %).

    Returns
    -------
    params : ndarray
        The best parameters found (never worse than ``start``).
    value : float
        Their cost.
    """
    start = np.asarray(start, dtype=float)
    x0 = np.log(start)
    first = cost(start)
    n = x0.size
    simplex = np.vstack([x0] + [x0 + 0.1 * span * np.eye(n)[k] for k in range(n)])
    result = minimize(
        lambda x: cost(np.exp(x)),
        x0,
        method="Nelder-Mead",
        options={
            "initial_simplex": simplex,
            "xatol": 1e-4,
            "fatol": 1e-6,
            "maxiter": 400 * n,
            "maxfev": 600 * n,
        },
    )
    if result.fun < first:
        return np.exp(result.x), float(result.fun)
    return start, float(first)


def refine_parts(
    objective: PeakObjective,
    parts: Sequence[PassivePart],
    modes: Sequence[int],
    params: Callable[[PassivePart], list[float]],
    build: Callable[[PassivePart, np.ndarray], PassivePart],
    *,
    rounds: int = 2,
    span: float = 1.0,
) -> tuple[list[PassivePart], float, float]:
    """Refine tuned parts mode by mode for the smallest peak ratio of their own mode.

    The parts tuned to one mode — or to one cluster of near-repeated target modes (within 2 %,
    :func:`dampctl.model.survey.find_clusters`), whose peaks share one band — are refined
    together (Nelder–Mead on the logarithms of their values, :func:`refine_log`) for the
    largest peak ratio of those modes, the others held; the groups are taken in turn,
    ``rounds`` times (the parts act on each other through the structure). The result is kept
    only if its largest ratio over the target modes is no worse than the start's.

    Parameters
    ----------
    objective : PeakObjective
        The peak ratios.
    parts : sequence of parts
        The rule's parts (each has a ``mode``).
    modes : sequence of int
        The target modes, in the objective's order.
    params : callable
        A part's positive values to refine (e.g. frequency and damping of an absorber).
    build : callable
        The part with new values: ``build(part, values)``.
    rounds : int, optional
        Passes over the modes.
    span : float, optional
        First simplex size (:func:`refine_log`).

    Returns
    -------
    parts : list
        The refined parts (the rule's when refining did not help).
    start_ratio, ratio : float
        The largest peak ratio before and after.
    """
    start = list(parts)
    first = objective.ratio(start)
    current = list(start)
    order = list(modes)
    for _ in range(rounds):
        for cluster in _mode_groups(objective.plant, order):
            shown = [m for m in cluster if m not in objective.unshown]
            group = [k for k, p in enumerate(current) if p.mode in shown]
            if not group:
                continue
            sizes = [len(params(current[k])) for k in group]
            x0 = np.array([v for k in group for v in params(current[k])])
            row = [order.index(m) for m in shown]

            def trial(values: np.ndarray, base=tuple(current), group=group, sizes=sizes) -> list:
                out, at = list(base), 0
                for k, n in zip(group, sizes, strict=True):
                    out[k] = build(base[k], values[at : at + n])
                    at += n
                return out

            def cost(values: np.ndarray, trial=trial, row=row) -> float:
                return float(np.max(objective.ratios(trial(values))[row]))

            best, _ = refine_log(cost, x0, span=span)
            current = trial(best)
    final = objective.ratio(current)
    if final > first:
        return start, first, first
    return current, first, final


def _mode_groups(plant: ModalPlant, modes: Sequence[int]) -> list[list[int]]:
    """Target modes grouped by near-repeated clusters (each other mode on its own)."""
    clusters = find_clusters(plant.freqs_hz)
    groups, seen = [], set()
    for m in modes:
        if m in seen:
            continue
        cluster = next((c for c in clusters if m - 1 in c), [m - 1])
        group = [k + 1 for k in cluster if k + 1 in modes]
        seen.update(group)
        groups.append(group)
    return groups


def passive_design(
    plant: ModalPlant,
    law: str,
    parts: Sequence[PassivePart],
    modes: Sequence[int],
    info: dict,
    *,
    pairs: Sequence[str] = (),
) -> Design:
    """Assemble the passive design and add its closed-loop facts to ``info``.

    Adds ``min_damping`` (smallest damping over the target modes, the less damped pole of a
    mode split by a tuned part), ``stable``, ``target_damping`` (the plant's ``min_damping``),
    ``target_met``, ``added_mass_kg`` and, when the plant prices the parts, ``cost``.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    law : str
        ``tmd``, ``viscous`` or ``shunt``.
    parts : sequence of parts
        The tuned parts.
    modes : sequence of int
        Target modes (1-based).
    info : dict
        Law-specific facts (copied, then completed).
    pairs : sequence of str, optional
        Pairs the parts use (shunt struts).

    Returns
    -------
    Design
    """
    parts = tuple(parts)
    result = passive_modes(plant, parts).matched
    smallest = float(min(result.damping[m - 1] for m in modes))
    target = plant.requirements.min_damping
    out = dict(info)
    out.update(
        {
            "min_damping": smallest,
            "stable": bool(result.stable),
            "target_damping": target,
            "target_met": None if target is None else bool(smallest >= target),
            "added_mass_kg": float(sum(getattr(p, "mass_kg", 0.0) for p in parts)),
        }
    )
    prices = [plant.part_price(p.price_kind, getattr(p, "mass_kg", 0.0)) for p in parts]
    if all(p is not None for p in prices):
        out["cost"] = float(sum(prices))
    return Design(
        law=law,
        plant_fingerprint=plant.fingerprint,
        plant_summary=plant_summary(plant),
        actuators=(),
        sensors=(),
        target_modes=tuple(modes),
        pairs=tuple(pairs),
        plant_title=plant.title,
        info=out,
        parts=parts,
    )
