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
from typing import Any

from dampctl.closedloop import MatchedModes, closed_loop_modes, plant_loop_delay_s
from dampctl.design import Design
from dampctl.plant import ModalPlant

__all__ = ["SPILLOVER_LOSS", "check_on_plant"]

#: relative loss of a non-target mode's damping that is reported as spillover
SPILLOVER_LOSS = 0.1


def check_on_plant(
    plant: ModalPlant,
    design: Design,
    *,
    model_modes: Sequence[int] = (),
    delay_s: float | None = None,
) -> dict[str, Any]:
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
    dict
        JSON-ready: ``delay_s``, ``stable``, ``max_real_per_s`` (1/s), ``target_damping_min``,
        ``modes`` (every mode: number, role, freq_hz, open- and closed-loop damping,
        closed_loop_freq_hz, unstable), ``residual_modes`` (the non-target rows),
        ``spillover_unstable`` (non-target modes with Re ≥ 0) and ``spillover_reduced``
        (non-target modes that lost more than 10 % of their open-loop damping).
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
            {
                "mode": i + 1,
                "role": role,
                "freq_hz": float(plant.freqs_hz[i]),
                "open_loop_damping": zeta_ol,
                "closed_loop_freq_hz": float(cl.freq_hz[i]),
                "closed_loop_damping": zeta_cl,
                "unstable": is_unstable,
            }
        )
        if role != "target":
            if is_unstable:
                unstable.append(i + 1)
            elif zeta_cl < (1.0 - SPILLOVER_LOSS) * zeta_ol:
                reduced.append(i + 1)
    target_min = min(rows[i]["closed_loop_damping"] for i in targets)
    return {
        "delay_s": delay,
        "stable": cl.stable,
        "max_real_per_s": cl.max_real,
        "target_damping_min": float(target_min),
        "modes": rows,
        "residual_modes": [r for r in rows if r["role"] != "target"],
        "spillover_unstable": unstable,
        "spillover_reduced": reduced,
    }
