"""Input shapers for a plant's modes: open loop, or on the damped modes of a design.

:func:`design_shaper` takes the modes to cancel (1-based numbers), their natural frequency and
damping ratio — the plant's own, or with a design the closed-loop ones (poles of the loop with
its delay and hardware roll-offs, matched to the modes by assignment) — designs one shaper of
the chosen kind per mode and convolves them (:mod:`dampctl.laws.shapers`). It reports, per
mode, the residual vibration against frequency error (the sensitivity curve), the band in
which the residual stays under the tolerance, and the worst residual over the frequency-drift
cases of ``dampctl assess`` (:func:`dampctl.analysis.robustness.drift_cases`: every mode's
frequency moved independently by up to ± the drift; with a design the loop is solved again on
each drifted plant, since the damped modes move with it).

Kind choice: a given kind is used as is. Without one, an ``insensitivity`` (the relative
frequency error, ±, the residual must stay under the tolerance for) picks the shortest kind of
zv, zvd, ei, zvdd that meets it on every mode; without either, ZVD (the common robust choice).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from dampctl.analysis.closedloop import (
    closed_loop_matrix,
    closed_loop_modes,
    effective_controller,
    match_modes,
    open_loop_poles,
)
from dampctl.analysis.robustness import drift_cases, drifted_plant_matrices
from dampctl.design import Design
from dampctl.errors import UsageError
from dampctl.laws.shapers import (
    DEFAULT_TOLERANCE,
    KINDS,
    Shaper,
    convolve,
    insensitivity_band,
    shaper_for_mode,
)
from dampctl.model.plant import ModalPlant

__all__ = ["SENSITIVITY_RATIOS", "ShapedMode", "ShaperDesign", "ShaperDrift", "design_shaper"]

#: frequency ratios ω/ω_mode of the sensitivity curve
SENSITIVITY_RATIOS = np.linspace(0.5, 1.5, 401)


@dataclass(frozen=True)
class ShapedMode:
    """One mode the shaper cancels.

    Attributes
    ----------
    mode : int
        Mode number (1-based).
    freq_hz : float
        Natural frequency (Hz) the shaper was designed on (closed loop with a design).
    damping : float
        Damping ratio it was designed on.
    residual : float
        Residual vibration (fraction) of the whole shaper at that frequency.
    band_hz : tuple of float
        (low, high) Hz around ``freq_hz`` where the residual stays ≤ the tolerance.
    band_percent : tuple of float
        The same as frequency errors (%) from ``freq_hz``: (negative, positive).
    sensitivity : ndarray
        Residual at ``SENSITIVITY_RATIOS × freq_hz`` (damping kept).
    drift_worst : float or None
        Largest residual over the drift cases (None when drift was not checked).
    """

    mode: int
    freq_hz: float
    damping: float
    residual: float
    band_hz: tuple[float, float]
    band_percent: tuple[float, float]
    sensitivity: np.ndarray
    drift_worst: float | None


@dataclass(frozen=True)
class ShaperDrift:
    """The shaper under the frequency-drift cases of ``dampctl assess``.

    Attributes
    ----------
    drift : float
        Largest relative frequency shift of each mode.
    n_cases : int
        Cases evaluated (corners, then seeded random samples).
    cases_over : int
        Cases where some shaped mode is left with a residual above the tolerance.
    worst_residual : float
        Largest residual of any shaped mode over the cases.
    worst_case : ndarray
        Frequency factor of every mode in the case giving it.
    unstable_cases : int
        With a design: cases where the loop is unstable (their modes are left out).
    """

    drift: float
    n_cases: int
    cases_over: int
    worst_residual: float
    worst_case: np.ndarray
    unstable_cases: int


@dataclass(frozen=True)
class ShaperDesign:
    """A shaper designed for a plant's modes, with its robustness.

    Attributes
    ----------
    shaper : Shaper
        The impulse sequence (all modes convolved).
    loop : {"open", "closed"}
        Designed on the open-loop modes or on the damped modes of a design.
    modes : tuple of ShapedMode
        Per mode: design frequency and damping, band, sensitivity curve.
    tolerance : float
        Residual limit (fraction).
    insensitivity : float or None
        Relative frequency error (±) the residual had to stay under the tolerance for.
    insensitivity_met : bool or None
        Whether every mode's band covers ± ``insensitivity`` (None when none was asked).
    kind_reason : str
        Why this kind: ``"given"``, ``"shortest meeting the insensitivity"``, ``"none meets
        the insensitivity: the most insensitive"`` or ``"default"``.
    drift : ShaperDrift or None
        Residuals over the drift cases (None when ``drift`` was 0).
    """

    shaper: Shaper
    loop: str
    modes: tuple[ShapedMode, ...]
    tolerance: float
    insensitivity: float | None
    insensitivity_met: bool | None
    kind_reason: str
    drift: ShaperDrift | None

    @property
    def duration_s(self) -> float:
        """Shaper duration (s): the time the shaped move takes longer."""
        return self.shaper.duration_s

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready summary (``dampctl shape --json``), with the shaper file under
        ``shaper``."""
        out: dict[str, Any] = {
            "kind": self.shaper.kind,
            "kind_reason": self.kind_reason,
            "loop": self.loop,
            "duration_s": self.duration_s,
            "tolerance": self.tolerance,
            "insensitivity": self.insensitivity,
            "insensitivity_met": self.insensitivity_met,
            "modes": [
                {
                    "mode": m.mode,
                    "freq_hz": m.freq_hz,
                    "damping": m.damping,
                    "residual": m.residual,
                    "band_hz": list(m.band_hz),
                    "band_percent": list(m.band_percent),
                    "drift_worst_residual": m.drift_worst,
                }
                for m in self.modes
            ],
            "sensitivity": {
                "ratio": SENSITIVITY_RATIOS.tolist(),
                "residual": {str(m.mode): m.sensitivity.tolist() for m in self.modes},
            },
            "shaper": self.shaper.to_dict(),
        }
        d = self.drift
        out["drift"] = None if d is None else {
            "drift": d.drift,
            "n_cases": d.n_cases,
            "cases_over": d.cases_over,
            "worst_residual": d.worst_residual,
            "worst_case": d.worst_case.tolist(),
            "unstable_cases": d.unstable_cases,
        }
        return out


def _mode_targets(plant: ModalPlant, modes: Sequence[int], design: Design | None):
    """(frequency Hz, damping) of each mode: the plant's, or the closed loop's."""
    if design is None:
        return plant.freqs_hz, plant.dampings
    design.check_plant(plant)
    if design.passive:  # the structure with its parts: no loop
        from dampctl.analysis.passive import passive_modes

        matched = passive_modes(plant, design.parts).matched
    else:
        matched = closed_loop_modes(plant, design)
    if not matched.stable:
        raise UsageError(
            f"the closed loop of this design is unstable (largest real part "
            f"{matched.max_real_part:.4g} 1/s): there are no damped modes to shape for"
        )
    for m in modes:
        if matched.damping[m - 1] >= 1.0 - 1e-12:
            raise UsageError(
                f"mode {m} does not oscillate in closed loop (its pole is real): it leaves no "
                "residual vibration to cancel; leave it out of --modes"
            )
    return matched.freq_hz, matched.damping


def _build(kind: str, freqs, dampings, modes, tolerance: float) -> Shaper:
    shaper = None
    for m in modes:
        one = shaper_for_mode(
            float(freqs[m - 1]), float(dampings[m - 1]), kind, tolerance=tolerance, mode=m
        )
        shaper = one if shaper is None else convolve(shaper, one)
    return shaper


def _bands(shaper: Shaper, freqs, dampings, modes, tolerance: float):
    out = []
    for m in modes:
        f, z = float(freqs[m - 1]), float(dampings[m - 1])
        out.append(insensitivity_band(shaper, f, z, tolerance=tolerance))
    return out


def _covers(bands, freqs, modes, insensitivity: float) -> bool:
    for (low, high), m in zip(bands, modes, strict=True):
        f = float(freqs[m - 1])
        if math.isnan(low) or low > f * (1 - insensitivity) or high < f * (1 + insensitivity):
            return False
    return True


def _drift(
    plant, design, shaper, modes, tolerance, drift, samples, seed
) -> tuple[ShaperDrift, np.ndarray]:
    cases = drift_cases(
        plant.n_modes, drift, samples=samples, seed=seed, step_modes=max(modes) + 1
    )
    index = [m - 1 for m in modes]
    worst, worst_case, over, unstable = np.full(len(modes), 0.0), cases[0], 0, 0
    worst_value = -1.0
    if design is None:
        freqs = plant.freqs_hz[None, index] * cases[:, index]
        damps = np.broadcast_to(plant.dampings[index], freqs.shape)
        residuals = shaper.residual(freqs, damps)
        valid = np.ones(cases.shape[0], dtype=bool)
    else:
        base, acts, sens = plant, design.actuators, design.sensors
        if design.passive:  # the structure with its parts, on their ports (no loop)
            from dampctl.analysis.passive import pair_part_poles, passive_model

            model = passive_model(plant, design.parts)
            base, acts, sens = model.plant, model.ports.actuators, model.ports.sensors
            ctrl = model.ports.statespace_matrices()
        else:
            ctrl = effective_controller(plant, design)
        mats = [
            closed_loop_matrix(drifted_plant_matrices(base, acts, sens, f), ctrl) for f in cases
        ]
        poles = np.linalg.eigvals(np.stack(mats))
        residuals = np.zeros((cases.shape[0], len(modes)))
        valid = np.ones(cases.shape[0], dtype=bool)
        for c, (f, p) in enumerate(zip(cases, poles, strict=True)):
            open_poles = open_loop_poles(plant.omegas * f, plant.dampings)
            matched = (pair_part_poles(plant, model, p, open_poles).matched if design.passive
                       else match_modes(open_poles, p))
            if not matched.stable:
                valid[c] = False
                unstable += 1
                continue
            damping = np.minimum(matched.damping[index], 1.0 - 1e-12)
            residuals[c] = shaper.residual(matched.freq_hz[index], damping)
    for c in np.flatnonzero(valid):
        row = residuals[c]
        worst = np.maximum(worst, row)
        if np.any(row > tolerance * (1 + 1e-7)):
            over += 1
        if float(np.max(row)) > worst_value:
            worst_value, worst_case = float(np.max(row)), cases[c]
    return ShaperDrift(
        drift=float(drift),
        n_cases=int(cases.shape[0]),
        cases_over=int(over),
        worst_residual=float(max(worst_value, 0.0)),
        worst_case=np.array(worst_case),
        unstable_cases=int(unstable),
    ), worst


def design_shaper(
    plant: ModalPlant,
    modes: Sequence[int],
    *,
    design: Design | None = None,
    kind: str | None = None,
    tolerance: float = DEFAULT_TOLERANCE,
    insensitivity: float | None = None,
    drift: float = 0.05,
    samples: int = 64,
    seed: int = 0,
) -> ShaperDesign:
    """Design an input shaper for modes of a plant (open loop, or damped by a design).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    modes : sequence of int
        Modes (1-based) to cancel, one shaper each, convolved.
    design : Design, optional
        Shape for the closed-loop modes of this design (its delay and roll-offs included).
    kind : {"zv", "zvd", "ei", "zvdd"}, optional
        Shaper kind; default chosen as the module notes say.
    tolerance : float, optional
        Tolerable residual vibration (fraction, default 0.05): the EI design value and the
        limit of the band.
    insensitivity : float, optional
        Relative frequency error (0.1 = ±10 %) over which the residual must stay under the
        tolerance.
    drift : float, optional
        Largest relative frequency shift of the drift cases (default 0.05, as ``dampctl
        assess``); 0 skips the drift check.
    samples : int, optional
        Random drift cases besides the corners (default 64).
    seed : int, optional
        Seed of the random drift cases (default 0).

    Returns
    -------
    ShaperDesign

    Raises
    ------
    UsageError
        No modes, a mode that does not exist, bad tolerance, insensitivity or drift, an
        unstable closed loop or a mode that does not oscillate in it.
    DesignError
        The design does not belong to the plant.
    """
    modes = [int(m) for m in modes]
    if not modes:
        raise UsageError("give the modes to shape for (e.g. --modes 4,5)")
    if len(set(modes)) != len(modes):
        raise UsageError(f"a mode is repeated in {modes}")
    bad = [m for m in modes if not 1 <= m <= plant.n_modes]
    if bad:
        raise UsageError(f"mode {bad[0]} does not exist (the plant has {plant.n_modes} modes)")
    if not (math.isfinite(tolerance) and 0.0 < tolerance < 1.0):
        raise UsageError(f"tolerance must be a fraction in (0, 1), got {tolerance!r}")
    if insensitivity is not None and not (
        math.isfinite(insensitivity) and 0.0 < insensitivity < 1.0
    ):
        raise UsageError(f"insensitivity must be a fraction in (0, 1), got {insensitivity!r}")
    if not (math.isfinite(drift) and 0.0 <= drift < 1.0):
        raise UsageError(f"drift must be a fraction in [0, 1), got {drift!r}")
    if kind is not None and kind not in KINDS:
        raise UsageError(f"shaper kind must be one of {', '.join(KINDS)}, got {kind!r}")
    freqs, dampings = _mode_targets(plant, modes, design)
    if kind is not None:
        reason, kinds = "given", [kind]
    elif insensitivity is not None:
        reason, kinds = "shortest meeting the insensitivity", list(KINDS)
    else:
        reason, kinds = "default", ["zvd"]
    for candidate in kinds:
        shaper = _build(candidate, freqs, dampings, modes, tolerance)
        bands = _bands(shaper, freqs, dampings, modes, tolerance)
        met = None if insensitivity is None else _covers(bands, freqs, modes, insensitivity)
        if met is not False:
            break
    if reason != "given" and met is False:
        reason = "none meets the insensitivity: the most insensitive"
    drift_result, worst = (None, None)
    if drift > 0.0:
        drift_result, worst = _drift(
            plant, design, shaper, modes, tolerance, drift, samples, seed
        )
    shaped = []
    for k, m in enumerate(modes):
        f, z = float(freqs[m - 1]), float(dampings[m - 1])
        low, high = bands[k]
        shaped.append(
            ShapedMode(
                mode=m,
                freq_hz=f,
                damping=z,
                residual=float(shaper.residual(f, z)),
                band_hz=(low, high),
                band_percent=(100.0 * (low / f - 1.0), 100.0 * (high / f - 1.0)),
                sensitivity=shaper.residual(SENSITIVITY_RATIOS * f, z),
                drift_worst=None if worst is None else float(worst[k]),
            )
        )
    return ShaperDesign(
        shaper=shaper,
        loop="open" if design is None else "closed",
        modes=tuple(shaped),
        tolerance=float(tolerance),
        insensitivity=None if insensitivity is None else float(insensitivity),
        insensitivity_met=met,
        kind_reason=reason,
        drift=drift_result,
    )
