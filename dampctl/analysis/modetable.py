"""What to show for a design's closed-loop modes: one row per plant mode, matched by assignment.

Shared by ``dampctl tune``, assessment and reports, so every output speaks of the same rows:
each plant mode's open-loop frequency and damping beside the closed-loop pole assigned to it
(:func:`dampctl.analysis.closedloop.match_modes`, never a sort), the remaining (controller, filter,
delay and roll-off) poles listed apart, and whether the loop is stable — with the plant's
stated loop delay (a cascade of [2/2] Padé sections accurate to 1.5× the top mode,
:func:`dampctl.analysis.closedloop.delay_matrices`) and hardware roll-offs in the loop unless told
otherwise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dampctl.analysis.closedloop import (
    closed_loop_modes,
    delay_sections,
    modal_damping,
    plant_loop_delay_s,
    reference_omega,
)
from dampctl.design import Design
from dampctl.model.plant import ModalPlant

__all__ = [
    "REAL_POLE_DAMPING",
    "TABLE_HEADERS",
    "ClosedLoopTable",
    "ModeRow",
    "closed_loop_table",
    "other_poles_heading",
]

#: damping ratio from which an assigned pole counts as real (overdamped mode)
REAL_POLE_DAMPING = 1.0 - 1e-9

#: column headers of :meth:`ClosedLoopTable.table_rows`
TABLE_HEADERS = (
    "mode",
    "target",
    "open (Hz)",
    "open damping",
    "closed (Hz)",
    "closed damping",
)


@dataclass(frozen=True)
class ModeRow:
    """One plant mode, open and closed loop.

    Attributes
    ----------
    mode : int
        Mode number (1-based).
    target : bool
        True when the design targets the mode.
    open_freq_hz, open_damping : float
        Natural frequency (Hz) and damping ratio of the plant mode.
    closed_freq_hz, closed_damping : float
        |p|/2π (Hz) and −Re p/|p| of the closed-loop pole assigned to it (damping 1 for a real
        pole, negative when unstable).
    """

    mode: int
    target: bool
    open_freq_hz: float
    open_damping: float
    closed_freq_hz: float
    closed_damping: float


@dataclass(frozen=True)
class ClosedLoopTable:
    """Closed-loop modes of a plant with a design.

    Attributes
    ----------
    rows : tuple of ModeRow
        One row per plant mode, in mode order.
    controller_poles : tuple of complex
        Remaining closed-loop poles (rad/s; controller, filters, delay, roll-offs), upper half
        plane and real axis, by increasing magnitude.
    stable : bool
        Every closed-loop pole in the open left half plane.
    max_real_part : float
        Largest real part of any closed-loop pole (1/s).
    delay_s : float
        Loop delay (s) included (cascade of [2/2] Padé sections).
    roll_off : bool
        Whether the plant's actuator/sensor roll-offs were included.
    delay_sections : int
        Number of [2/2] Padé sections of the delay (0 without delay).
    delay_accurate_hz : float
        Frequency (Hz) up to which the delay's phase is accurate to about 0.1° (ω T/m <= 1; at
        least 1.5× the top mode unless the section count is capped).
    passive : bool
        The structure with passive parts (no loop): the other poles are the parts' own, and a
        mode split by a tuned part shows the less damped of its two poles.
    """

    rows: tuple[ModeRow, ...]
    controller_poles: tuple[complex, ...]
    stable: bool
    max_real_part: float
    delay_s: float
    roll_off: bool
    delay_sections: int = 0
    delay_accurate_hz: float = 0.0
    passive: bool = False

    def target_min_damping(self) -> float | None:
        """Smallest closed-loop damping ratio over the target modes (None without targets)."""
        values = [r.closed_damping for r in self.rows if r.target]
        return min(values) if values else None

    @property
    def loop_note(self) -> str:
        """Plain statement of what the closed loop includes."""
        if self.passive:
            return (
                "modes of the structure with its passive parts (their own states included; no "
                "loop, no delay; a mode split by a tuned part shows the less damped of its two "
                "poles)"
            )
        if self.delay_s > 0 and self.delay_sections > 0:
            delay = (
                f"the loop delay {self.delay_s * 1e3:.4g} ms ({self.delay_sections} [2/2] Padé "
                f"section(s), phase within 0.1° up to {self.delay_accurate_hz:.4g} Hz)"
            )
        elif self.delay_s > 0:
            delay = f"the loop delay {self.delay_s * 1e3:.4g} ms (Padé approximant)"
        else:
            delay = "no loop delay"
        hardware = (
            "the actuator/sensor roll-offs the plant states (if any)"
            if self.roll_off
            else "no hardware roll-offs"
        )
        return f"closed-loop modes include {delay} and {hardware}"

    @property
    def overdamped_modes(self) -> tuple[int, ...]:
        """Modes (1-based) whose assigned closed-loop pole is real: overdamped, their second
        real pole is among :attr:`controller_poles`."""
        return tuple(r.mode for r in self.rows if r.closed_damping >= REAL_POLE_DAMPING)

    @property
    def other_poles_heading(self) -> str:
        """What :attr:`controller_poles` holds, in words."""
        return other_poles_heading(self.overdamped_modes, passive=self.passive)

    def table_rows(self) -> list[list]:
        """Rows for a text table with :data:`TABLE_HEADERS`."""
        return [
            [
                r.mode,
                "*" if r.target else "",
                r.open_freq_hz,
                r.open_damping,
                r.closed_freq_hz,
                r.closed_damping,
            ]
            for r in self.rows
        ]

    def to_dict(self) -> dict:
        """JSON form: ``stable``, ``max_real_part``, ``delay_s``, ``delay_sections``, ``roll_off``,
        ``note``, ``modes``, ``controller_poles``, ``controller_poles_note``,
        ``overdamped_modes``."""
        omega, damping = modal_damping(np.array(self.controller_poles, dtype=complex))
        return {
            "stable": self.stable,
            "max_real_part": self.max_real_part,
            "delay_s": self.delay_s,
            "delay_sections": self.delay_sections,
            "roll_off": self.roll_off,
            "note": self.loop_note,
            "modes": [
                {
                    "mode": r.mode,
                    "target": r.target,
                    "open_freq_hz": r.open_freq_hz,
                    "open_damping": r.open_damping,
                    "closed_freq_hz": r.closed_freq_hz,
                    "closed_damping": r.closed_damping,
                }
                for r in self.rows
            ],
            "controller_poles": [
                {
                    "real": float(p.real),
                    "imag": float(p.imag),
                    "freq_hz": float(w) / (2.0 * math.pi),
                    "damping": float(z),
                }
                for p, w, z in zip(self.controller_poles, omega, damping, strict=True)
            ],
            "controller_poles_note": self.other_poles_heading,
            "overdamped_modes": list(self.overdamped_modes),
        }


def closed_loop_table(
    plant: ModalPlant, design: Design, *, delay_s: float | None = None, roll_off: bool = True
) -> ClosedLoopTable:
    """Closed-loop modes of ``plant`` with ``design``, one row per plant mode.

    Parameters
    ----------
    plant : ModalPlant
        The plant the design belongs to.
    design : Design
        The design.
    delay_s : float, optional
        Loop delay (s); default the plant's stated delay
        (:func:`dampctl.analysis.closedloop.plant_loop_delay_s`); 0 for the ideal loop. A
        passive design has neither delay nor roll-off.
    roll_off : bool, optional
        Include the plant's actuator/sensor roll-offs.

    Returns
    -------
    ClosedLoopTable
    """
    if design.passive:
        from dampctl.analysis.passive import passive_modes

        matched = passive_modes(plant, design.parts).matched
        delay, roll_off = 0.0, False
    else:
        delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
        matched = closed_loop_modes(plant, design, delay_s=delay, roll_off=roll_off)
    targets = set(design.target_modes)
    rows = tuple(
        ModeRow(
            mode=k + 1,
            target=(k + 1) in targets,
            open_freq_hz=float(plant.freqs_hz[k]),
            open_damping=float(plant.dampings[k]),
            closed_freq_hz=float(matched.freq_hz[k]),
            closed_damping=float(matched.damping[k]),
        )
        for k in range(plant.n_modes)
    )
    return ClosedLoopTable(
        rows=rows,
        controller_poles=tuple(complex(p) for p in matched.other_poles),
        stable=matched.stable,
        max_real_part=float(matched.max_real_part),
        delay_s=delay,
        roll_off=roll_off,
        delay_sections=delay_sections(delay, reference_omega(plant)),
        delay_accurate_hz=_accurate_hz(delay, reference_omega(plant)),
        passive=design.passive,
    )


def other_poles_heading(overdamped_modes=(), *, passive: bool = False) -> str:
    """Heading for the closed-loop poles not assigned to a plant mode.

    Parameters
    ----------
    overdamped_modes : sequence of int, optional
        Modes (1-based) whose assigned pole is real; their second real pole is in the list.
    passive : bool, optional
        A passive design: the poles are the parts' own.

    Returns
    -------
    str
    """
    if passive:
        text = "other poles (the passive parts' own: absorbers, damper mountings, shunt networks"
    else:
        text = "other closed-loop poles (controller, filters, roll-offs, delay model"
    if overdamped_modes:
        listed = ", ".join(str(m) for m in overdamped_modes)
        text += f"; also the second real pole of overdamped mode(s) {listed}"
    return text + ")"


def _accurate_hz(delay_s: float, omega_ref: float) -> float:
    """Frequency (Hz) up to which the [2/2] cascade's phase is accurate (ω T/m <= 1)."""
    m = delay_sections(delay_s, omega_ref)
    if m == 0:
        return 0.0
    return m / delay_s / (2.0 * math.pi)
