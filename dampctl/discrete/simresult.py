"""Results of a time simulation (:mod:`dampctl.discrete.simulate`): per output and per actuator.

Each result keeps its time history and the figures an engineer reads off it; ``to_dict`` gives
the JSON form that ``dampctl simulate --json`` prints and the report shows.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["ActuatorResult", "OutputResult", "Run", "Simulation"]


@dataclass(frozen=True)
class OutputResult:
    """One output's time history and figures.

    Attributes
    ----------
    name, unit : str
        Output (or sensor) name and SI unit.
    values : ndarray
        Samples at ``Simulation.time_s``.
    target : float
        Static value the output settles to (0 for a disturbance).
    peak : float
        Sample of largest magnitude (signed).
    final : float
        Last sample.
    overshoot : float or None
        Largest excursion beyond ``target`` in the direction of the move, % of the move
        (moves of displacement outputs only).
    settling_time_s : float or None
        From t = 0 until the output stays within ±band of ``target`` to the end of the record
        (None when it does not, or for outputs that are not displacements).
    residual_rms : float or None
        RMS of (value − target) after the command has ended (a disturbance: over the record).
    rms_error : float or None
        Disturbance runs: relative 1σ statistical error of ``residual_rms`` for the record's
        length (1/(2√(B_e T)), B_e the statistical bandwidth ∫W² … of the output's PSD).
    """

    name: str
    unit: str
    values: np.ndarray
    target: float
    peak: float
    final: float
    overshoot: float | None
    settling_time_s: float | None
    residual_rms: float | None
    rms_error: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """The JSON form (``peak``, ``final``, ``overshoot``, ``settling_time_s``,
        ``residual_rms``, plus ``target``, ``unit`` and ``rms_error``)."""
        return {
            "peak": self.peak,
            "final": self.final,
            "overshoot": self.overshoot,
            "settling_time_s": self.settling_time_s,
            "residual_rms": self.residual_rms,
            "target": self.target,
            "unit": self.unit,
            "rms_error": self.rms_error,
        }


@dataclass(frozen=True)
class ActuatorResult:
    """One actuator's force history and figures.

    Attributes
    ----------
    name : str
        Actuator name.
    force : ndarray
        Force (N) at the samples (a strut: k_s × (elongation − extension)).
    peak_force_n, rms_force_n : float
        Largest |force| and RMS force (N).
    saturated_s : float
        Time (s) its input was clipped at its limit.
    stroke_m : float
        Peak motion at a force actuator's site, or a strut's peak extension (m).
    limit : float or None
        ``max_force_n`` (a strut: ``max_stroke_m``) used for clipping; None: no limit.
    """

    name: str
    force: np.ndarray
    peak_force_n: float
    rms_force_n: float
    saturated_s: float
    stroke_m: float
    limit: float | None

    def to_dict(self) -> dict[str, Any]:
        """The JSON form (``peak_force_n``, ``rms_force_n``, ``saturated_s``, ``stroke_m``,
        ``limit``)."""
        return {
            "peak_force_n": self.peak_force_n,
            "rms_force_n": self.rms_force_n,
            "saturated_s": self.saturated_s,
            "stroke_m": self.stroke_m,
            "limit": self.limit,
        }


@dataclass(frozen=True)
class Run:
    """Outputs and actuators of one simulated loop (open or closed).

    Attributes
    ----------
    loop : {"open", "closed"}
        Which loop.
    outputs : tuple of OutputResult
        The plant's performance outputs (and a moved sensor).
    actuators : tuple of ActuatorResult
        The moving actuator and the design's actuators.
    diverged_s : float or None
        When the states grew past 1e100 and the run was stopped (the loop as it runs is
        unstable); None when it ran to the end.
    """

    loop: str
    outputs: tuple[OutputResult, ...]
    actuators: tuple[ActuatorResult, ...]
    diverged_s: float | None = None

    def output(self, name: str) -> OutputResult:
        """The output called ``name``.

        Parameters
        ----------
        name : str
            Output name.

        Returns
        -------
        OutputResult
        """
        return next(o for o in self.outputs if o.name == name)

    def actuator(self, name: str) -> ActuatorResult:
        """The actuator called ``name``.

        Parameters
        ----------
        name : str
            Actuator name.

        Returns
        -------
        ActuatorResult
        """
        return next(a for a in self.actuators if a.name == name)

    def to_dict(self) -> dict[str, Any]:
        """``{"outputs": {name: …}, "actuators": {name: …}, "diverged_s": …}``."""
        return {
            "outputs": {o.name: o.to_dict() for o in self.outputs},
            "actuators": {a.name: a.to_dict() for a in self.actuators},
            "diverged_s": self.diverged_s,
        }


@dataclass(frozen=True)
class Simulation:
    """A simulated move or disturbance: the result (closed loop with a design) and the open
    loop beside it.

    Attributes
    ----------
    kind : {"move", "disturbance"}
        What was simulated.
    time_s : ndarray
        Sample times (s), from 0.
    sample_rate_hz : float
        Sample rate (Hz).
    result : Run
        The closed loop with a design, else the open loop.
    open_loop : Run
        The open loop.
    setup : dict
        What was run (move or disturbance facts, delay, shaper, band), JSON-ready.
    notes : tuple of str
        What the engineer should know about the run.
    """

    kind: str
    time_s: np.ndarray
    sample_rate_hz: float
    result: Run
    open_loop: Run
    setup: dict = field(default_factory=dict)
    notes: tuple[str, ...] = ()

    @property
    def duration_s(self) -> float:
        """Length of the record (s)."""
        return float(self.time_s[-1])

    def to_dict(self) -> dict[str, Any]:
        """JSON form: ``outputs``, ``actuators`` (of ``result``), ``open_loop`` (same keys),
        ``loop``, ``kind``, ``sample_rate_hz``, ``duration_s``, ``samples``, ``setup``,
        ``notes``."""
        out = {
            "kind": self.kind,
            "loop": self.result.loop,
            "sample_rate_hz": self.sample_rate_hz,
            "duration_s": self.duration_s,
            "samples": int(self.time_s.size),
        }
        out.update(self.result.to_dict())
        out["open_loop"] = self.open_loop.to_dict()
        out["setup"] = self.setup
        out["notes"] = list(self.notes)
        return out
