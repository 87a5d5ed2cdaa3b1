"""Spillover check: a model-based controller's closed-loop modes on the full plant.

A controller designed on a reduced model couples to the modes left out through the actuators
(control spillover) and the sensors (observation spillover); with both present a lightly damped
residual mode can be driven unstable (M. J. Balas, "Feedback control of flexible systems",
*IEEE TAC* 23(4):673–679, 1978). :func:`check_on_plant` closes the loop on every mode of the
plant, with the stated delay (Padé) and hardware roll-offs, and flags the non-target modes that
became unstable or lost damping.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import Any

from dampctl.analysis.closedloop import MatchedModes, closed_loop_modes, plant_loop_delay_s
from dampctl.design import Design
from dampctl.model.plant import ModalPlant

__all__ = ["SPILLOVER_LOSS", "ModeCheck", "PlantCheck", "check_on_plant"]

#: relative loss of a non-target mode's damping that is reported as spillover
SPILLOVER_LOSS = 0.1


@dataclass(frozen=True)
class ModeCheck:
    """One plant mode in closed loop.

    Attributes
    ----------
    mode : int
        Mode number (1-based).
    role : {"target", "neighbour", "residual"}
        Target of the design, modelled neighbour, or left out of the design model.
    freq_hz, closed_loop_freq_hz : float
        Open- and closed-loop natural frequency (Hz) of the matched pole.
    open_loop_damping, closed_loop_damping : float
        Damping ratios (negative when the pole is unstable).
    unstable : bool
        The matched closed-loop pole has Re ≥ 0.
    """

    mode: int
    role: str
    freq_hz: float
    open_loop_damping: float
    closed_loop_freq_hz: float
    closed_loop_damping: float
    unstable: bool


@dataclass(frozen=True)
class PlantCheck:
    """Result of :func:`check_on_plant`.

    Attributes
    ----------
    delay_s : float
        Loop delay (s) used.
    stable : bool
        Every closed-loop pole (plant and controller side) has Re < 0.
    max_real_part : float
        Largest real part (1/s) of the closed-loop poles.
    target_damping_min : float
        Smallest closed-loop damping over the target modes.
    modes : tuple of ModeCheck
        Every plant mode, in order.
    spillover_unstable : tuple of int
        Non-target modes driven unstable.
    spillover_reduced : tuple of int
        Non-target modes, still stable, that lost more than ``SPILLOVER_LOSS`` of their damping.
    """

    delay_s: float
    stable: bool
    max_real_part: float
    target_damping_min: float
    modes: tuple[ModeCheck, ...]
    spillover_unstable: tuple[int, ...]
    spillover_reduced: tuple[int, ...]

    @property
    def residual_modes(self) -> tuple[ModeCheck, ...]:
        """The non-target modes (neighbours and residual modes)."""
        return tuple(m for m in self.modes if m.role != "target")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form, with ``residual_modes`` listed beside ``modes``."""
        out = asdict(self)
        out["modes"] = [asdict(m) for m in self.modes]
        out["residual_modes"] = [asdict(m) for m in self.residual_modes]
        out["spillover_unstable"] = list(self.spillover_unstable)
        out["spillover_reduced"] = list(self.spillover_reduced)
        return out


def check_on_plant(
    plant: ModalPlant,
    design: Design,
    *,
    model_modes: Sequence[int] = (),
    delay_s: float | None = None,
) -> PlantCheck:
    """Closed-loop modes of a design on the full plant, with spillover flags (Balas 1978).

    Parameters
    ----------
    plant : ModalPlant
        The full plant.
    design : Design
        The design; its ``target_modes`` are the targets.
    model_modes : sequence of int, optional
        Modes (1-based) of the design model; the non-target ones are reported as neighbours,
        all others as residual modes.
    delay_s : float, optional
        Loop delay (s), Padé approximant; default the plant's stated delay.

    Returns
    -------
    PlantCheck
    """
    delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
    targets = [m - 1 for m in design.target_modes]
    kept = [m - 1 for m in model_modes]
    cl: MatchedModes = closed_loop_modes(plant, design, delay_s=delay)
    rows, unstable, reduced = [], [], []
    for i in range(plant.n_modes):
        role = "target" if i in targets else ("neighbour" if i in kept else "residual")
        zeta_ol, zeta_cl = float(plant.dampings[i]), float(cl.damping[i])
        is_unstable = bool(cl.poles[i].real >= 0)
        rows.append(
            ModeCheck(
                mode=i + 1,
                role=role,
                freq_hz=float(plant.freqs_hz[i]),
                open_loop_damping=zeta_ol,
                closed_loop_freq_hz=float(cl.freq_hz[i]),
                closed_loop_damping=zeta_cl,
                unstable=is_unstable,
            )
        )
        if role != "target":
            if is_unstable:
                unstable.append(i + 1)
            elif zeta_cl < (1.0 - SPILLOVER_LOSS) * zeta_ol:
                reduced.append(i + 1)
    return PlantCheck(
        delay_s=delay,
        stable=bool(cl.stable),
        max_real_part=float(cl.max_real_part),
        target_damping_min=float(min(rows[i].closed_loop_damping for i in targets)),
        modes=tuple(rows),
        spillover_unstable=tuple(unstable),
        spillover_reduced=tuple(reduced),
    )
