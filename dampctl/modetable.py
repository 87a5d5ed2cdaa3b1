"""What to show for a design's closed-loop modes: one row per plant mode, matched by assignment.

Shared by ``dampctl tune``, assessment and reports, so every output speaks of the same rows:
each plant mode's open-loop frequency and damping beside the closed-loop pole assigned to it
(:func:`dampctl.closedloop.match_modes`, never a sort), the remaining (controller, filter,
delay and roll-off) poles listed apart, and whether the loop is stable — with the plant's
stated loop delay (Padé approximant) and hardware roll-offs in the loop unless told otherwise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dampctl.closedloop import closed_loop_modes, modal_damping, plant_loop_delay_s
from dampctl.design import Design
from dampctl.plant import ModalPlant

__all__ = ["TABLE_HEADERS", "ClosedLoopTable", "ModeRow", "closed_loop_table"]

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
    max_real : float
        Largest real part of any closed-loop pole (1/s).
    delay_s : float
        Loop delay (s) included (Padé approximant).
    roll_off : bool
        Whether the plant's actuator/sensor roll-offs were included.
    """

    rows: tuple[ModeRow, ...]
    controller_poles: tuple[complex, ...]
    stable: bool
    max_real: float
    delay_s: float
    roll_off: bool

    def target_min_damping(self) -> float | None:
        """Smallest closed-loop damping ratio over the target modes (None without targets)."""
        values = [r.closed_damping for r in self.rows if r.target]
        return min(values) if values else None

    @property
    def loop_note(self) -> str:
        """Plain statement of what the closed loop includes."""
        delay = (
            f"the loop delay {self.delay_s * 1e3:.4g} ms (Padé approximant, order 2)"
            if self.delay_s > 0
            else "no loop delay"
        )
        hardware = (
            "the actuator/sensor roll-offs the plant states (if any)"
            if self.roll_off
            else "no hardware roll-offs"
        )
        return f"closed-loop modes include {delay} and {hardware}"

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
        """JSON form: ``stable``, ``max_real``, ``delay_s``, ``roll_off``, ``note``, ``modes``,
        ``controller_poles``."""
        omega, damping = modal_damping(np.array(self.controller_poles, dtype=complex))
        return {
            "stable": self.stable,
            "max_real": self.max_real,
            "delay_s": self.delay_s,
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
        (:func:`dampctl.closedloop.plant_loop_delay_s`); 0 for the ideal loop.
    roll_off : bool, optional
        Include the plant's actuator/sensor roll-offs.

    Returns
    -------
    ClosedLoopTable
    """
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
        max_real=float(matched.max_real),
        delay_s=delay,
        roll_off=roll_off,
    )
