"""Pieces shared by the passive laws (tmd, viscous, shunt): the peak objective, its refinement,
and the assembled :class:`~dampctl.design.Design`.

Peak objective
    The tuned parts (absorbers, RL shunts) are refined on the full plant for the smallest
    response peak at the outputs: the largest, over the outputs that show a target mode, of
    the ratio of the peak of |H| with the parts to the peak without them, both taken over a
    band of ±50 % around every target mode (|H| is the largest over the inputs). The inputs
    are the plant's disturbances (else a force or extension at every part's port), the
    outputs the plant's performance outputs (else every part's port motion). An output shows
    a target mode when its open-loop peak in the band lies within ±max(3ζ, 1 %) of one (as in
    the assessment's peak reductions); when none does, every output counts.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

from dampctl.analysis.passive import PassiveSweep, passive_model, passive_modes
from dampctl.design import Design
from dampctl.errors import UsageError
from dampctl.model.passive import PassivePart
from dampctl.model.plant import ModalPlant

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


@dataclass(frozen=True)
class _Band:
    freq_hz: np.ndarray
    lo_hz: float
    hi_hz: float


class PeakObjective:
    """Largest peak ratio (with / without the parts) at the outputs, around the target modes.

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
    inputs, outputs : tuple of str
        What the responses run from and to (module docstring).
    shown : tuple of str
        The outputs that count.
    lo_hz, hi_hz : float
        The band's ends (Hz).
    """

    def __init__(self, plant: ModalPlant, parts: Sequence[PassivePart], modes: Sequence[int]):
        model = passive_model(plant, parts)
        self.inputs = tuple(d.name for d in plant.disturbances) or model.ports.actuators
        self.outputs = tuple(o.name for o in plant.outputs) or model.ports.sensors
        band = _band(plant, modes)
        self.lo_hz, self.hi_hz = band.lo_hz, band.hi_hz
        self._sweep = PassiveSweep(plant, model, band.freq_hz, self.inputs, self.outputs)
        open_mag = np.max(np.abs(self._sweep.frf().open), axis=1)  # (n_out, n_f)
        self._open_peak = np.max(open_mag, axis=1)
        at = band.freq_hz[np.argmax(open_mag, axis=1)]
        shown = []
        for o in range(len(self.outputs)):
            for m in modes:
                f, z = plant.freqs_hz[m - 1], plant.dampings[m - 1]
                if self._open_peak[o] > 0 and abs(at[o] / f - 1.0) <= max(3.0 * z, 0.01):
                    shown.append(o)
                    break
        keep = [o for o in range(len(self.outputs)) if self._open_peak[o] > 0]
        self._rows = np.array(shown or keep, dtype=int)
        self.shown = tuple(self.outputs[o] for o in self._rows)

    def ratio(self, parts: Sequence[PassivePart]) -> float:
        """max over the counted outputs of peak with the parts / peak without.

        Parameters
        ----------
        parts : sequence of parts
            Part values on the same ports.

        Returns
        -------
        float
        """
        closed = np.max(np.abs(self._sweep.closed(parts)[self._rows]), axis=1)
        return float(np.max(np.max(closed, axis=1) / self._open_peak[self._rows]))

    def describe(self) -> dict:
        """JSON-ready description: ``inputs``, ``outputs``, ``band_hz``."""
        return {
            "inputs": list(self.inputs),
            "outputs": list(self.shown),
            "band_hz": [self.lo_hz, self.hi_hz],
        }


def _band(plant: ModalPlant, modes: Sequence[int]) -> _Band:
    pieces = []
    for m in modes:
        f, z = plant.freqs_hz[m - 1], plant.dampings[m - 1]
        pieces.append(np.geomspace(f / BAND, f * BAND, _POINTS))
        if z > 0:  # resolve the open-loop peak (an undamped mode's own frequency stays out)
            pieces.append(f * np.exp(z * np.linspace(-3.0, 3.0, 61)))
    grid = np.unique(np.concatenate(pieces))
    for f, z in zip(plant.freqs_hz, plant.dampings, strict=True):
        if z == 0:
            grid = grid[np.abs(grid / f - 1.0) > 1e-9]
    return _Band(grid, float(grid[0]), float(grid[-1]))


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
        actuators=(),
        sensors=(),
        target_modes=tuple(modes),
        pairs=tuple(pairs),
        plant_title=plant.title,
        info=out,
        parts=parts,
    )
